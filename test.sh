#!/usr/bin/env bash
# The whole test suite, one command: the Rust tests (cargo test --release),
# then the Python package built from python/ and installed into a virtual
# environment under target/ (it sees the interpreter's own packages;
# maturin, pytest, pandas and numpy are installed there only if missing),
# then its tests (python/tests), which compare it with the binary just built.
#
# Usage (from anywhere): ./test.sh [extra cargo test arguments]
# PYTHON picks the interpreter (default python3).
set -euo pipefail
cd "$(dirname "$0")"

cargo test --release "$@"

py=${PYTHON:-python3}
venv=target/py-venv
if [ ! -x "$venv/bin/python" ]; then
    "$py" -m venv --system-site-packages "$venv"
fi
vpy="$venv/bin/python"
missing=()
for pkg in maturin pytest pandas numpy; do
    "$vpy" -c "import $pkg" 2>/dev/null || missing+=("$pkg")
done
if [ ${#missing[@]} -gt 0 ]; then
    "$vpy" -m pip install --quiet "${missing[@]}"
fi
# The wheel is built by maturin in this workspace's target directory, so
# the library compiled by cargo above is reused.
"$vpy" -m pip install --quiet --no-build-isolation --force-reinstall --no-deps ./python
PINFLOW_BIN="$PWD/target/release/pinflow" "$vpy" -m pytest -q python/tests
