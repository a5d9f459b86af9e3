#!/usr/bin/env python3
"""Independent reference for the Gaussian fixed point, computed with mpmath.

Reads a JSON file {"digits": d, "cases": [{"K": [[...]], "V": [[...]]}, ...]}
(path as the only argument) and prints JSON
{"cases": [{"D": [[str]], "velocities": [str], "chiralities": [int]}, ...]}.

Method (the physics reference, section 1): Cholesky V = L L^T,
S = L^-1 K L^-T, symmetric eigen-decomposition S = Q diag(e) Q^T (mpmath
eigsy), |S|^-1 = Q diag(1/|e|) Q^T, D = L^-T |S|^-1 L^-1, velocities
1/|e_i| with chirality sign(e_i). Modes are listed right movers first, then
by increasing velocity (the order pinflow reports). Numbers are printed as
decimal strings with 25 significant digits.

A case may list integer vectors under "vectors"; its output then has
"dimensions": (1/2) l^T D l for each, computed in the working precision
(so that no cancellation in the quadratic form is lost to doubles).

Exit codes: 0 ok, 3 mpmath is missing, 2 bad input.
"""

import json
import sys

try:
    import mpmath
    from mpmath import mp
except ImportError:
    sys.stderr.write(
        "mpmath is not installed: the cross-check needs it (pip install mpmath)\n"
    )
    sys.exit(3)


def fixed_point(k_rows, v_rows, vectors=()):
    n = len(k_rows)
    # Floats from JSON are exact binary doubles; mpf(float) keeps them exact.
    k = mp.matrix([[mp.mpf(int(x)) for x in row] for row in k_rows])
    v = mp.matrix([[mp.mpf(float(x)) for x in row] for row in v_rows])
    l = mp.cholesky(v)
    linv = mp.inverse(l)
    s = linv * k * linv.T
    s = (s + s.T) / 2
    e, q = mp.eigsy(s)
    inv_abs = mp.zeros(n, n)
    for i in range(n):
        inv_abs[i, i] = 1 / abs(e[i])
    d = linv.T * (q * inv_abs * q.T) * linv
    modes = sorted(
        ((1 / abs(e[i]), 1 if e[i] > 0 else -1) for i in range(n)),
        key=lambda m: (-m[1], m[0]),
    )
    dims = []
    for vec in vectors:
        lv = mp.matrix([[mp.mpf(int(x))] for x in vec])
        dims.append(mp.nstr((lv.T * d * lv)[0, 0] / 2, 25))
    return {
        "dimensions": dims,
        "D": [[mp.nstr(d[i, j], 25) for j in range(n)] for i in range(n)],
        "velocities": [mp.nstr(m[0], 25) for m in modes],
        "chiralities": [m[1] for m in modes],
    }


def main():
    if len(sys.argv) != 2:
        sys.stderr.write("usage: fixed_point_mpmath.py INPUT.json\n")
        sys.exit(2)
    with open(sys.argv[1]) as f:
        data = json.load(f)
    mp.dps = int(data.get("digits", 30))
    out = {
        "mpmath": mpmath.__version__,
        "cases": [fixed_point(c["K"], c["V"], c.get("vectors", ())) for c in data["cases"]],
    }
    json.dump(out, sys.stdout)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
