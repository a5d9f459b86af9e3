"""Shared helpers of the Python tests: the repository, the bundled models
and the reference command line.

The reference is the Rust binary built by `cargo test --release`
(target/release/pinflow, or $PINFLOW_BIN): an independent process, not the
extension, so every comparison checks the binding against the command
line's own JSON and CSV output.
"""

import json
import os
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
MODELS = sorted((REPO / "flows").glob("*.toml"))


def cli_binary() -> Path:
    path = Path(os.environ.get("PINFLOW_BIN", REPO / "target" / "release" / "pinflow"))
    if not path.is_file():
        pytest.fail(f"the reference binary {path} is missing: run `cargo build --release` (./test.sh does)")
    return path


def cli(*args: str, ok: bool = True) -> subprocess.CompletedProcess:
    """Run the reference binary; with `ok`, insist on exit code 0."""
    r = subprocess.run([str(cli_binary()), *map(str, args)], capture_output=True, text=True)
    if ok and r.returncode != 0:
        raise AssertionError(f"pinflow {' '.join(map(str, args))} failed ({r.returncode}): {r.stderr}")
    return r


def without_provenance(report):
    """A command's JSON without its `provenance` block (the command line,
    model digest and version), which the Python results do not carry."""
    if isinstance(report, dict):
        report = {k: v for k, v in report.items() if k != "provenance"}
    return report


def cli_json(*args: str):
    return without_provenance(json.loads(cli(*args, "--format", "json").stdout))


def cli_csv(*args: str) -> str:
    return cli(*args, "--format", "csv").stdout


@pytest.fixture(params=MODELS, ids=[p.stem for p in MODELS])
def model_path(request) -> Path:
    return request.param
