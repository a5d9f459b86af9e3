"""Every API call returns the numbers of the command line's JSON and CSV,
to the last digit, on every bundled model (flows/*.toml).

The reference is the Rust binary (conftest.py). Equality is exact: Python
parses the shortest round-trip decimal that both the JSON and the CSV
writer produce, so the same f64 gives the same float. The physics of these
numbers is checked against published values by the Rust tests
(tests/checks_*.rs); here only the crossing into Python is checked.
"""

import json
import math

import pandas as pd
import pytest

import pinflow
from conftest import cli_csv, cli_json, cli, without_provenance

# A second parameter point (not the defaults) for the models that have these
# parameters; invented numbers, only to leave the defaults.
MOVED = {"lambda": 0.55, "g": 0.6, "s": 0.9, "w": 0.12, "xs": 0.5}


def moved_point(m: pinflow.Model):
    return {k: v for k, v in MOVED.items() if k in m.params}


def set_flags(point):
    out = []
    for k, v in point.items():
        out += ["--set", f"{k}={v!r}"]
    return out


def same(a, b) -> bool:
    """Exact equality, NaN equal to NaN."""
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


def assert_rows_match_json(df: pd.DataFrame, rows, key: str):
    """Every numeric cell of `df` equals the field of the same name in the
    JSON rows (matched by `key`), bit for bit; at least one numeric column
    is shared, so the check cannot pass empty."""
    by_name = {r[key]: r for r in rows}
    shared = [c for c in df.columns if rows and c in rows[0] and pd.api.types.is_float_dtype(df[c])]
    assert shared or df.empty, f"no numeric CSV column is a JSON field: {list(df.columns)}"
    for _, row in df.iterrows():
        for c in shared:
            want = by_name[row[key]][c]
            # an empty CSV cell (NaN) is a JSON null
            assert same(float(row[c]), math.nan if want is None else float(want)), (row[key], c)


def test_params_are_the_defaults(model_path):
    m = pinflow.Model.load(model_path)
    report = cli_json("dims", model_path)
    assert m.params == report["parameters"]


@pytest.mark.parametrize("moved", [False, True], ids=["defaults", "moved"])
def test_dims(model_path, moved):
    m = pinflow.Model.load(model_path)
    point = moved_point(m) if moved else {}
    df = m.dims(point)
    report = cli_json("dims", model_path, *set_flags(point))
    assert df.attrs["report"] == report
    want = pinflow._frame(cli_csv("dims", model_path, *set_flags(point)))
    pd.testing.assert_frame_equal(df, want, check_exact=True)
    assert list(df["name"]) == [t["name"] for t in report["terms"]]
    assert_rows_match_json(df, report["terms"], "name")
    # the dimension column is numeric and exact (not a rounded rendering)
    assert [float(x) for x in df["dimension"]] == [t["dimension"] for t in report["terms"]]


def test_dims_keyword_parameters_equal_point_dict():
    m = pinflow.Model.load(pinflow_flows("laughlin_third"))
    a = m.dims(point={"lambda": 0.55}, g=0.6)
    b = m.dims(lambda_=0.55, g=0.6)
    pd.testing.assert_frame_equal(a, b, check_exact=True)
    assert a.attrs["report"]["parameters"]["lambda"] == 0.55


def pinflow_flows(stem):
    from conftest import REPO

    return REPO / "flows" / f"{stem}.toml"


def test_dims_with_pins():
    path = pinflow_flows("laughlin_third")
    m = pinflow.Model.load(path)
    df = m.dims(pin=["tunnel"])
    assert df.attrs["report"] == cli_json("dims", path, "--pin", "tunnel")
    pd.testing.assert_frame_equal(df, pinflow._frame(cli_csv("dims", path, "--pin", "tunnel")), check_exact=True)


def test_dims_against_array_size():
    path = pinflow_flows("laughlin_third")
    m = pinflow.Model.load(path)
    df = m.dims(wires=[4, 8, "infinite"], g=0.6)
    flags = ["--wires", "4,8,infinite", "--set", "g=0.6"]
    assert df.attrs["report"] == cli_json("dims", path, *flags)
    pd.testing.assert_frame_equal(df, pinflow._frame(cli_csv("dims", path, *flags)), check_exact=True)


@pytest.mark.parametrize("moved", [False, True], ids=["defaults", "moved"])
def test_flow(model_path, moved, tmp_path):
    m = pinflow.Model.load(model_path)
    point = moved_point(m) if moved else {}
    r = m.flow(point, out=tmp_path / "py")
    report = cli_json("flow", model_path, *set_flags(point), "--out", tmp_path / "cli")
    assert r.report == report
    assert (r.outcome, r.winner, r.ell_star) == (report["outcome"], report.get("winner"), report.get("ell_star"))
    assert r.phase == report.get("phase")
    want = pinflow._frame(cli_csv("flow", model_path, *set_flags(point)))
    pd.testing.assert_frame_equal(r.terms, want, check_exact=True)
    # the trajectory is the command's trajectory.csv, indexed by ell
    cli_traj = (tmp_path / "cli" / "trajectory.csv").read_text()
    pd.testing.assert_frame_equal(r.trajectory, pinflow._frame(cli_traj).set_index("ell"), check_exact=True)
    assert r.trajectory.index.name == "ell"
    # the files written by out= are the command's: the CSVs byte for byte,
    # the summary apart from its provenance block
    for name in ["trajectory.csv", "terms.csv"]:
        assert (tmp_path / "py" / name).read_bytes() == (tmp_path / "cli" / name).read_bytes(), name
    py_summary = json.loads((tmp_path / "py" / "summary.json").read_text())
    cli_summary = json.loads((tmp_path / "cli" / "summary.json").read_text())
    assert without_provenance(py_summary) == without_provenance(cli_summary)
    # and the same record of the run, in summary.json and run.json, made by
    # Python with its own arguments (the point as keyword arguments)
    prov, cli_prov = py_summary["provenance"], cli_summary["provenance"]
    assert prov == json.loads((tmp_path / "py" / "run.json").read_text())
    assert cli_prov == json.loads((tmp_path / "cli" / "run.json").read_text())
    assert (prov["caller"], prov["command"]) == ("python", "flow")
    assert "caller" not in cli_prov
    assert set(prov) == set(cli_prov) | {"caller"}
    for key in ["pinflow", "revision", "model_sha256", "parameters", "grid", "options"]:
        assert prov[key] == cli_prov[key], key
    assert prov.get("parameter_labels") == cli_prov.get("parameter_labels")
    assert prov["arguments"] == sorted(f"{k}={v}" for k, v in point.items())


def test_flow_options_reach_the_library():
    path = pinflow_flows("laughlin_third")
    m = pinflow.Model.load(path)
    r = m.flow(g=0.8, ell_max=3.0, closure="none", rtol=1e-9)
    report = cli_json("flow", path, "--set", "g=0.8", "--ell-max", "3", "--closure", "none", "--rtol", "1e-9")
    assert r.report == report
    assert r.report["options"]["ell_max"] == 3.0


def test_hunt(model_path):
    m = pinflow.Model.load(model_path)
    df = m.hunt(max_dim=2)
    report = cli_json("hunt", model_path, "--max-dim", "2")
    assert df.attrs["report"] == report
    pd.testing.assert_frame_equal(df, pinflow._frame(cli_csv("hunt", model_path, "--max-dim", "2")), check_exact=True)
    assert df.attrs["terms_toml"] == cli("hunt", model_path, "--max-dim", "2", "--emit-terms").stdout


def test_hunt_filters():
    path = pinflow_flows("spinless_wire")
    m = pinflow.Model.load(path)
    df = m.hunt(max_dim=3, charge="any", spin="any")
    assert df.attrs["report"] == cli_json("hunt", path, "--max-dim", "3", "--charge", "any", "--spin", "any")
    assert len(df) > 0


@pytest.mark.parametrize(
    "stem,pins",
    [("laughlin_third_strip", ["tunnel"]), ("halperin_331_strip", []), ("laughlin_third", [])],
)
def test_edges(stem, pins):
    path = pinflow_flows(stem)
    m = pinflow.Model.load(path)
    r = m.edges(pin=pins)
    flags = [f for p in pins for f in ("--pin", p)]
    report = cli_json("edges", path, *flags)
    assert r.report == report
    pd.testing.assert_frame_equal(r.table, pinflow._frame(cli_csv("edges", path, *flags)), check_exact=True)
    assert r.text == cli("edges", path, *flags).stdout


def test_flow_with_hunted_competitors():
    """Hunted competitors (--competitors DELTA) join the flow as in the
    command; a bound of 4 brings operators that the model does not list."""
    path = pinflow_flows("laughlin_third")
    m = pinflow.Model.load(path)
    r = m.flow(competitors=4.0, competitor_symmetry="none")
    report = cli_json("flow", path, "--competitors", "4", "--competitor-symmetry", "none")
    assert r.report == report
    assert any(name.startswith("auto:") for name in r.terms.iloc[:, 0])
    pd.testing.assert_frame_equal(
        r.terms, pinflow._frame(cli_csv("flow", path, "--competitors", "4", "--competitor-symmetry", "none")), check_exact=True
    )
