"""Errors: bad input raises pinflow.InputError carrying the file and the
key, worded for keyword arguments (never a command-line flag); a failed run
raises pinflow.RunError."""

import pytest

import pinflow
from conftest import REPO, cli

LAUGHLIN = REPO / "flows" / "laughlin_third.toml"

BAD_V = """
name = "bad"
[params]
lambda = 0.3
[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "lambda"], ["lambda", "one"]]
[[term]]
name = "b"
vector = [2, 2]
coupling = 0.1
"""


def test_model_file_error_names_file_and_key(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(BAD_V)
    with pytest.raises(pinflow.InputError) as e:
        pinflow.Model.load(path)
    err = e.value
    assert err.file == str(path)
    assert err.key.startswith("fields.V")
    # the same file, key and message as the command line's (exit 2)
    r = cli("dims", path, ok=False)
    assert r.returncode == 2
    assert r.stderr.strip() == f"error: {err}"


def test_from_toml_names_the_given_file():
    with pytest.raises(pinflow.InputError) as e:
        pinflow.Model.from_toml(BAD_V, file="notebook cell 3")
    assert e.value.file == "notebook cell 3"
    assert e.value.key.startswith("fields.V")


def test_from_toml_equals_load():
    m = pinflow.Model.from_toml(LAUGHLIN.read_text())
    n = pinflow.Model.load(LAUGHLIN)
    assert m.dims().attrs["report"] == n.dims().attrs["report"]


def no_flags(message: str):
    assert "--" not in message and "flag" not in message and "command line" not in message, message


def test_unknown_parameter_is_a_point_error():
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.InputError) as e:
        m.dims(mu=0.3)
    assert (e.value.file, e.value.key) == ("keyword arguments", "point")
    assert "unknown parameter `mu`" in str(e.value)
    no_flags(str(e.value))


@pytest.mark.parametrize(
    "kwargs,key",
    [
        (dict(ell_max=-1.0), "ell_max"),
        (dict(rtol=2.0), "rtol"),
        (dict(max_steps=0), "max_steps"),
        (dict(closure="all"), "closure"),
        (dict(floor=2.0), "floor"),
        (dict(stages="two"), "stages"),
    ],
)
def test_flow_option_errors_name_the_keyword(kwargs, key):
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.InputError) as e:
        m.flow(**kwargs)
    assert (e.value.file, e.value.key) == ("keyword arguments", key)
    no_flags(str(e.value))


def test_scan_axis_errors_name_the_keyword():
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.InputError) as e:
        m.scan(x=("mu", 0.0, 1.0, 3))
    assert e.value.key == "x"
    no_flags(str(e.value))
    with pytest.raises(pinflow.InputError) as e:
        m.scan(x=("lambda", 0.0, 1.0))
    assert e.value.key == "x"
    with pytest.raises(pinflow.InputError) as e:
        m.scan(x=("lambda", 0.3, 0.9, 3), threads=0)
    assert e.value.key == "threads"


def test_hunt_and_edges_errors_name_the_keyword():
    m = pinflow.Model.load(LAUGHLIN)
    for kwargs, key in [
        (dict(max_dim=-1), "max_dim"),
        (dict(spin=1), "spin"),
        (dict(charge="some"), "charge"),
        (dict(range=0), "range"),
        (dict(momentum="maybe"), "momentum"),
    ]:
        with pytest.raises(pinflow.InputError) as e:
            m.hunt(**kwargs)
        assert e.value.key == key, kwargs
        no_flags(str(e.value))
    for wires in (["four"], [0]):
        with pytest.raises(pinflow.InputError) as e:
            m.dims(wires=wires)
        assert e.value.key == "wires"
    with pytest.raises(pinflow.InputError) as e:
        m.edges(pin=["nothing"])
    assert e.value.key == "pin"
    no_flags(str(e.value))


def test_unphysical_point_names_the_model_file():
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.InputError) as e:
        m.flow(**{"lambda": 1.5})
    assert e.value.file == str(LAUGHLIN)
    assert "not positive definite" in str(e.value)
    r = cli("flow", LAUGHLIN, "--set", "lambda=1.5", ok=False)
    assert r.returncode == 2


def test_failed_run_is_a_run_error():
    """max_steps = 1 stops the integrator on its first segment: the
    command exits 1 ("the flow failed"), Python raises RunError."""
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.RunError) as e:
        m.flow(max_steps=1)
    assert "the flow failed" in str(e.value)
    assert cli("flow", LAUGHLIN, "--max-steps", "1", ok=False).returncode == 1


def test_library_advice_reads_as_keyword_arguments():
    """The library's advice names flags ("omit the flag or use
    `--momentum any`"); in Python it names the keyword argument."""
    m = pinflow.Model.load(REPO / "flows" / "two_targets.toml")
    with pytest.raises(pinflow.InputError) as e:
        m.hunt(momentum="conserved")
    assert e.value.key == "momentum"
    assert "omit the keyword argument or use `momentum any`" in str(e.value)
    no_flags(str(e.value))


def test_competitor_options_name_the_keyword():
    m = pinflow.Model.load(LAUGHLIN)
    with pytest.raises(pinflow.InputError) as e:
        m.flow(competitor_range=3)  # needs competitors=DELTA
    assert e.value.key == "competitors"
    no_flags(str(e.value))
    with pytest.raises(pinflow.InputError) as e:
        m.edges(competitors=2.0)
    assert e.value.key == "competitors"
