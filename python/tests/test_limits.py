"""The command line's limits and folder rules hold for the Python API too
(issue 19): size limits of dims and edges, the pairs closure's work limit,
refused unless ``force=True``; a scan folder is locked while a scan runs and
a folder holding another scan's files is refused unless ``overwrite=True``.
The refusals are the command's own (same key and message, with flags
written as keyword arguments), and they leave the folder as it was."""

import fcntl
import os

import pytest

import pinflow
from conftest import REPO, cli

LAUGHLIN = REPO / "flows" / "laughlin_third.toml"
STRIP = REPO / "flows" / "laughlin_third_strip.toml"
SMALL_SCAN = dict(x=("lambda", 0.3, 0.9, 3), ell_max=5.0, threads=1)


def strip(wires: int, boundary: str = "open") -> str:
    text = STRIP.read_text()
    assert "wires = 8\n" in text and 'boundary = "open"' in text
    return text.replace("wires = 8\n", f"wires = {wires}\n").replace('boundary = "open"', f'boundary = "{boundary}"')


def many_terms(wires: int, terms: int) -> str:
    """A periodic array with `terms` distinct two-wire terms (an invented
    demo, the same as tests/hardening_bounds.rs builds)."""
    text = (
        f'[params]\nlambda = 0.3\n[array]\nwires = {wires}\nboundary = "periodic"\n'
        'K = [[1, 0], [0, -1]]\ncharge = [1, 1]\n[array.V]\n'
        '0 = [["1", "lambda"], ["lambda", "1"]]\n1 = [["0.1", "0"], ["0", "0.1"]]\n'
    )
    r = range(-2, 3)
    vectors = [(a, b, c, d) for a in r for b in r for c in r for d in r if c != 0 or d != 0]
    for i, (a, b, c, d) in enumerate(vectors[:terms]):
        text += f'[[term]]\nname = "t{i}"\nparticles = {{ 0 = [{a}, {b}], 1 = [{c}, {d}] }}\ncoupling = 0.01\n'
    return text


def py_words(message: str) -> str:
    """The command's message as the Python API words it."""
    for flag, word in [
        ("--force", "force=True"),
        ("--overwrite", "overwrite=True"),
        ("--closure-range", "closure_range"),
        ("--closure", "closure"),
        ("--out", "out"),
    ]:
        message = message.replace(flag, word)
    return message


def cli_refusal(*args) -> str:
    """The message of a refused command (exit 2), after file and key."""
    r = cli(*args, ok=False)
    assert r.returncode == 2, r.stderr
    line = r.stderr.strip().removeprefix("error: ")
    return line.split(": ", 2)[2]


def write(tmp_path, name: str, text: str):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_dims_above_the_dense_limit_is_refused_unless_forced(tmp_path):
    path = write(tmp_path, "open.toml", strip(600))
    m = pinflow.Model.load(path)
    with pytest.raises(pinflow.InputError) as e:
        m.dims()
    assert (e.value.file, e.value.key) == ("keyword arguments", "force")
    assert "1200 fields" in e.value.message and "force=True" in e.value.message
    assert e.value.message == py_words(cli_refusal("dims", path))
    # forced, the limit is passed: the next check (the pinned term) answers
    with pytest.raises(pinflow.InputError) as e:
        m.dims(pin=["nothing"], force=True)
    assert e.value.key != "force"


def test_edges_above_the_size_limit_is_refused_unless_forced(tmp_path):
    path = write(tmp_path, "wide.toml", strip(300))
    m = pinflow.Model.load(path)
    with pytest.raises(pinflow.InputError) as e:
        m.edges(pin=["tunnel"])
    assert e.value.key == "force" and "600 fields" in e.value.message
    assert e.value.message == py_words(cli_refusal("edges", path, "--pin", "tunnel"))
    with pytest.raises(pinflow.InputError) as e:
        m.edges(pin=["nothing"], force=True)
    assert e.value.key == "pin"


def test_a_pairs_closure_above_its_work_limit_is_refused(tmp_path):
    # 200 two-wire terms on 64 wires: about 5.2e12 units of work
    # (tests/hardening_bounds.rs derives the estimate).
    path = write(tmp_path, "terms.toml", many_terms(64, 200))
    m = pinflow.Model.load(path)
    want = py_words(cli_refusal("flow", path))
    assert "5.2e12" in want
    for call in (lambda: m.flow(), lambda: m.edges(), lambda: m.scan(x=("lambda", 0.1, 0.2, 2))):
        with pytest.raises(pinflow.InputError) as e:
            call()
        assert e.value.key == "closure"
        assert e.value.message == want
        assert "--" not in e.value.message


def test_a_scan_into_a_folder_with_another_scans_files_needs_overwrite(tmp_path):
    m = pinflow.Model.load(LAUGHLIN)
    out = tmp_path / "out"
    out.mkdir()
    (out / "points.csv").write_text("the user's own table\n")
    with pytest.raises(pinflow.InputError) as e:
        m.scan(out=out, **SMALL_SCAN)
    assert e.value.key == "out"
    assert "already holds the files of another scan (points.csv)" in e.value.message
    assert "overwrite=True" in e.value.message and "resume" not in e.value.message
    # the folder is as it was: no lock file, the user's file untouched
    assert sorted(os.listdir(out)) == ["points.csv"]
    assert (out / "points.csv").read_text() == "the user's own table\n"
    s = m.scan(out=out, overwrite=True, **SMALL_SCAN)
    assert len(s.points) == 3
    assert (out / "points.csv").read_text() == s.csv
    # the very same scan again rewrites the same bytes (run.json records it)
    again = m.scan(out=out, **SMALL_SCAN)
    assert again.csv == s.csv
    # a finished scan is another scan's files for a scan over another grid
    with pytest.raises(pinflow.InputError):
        m.scan(out=out, **dict(SMALL_SCAN, x=("lambda", 0.3, 0.9, 4)))


def test_a_scan_folder_locked_by_another_run_is_refused(tmp_path):
    m = pinflow.Model.load(LAUGHLIN)
    out = tmp_path / "out"
    out.mkdir()
    with open(out / ".pinflow.lock", "w") as held:
        held.write("4242\n")
        held.flush()
        fcntl.flock(held, fcntl.LOCK_EX | fcntl.LOCK_NB)
        with pytest.raises(pinflow.InputError) as e:
            m.scan(out=out, **SMALL_SCAN)
        fcntl.flock(held, fcntl.LOCK_UN)
    assert e.value.key == "out"
    assert "another pinflow run (pid 4242) is writing into" in e.value.message
    assert not (out / "points.csv").exists()
    assert len(m.scan(out=out, **SMALL_SCAN).points) == 3
