#!/usr/bin/env bash
# Regenerates the figures the README shows, from the bundled demo model.
# Usage (from the repository root): figures/regenerate.sh
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
./target/release/pinflow scan flows/laughlin_third.toml --out "$tmp/scan" --quiet > /dev/null
./target/release/pinflow flow flows/laughlin_third.toml --set g=0.8 --out "$tmp/flow" > /dev/null
for ext in png svg pdf; do
    cp "$tmp/scan/phase.$ext" "figures/laughlin_third_phase.$ext"
    cp "$tmp/scan/ell_star.$ext" "figures/laughlin_third_ell_star.$ext"
    cp "$tmp/flow/flow.$ext" "figures/laughlin_third_flow.$ext"
done
echo "figures written to figures/"
