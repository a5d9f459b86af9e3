#!/usr/bin/env bash
# Scan throughput on the 32-field benchmark array (six term families):
# points per second with 1 and 2 threads, and the speed-up.
# Usage (from the repository root): benches/scan_throughput.sh [N]
# N x N grid (default 24). Run on an otherwise idle machine.
set -euo pipefail
cd "$(dirname "$0")/.."
n=${1:-24}
cargo build --release --quiet
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
points=$((n * n))
run() {
    local threads=$1
    local start end
    start=$(date +%s.%N)
    ./target/release/pinflow scan benches/models/array32.toml \
        --x "lambda=0.6:0.9:$n" --y "g=0.5:0.9:$n" --threads "$threads" --quiet \
        --out "$tmp/t$threads" > /dev/null
    end=$(date +%s.%N)
    python3 -c "print($end - $start)"
}
t1=$(run 1)
t2=$(run 2)
cmp -s "$tmp/t1/points.csv" "$tmp/t2/points.csv" || { echo "outputs differ between thread counts" >&2; exit 1; }
python3 -c "
p, t1, t2 = $points, $t1, $t2
print(f'{p} points')
print(f'1 thread:  {t1:.2f} s, {p / t1:.0f} points/s')
print(f'2 threads: {t2:.2f} s, {p / t2:.0f} points/s')
print(f'speed-up:  {t1 / t2:.2f}')
"
