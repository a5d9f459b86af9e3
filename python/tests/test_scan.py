"""A scan from Python writes what `pinflow scan` writes, byte for byte,
whatever the number of threads; the DataFrame and the grid helper read
that file."""

import json
import threading
import time

import numpy as np
import pandas as pd

import pinflow
from conftest import REPO, cli, without_provenance

LAUGHLIN = REPO / "flows" / "laughlin_third.toml"
SLIDING = REPO / "flows" / "sliding_array.toml"
HALPERIN = REPO / "flows" / "halperin_331_strip.toml"


def cli_scan(tmp_path, path, *flags):
    out = tmp_path / "cli"
    cli("scan", path, "--out", out, "--quiet", *flags)
    return out


def test_plane_equals_the_command_byte_for_byte(tmp_path):
    m = pinflow.Model.load(LAUGHLIN)
    s = m.scan(x=("lambda", 0.3, 0.95, 6), y=("g", 0.0, 0.95, 5), out=tmp_path / "py", threads=2)
    ref = cli_scan(tmp_path, LAUGHLIN, "--x", "lambda=0.3:0.95:6", "--y", "g=0:0.95:5", "--threads", "1")
    want = (ref / "points.csv").read_bytes()
    assert (tmp_path / "py" / "points.csv").read_bytes() == want
    assert s.csv.encode() == want
    # the summary equals the command's apart from its provenance block
    ref_full = json.loads((ref / "summary.json").read_text())
    ref_summary = without_provenance(ref_full)
    py_full = json.loads((tmp_path / "py" / "summary.json").read_text())
    assert without_provenance(py_full) == ref_summary
    assert s.summary == ref_summary
    # which has the same record of the run, made by Python with its arguments
    prov, ref_prov = py_full["provenance"], ref_full["provenance"]
    assert prov == json.loads((tmp_path / "py" / "run.json").read_text())
    assert (prov["caller"], prov["command"]) == ("python", "scan")
    assert "caller" not in ref_prov
    for key in ["pinflow", "revision", "model_sha256", "parameters", "parameter_labels", "grid", "options"]:
        assert prov[key] == ref_prov[key], key
    # the model labels lambda as λ (docs/columns.md: parameter_labels)
    assert prov["parameter_labels"] == {"lambda": {"label": "λ"}}
    assert prov["arguments"] == ["x=lambda=0.3:0.95:6", "y=g=0.0:0.95:5", "color_by=phase"]
    pd.testing.assert_frame_equal(s.points, pinflow._frame(want.decode()), check_exact=True)


def test_default_axes_fixed_parameters_and_options(tmp_path):
    """The model's [scan] table gives the axes (here 10 x 6 points); fixed
    parameters and flow options are keyword arguments, as --set and flags
    are for the command. Without out, a temporary directory is used and
    removed."""
    m = pinflow.Model.load(HALPERIN)
    s = m.scan(db=0.001, ell_max=30.0, threads=1)
    assert s.dir is None
    assert s.summary["axes"] == ["g=-0.9:0:10", "s=0:1:6"]
    ref = cli_scan(tmp_path, HALPERIN, "--set", "db=0.001", "--ell-max", "30")
    assert s.csv.encode() == (ref / "points.csv").read_bytes()


def test_infinite_array_with_its_quadrature_columns(tmp_path):
    m = pinflow.Model.load(SLIDING)
    s = m.scan(x=("lambda", -0.2, 0.6, 3), y=("w", 0.05, 0.2, 2), w2=0.02)
    ref = cli_scan(tmp_path, SLIDING, "--x", "lambda=-0.2:0.6:3", "--y", "w=0.05:0.2:2", "--set", "w2=0.02")
    assert s.csv.encode() == (ref / "points.csv").read_bytes()
    assert "q_points" in s.points.columns


def test_threads_do_not_change_the_result():
    m = pinflow.Model.load(LAUGHLIN)
    axes = dict(x=("lambda", 0.4, 0.9, 5), y=("g", 0.2, 0.9, 4))
    one = m.scan(**axes, threads=1)
    two = m.scan(**axes, threads=2)
    assert one.csv == two.csv


def test_grid_is_x_across_y_up():
    m = pinflow.Model.load(LAUGHLIN)
    s = m.scan(x=("lambda", 0.4, 0.9, 5), y=("g", 0.2, 0.9, 4))
    (xn, xs), (yn, ys) = s.axes
    assert (xn, yn) == ("lambda", "g")
    assert len(xs) == 5 and len(ys) == 4
    lam = s.grid("lambda")
    g = s.grid("g")
    assert lam.shape == (4, 5)
    # row iy, column ix: lambda varies along a row, g down a column
    assert np.array_equal(lam[0], xs) and np.array_equal(g[:, 0], ys)
    ell = s.grid("ell_star")
    pts = s.points
    for iy in range(4):
        for ix in range(5):
            row = pts[(pts["lambda"] == xs[ix]) & (pts["g"] == ys[iy])]
            assert len(row) == 1
            a, b = ell[iy, ix], row["ell_star"].iloc[0]
            assert (np.isnan(a) and np.isnan(b)) or a == b
    points, summary = s
    assert summary["points"] == 20 and len(points) == 20


def test_line_scan_grid_is_one_dimensional():
    m = pinflow.Model.load(LAUGHLIN)
    s = m.scan(x="lambda=0.4:0.9:7:log", y=None, g=0.8)
    assert s.grid("ell_star").shape == (7,)
    assert s.summary["axes"] == ["lambda=0.4:0.9:7:log"]


def test_the_gil_is_released_during_a_scan():
    """While a scan runs in one thread, the main thread keeps running
    Python code. If the extension held the GIL, the main thread could not
    run at all until the scan returned, and the counter would stay near 0."""
    m = pinflow.Model.load(LAUGHLIN)
    result = {}
    started = threading.Event()

    def work():
        started.set()
        t0 = time.perf_counter()
        result["s"] = m.scan(x=("lambda", 0.3, 0.95, 40), y=("g", 0.0, 0.95, 40), threads=1)
        result["seconds"] = time.perf_counter() - t0

    t = threading.Thread(target=work)
    t.start()
    started.wait()
    ticks = 0
    while t.is_alive():
        ticks += 1
        time.sleep(0.001)
    t.join()
    assert result["s"].summary["points"] == 1600
    # 1600 flows take well over 0.1 s (about 0.4 s; 400 took 0.1 s once the
    # flows got faster); the main thread ticks about once a millisecond
    # meanwhile (at least 10 even on a loaded machine).
    assert result["seconds"] > 0.1, result
    assert ticks >= 10, (ticks, result["seconds"])
