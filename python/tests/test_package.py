"""The installed package: the `pinflow` command that pip puts beside the
interpreter runs the real command line, the model's metadata, docstrings,
and points evaluated in parallel threads and processes."""

import multiprocessing
import os
import pickle
import subprocess
import sys
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor
from pathlib import Path

import pinflow
from conftest import REPO, cli, cli_binary

LAUGHLIN = REPO / "flows" / "laughlin_third.toml"


def console_script() -> Path:
    """The `pinflow` script installed with the package (next to python)."""
    name = "pinflow.exe" if os.name == "nt" else "pinflow"
    path = Path(sys.executable).parent / name
    assert path.is_file(), f"{path} is missing: the package installs a `pinflow` command"
    return path


def test_console_script_is_the_command_line():
    args = ["dims", str(LAUGHLIN), "--set", "g=0.7", "--format", "json"]
    py = subprocess.run([str(console_script()), *args], capture_output=True)
    assert py.returncode == 0, py.stderr
    assert py.stdout == subprocess.run([str(cli_binary()), *args], capture_output=True).stdout


def test_console_script_exit_codes_and_help():
    bad = subprocess.run([str(console_script()), "dims", str(LAUGHLIN), "--set", "mu=1"], capture_output=True, text=True)
    assert bad.returncode == 2
    assert bad.stderr == cli("dims", LAUGHLIN, "--set", "mu=1", ok=False).stderr
    usage = subprocess.run([str(console_script()), "frobnicate"], capture_output=True, text=True)
    assert usage.returncode == 2 and "frobnicate" in usage.stderr
    h = subprocess.run([str(console_script()), "--help"], capture_output=True, text=True)
    assert h.returncode == 0 and "scan" in h.stdout


def test_run_cli_returns_the_exit_code(capfd):
    assert pinflow.run_cli(["dims", str(LAUGHLIN), "--set", "mu=1"]) == 2
    assert "unknown parameter" in capfd.readouterr().err


def test_model_metadata():
    m = pinflow.Model.load(LAUGHLIN)
    assert m.name == "filling-1/3 wire array"
    assert m.file == str(LAUGHLIN)
    assert m.params == {"lambda": 0.8, "g": 0.5, "kF": 0.05, "db": 0.0}
    assert m.terms[0] == "tunnel"
    assert "laughlin_third" in repr(m)


def test_help_and_docstrings():
    assert "flow options" in pinflow.Model.flow.__doc__
    assert "grid" in pinflow.ScanResult.grid.__doc__
    text = subprocess.run(
        [sys.executable, "-c", "import pinflow; help(pinflow.Model.flow)"],
        capture_output=True,
        text=True,
        env={**os.environ, "PAGER": "cat"},
    ).stdout
    assert "ell_max" in text and "FlowResult" in text
    stubs = Path(pinflow.__file__).parent
    assert (stubs / "_native.pyi").is_file() and (stubs / "py.typed").is_file()


def test_points_in_parallel_threads_equal_serial():
    m = pinflow.Model.load(LAUGHLIN)
    points = [{"lambda": 0.5 + 0.05 * i, "g": 0.7} for i in range(6)]
    serial = [m.flow(p).report for p in points]
    with ThreadPoolExecutor(max_workers=2) as pool:
        parallel = [r.report for r in pool.map(lambda p: m.flow(p), points)]
    assert parallel == serial


def flow_report(args):
    m, point = args
    return m.flow(point).report


def test_a_model_travels_to_a_process_pool():
    m = pinflow.Model.load(LAUGHLIN)
    copy = pickle.loads(pickle.dumps(m))
    assert (copy.name, copy.file, copy.source) == (m.name, m.file, LAUGHLIN.read_text())
    points = [{"lambda": 0.55, "g": 0.7}, {"lambda": 0.75, "g": 0.85}]
    serial = [m.flow(p).report for p in points]
    # spawn, not fork: a forked child would inherit the parent's worker
    # threads' locks but not the threads
    spawn = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=2, mp_context=spawn) as pool:
        assert list(pool.map(flow_report, [(m, p) for p in points])) == serial
