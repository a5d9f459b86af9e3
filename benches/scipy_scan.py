#!/usr/bin/env python3
"""The benchmark scan of `benches/models/array32.toml` in NumPy/SciPy.

An independent implementation of the same job as
`pinflow scan benches/models/array32.toml --stages 1` (one stage: the flow
stops at the first strong coupling): for every grid point build V, the
fixed point D (docs/physics.md section 1), the channels of the pairs
closure (listed terms, and l_a +- l_b of commuting pairs below the closure
bound 4 spanning at most the widest listed term plus one wire), the OPE
table (docs/physics.md section 4), and integrate the second-order flow
(section 3) with SciPy's `solve_ivp` until some |y| reaches 1 or every
coupling decays. D is carried as the dense N x N matrix; the feedback sums
over all translates as matrix products. Written from the physics, not from
the Rust code.

It serves two purposes: the throughput ratio of issue 15 (points per second
per core against `pinflow scan --threads 1`), and a second code path for the
flow's results: with `--compare POINTS_CSV` it compares ell* and the winner
with the `points.csv` of a pinflow scan of the same grid.

Usage: python3 benches/scipy_scan.py [--n N] [--method DOP853|RK45]
           [--compare DIR/points.csv] [--points K]
Run single-threaded BLAS for a per-core number (OMP_NUM_THREADS=1 etc.;
`benches/ratios.sh` does).
"""

import argparse
import csv
import math
import re
import sys
import time
import tomllib
from fractions import Fraction
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

ROOT = Path(__file__).resolve().parent.parent
MODEL = ROOT / "benches" / "models" / "array32.toml"


def value(expr, params):
    """A number or an arithmetic expression in the parameters."""
    if isinstance(expr, (int, float)):
        return float(expr)
    names = {k + "_": v for k, v in params.items()}
    expr = re.sub(r"[A-Za-z_][A-Za-z0-9_]*", lambda m: m.group(0) + "_", expr)
    return float(eval(expr, {"__builtins__": {}}, names))


class Ring:
    """A periodic array: cell K, V blocks, terms as particle vectors."""

    def __init__(self, path):
        m = tomllib.loads(Path(path).read_text())
        arr = m["array"]
        self.defaults = {k: float(v) for k, v in m["params"].items()}
        self.W = arr["wires"]
        self.kc = np.array(arr["K"], dtype=np.int64)
        self.nc = len(self.kc)
        self.N = self.W * self.nc
        self.vblocks = {int(k): v for k, v in arr["V"].items()}
        kc_inv = exact_inverse(self.kc)
        self.K = np.kron(np.eye(self.W, dtype=np.int64), self.kc)
        self.Kinv_exact = [[Fraction(0)] * self.N for _ in range(self.N)]
        for w in range(self.W):
            for a in range(self.nc):
                for b in range(self.nc):
                    self.Kinv_exact[w * self.nc + a][w * self.nc + b] = kc_inv[a][b]
        self.Kinv = np.array([[float(x) for x in row] for row in self.Kinv_exact])
        # K^-1 times the common denominator, in integers: exact pairings.
        den = math.lcm(*(x.denominator for row in kc_inv for x in row))
        self.den = den
        self.Kadj = np.array([[int(x * den) for x in row] for row in self.Kinv_exact],
                             dtype=np.int64)
        self.terms = []
        for t in m["term"]:
            parts = {int(off): np.array(p, dtype=np.int64) for off, p in t["particles"].items()}
            v = np.zeros(self.N, dtype=np.int64)
            for off, part in parts.items():
                v[off * self.nc:(off + 1) * self.nc] = self.kc @ part
            self.terms.append((t["name"], v, float(t["coupling"])))

    def V(self, params):
        V = np.zeros((self.N, self.N))
        nc = self.nc
        for n, blk in self.vblocks.items():
            B = np.array([[value(x, params) for x in row] for row in blk])
            for j in range(self.W):
                k = (j + n) % self.W
                V[j * nc:(j + 1) * nc, k * nc:(k + 1) * nc] = B
                V[k * nc:(k + 1) * nc, j * nc:(j + 1) * nc] = B.T
        return V

    def shift(self, v, s):
        return np.roll(v, s * self.nc)

    def pair(self, u, v):
        """u^T K^-1 v, exactly (integer arithmetic over the common denominator)."""
        return Fraction(int(u @ self.Kadj @ v), self.den)

    def span(self, v):
        """Width of the smallest cyclic window of wires holding v."""
        wires = [w for w in range(self.W) if np.any(v[w * self.nc:(w + 1) * self.nc])]
        best = wires[-1] - wires[0] + 1
        for i, start in enumerate(wires):
            prev = wires[i - 1]
            best = min(best, (prev - start) % self.W + 1)
        return best


def exact_inverse(k):
    n = len(k)
    a = [[Fraction(int(k[i][j])) for j in range(n)] + [Fraction(int(i == j)) for j in range(n)]
         for i in range(n)]
    for c in range(n):
        p = next(r for r in range(c, n) if a[r][c] != 0)
        a[c], a[p] = a[p], a[c]
        piv = a[c][c]
        a[c] = [x / piv for x in a[c]]
        for r in range(n):
            if r != c and a[r][c] != 0:
                f = a[r][c]
                a[r] = [x - f * y for x, y in zip(a[r], a[c])]
    return [row[n:] for row in a]


def fixed_point(K, V):
    """D = L^-T |S|^-1 L^-1 with V = L L^T, S = L^-1 K L^-T."""
    L = np.linalg.cholesky(V)
    Li = np.linalg.inv(L)
    S = Li @ K @ Li.T
    e, U = np.linalg.eigh(S)
    Sabs_inv = (U / np.abs(e)) @ U.T
    return Li.T @ Sabs_inv @ Li


class Plan:
    """Channels (families of translates) and the OPE table."""

    def __init__(self, ring, bound=4.0):
        self.ring = ring
        self.channels = []  # dicts: name, rep, translates, spin, copies, listed coupling
        self.index = {}
        for name, v, y in ring.terms:
            self.add(name, v, y)
        self.listed = len(self.channels)
        reach = max(ring.span(c["rep"]) for c in self.channels) + 1
        for a in range(self.listed):
            for b in range(a, self.listed):
                ra = self.channels[a]["rep"]
                for tb in self.channels[b]["translates"]:
                    if ring.pair(ra, tb) != 0:
                        continue
                    for s in (1, -1):
                        v = ra + s * tb
                        if not v.any() or tuple(v) in self.index or ring.span(v) > reach:
                            continue
                        self.add(f"{self.channels[a]['name']}{'+' if s > 0 else '-'}"
                                 f"{self.channels[b]['name']}", anchored(ring, v), None)
        self.ope = []
        for a, ca in enumerate(self.channels):
            for b, cb in enumerate(self.channels):
                for tb in cb["translates"]:
                    if ring.pair(ca["rep"], tb) != 0:
                        continue
                    for s, bconj in ((1, False), (-1, True)):
                        v = ca["rep"] + s * tb
                        if not v.any() or tuple(v) not in self.index:
                            continue
                        target, conj = self.index[tuple(v)]
                        weight = len(ca["translates"]) / len(self.channels[target]["translates"])
                        self.ope.append((target, conj, a, b, bconj, weight))

    def add(self, name, v, y):
        ring = self.ring
        placements = [ring.shift(v, s) for s in range(ring.W)]
        kept = []
        for t in placements:
            if not any(np.array_equal(k, t) or np.array_equal(k, -t) for k in kept):
                kept.append(t)
        copies = (sum(np.array_equal(t, v) for t in placements),
                  sum(np.array_equal(t, -v) for t in placements))
        c = len(self.channels)
        for t in kept:
            self.index.setdefault(tuple(t), (c, False))
            self.index.setdefault(tuple(-t), (c, True))
        spin = ring.pair(v, v) / 2
        T = np.array(kept, dtype=float)
        G = T @ ring.Kinv
        self.channels.append(dict(name=name, rep=v, translates=kept, spin=spin, copies=copies,
                                  y=y, P=T.T @ T, Q=G.T @ G, null=spin == 0))


def anchored(ring, v):
    """v moved so that its support window starts at wire 0."""
    wires = [w for w in range(ring.W) if np.any(v[w * ring.nc:(w + 1) * ring.nc])]
    width = ring.span(v)
    for start in wires:
        if all((w - start) % ring.W < width for w in wires):
            return ring.shift(v, -start)
    return v


def flow_point(ring, plan, params, method, rtol=1e-8, atol=1e-12, ell_max=40.0):
    """(outcome, winner name, ell*) of one flow."""
    try:
        D0 = fixed_point(ring.K.astype(float), ring.V(params))
    except np.linalg.LinAlgError:
        return "unphysical", "", None
    inc = [c for c, ch in enumerate(plan.channels)
           if c < plan.listed or 0.5 * ch["rep"] @ D0 @ ch["rep"] < 4.0 + 1e-9]
    pos = {c: i for i, c in enumerate(inc)}
    chs = [plan.channels[c] for c in inc]
    nch = len(chs)
    ope = [(pos[t], cj, pos[a], pos[b], bc, w) for (t, cj, a, b, bc, w) in plan.ope
           if t in pos and a in pos and b in pos]
    reps = np.array([ch["rep"] for ch in chs], dtype=float)
    null = np.array([ch["null"] for ch in chs])
    P = np.array([ch["P"] for ch in chs])
    Q = np.array([ch["Q"] for ch in chs])
    real_only = np.array([ch["copies"][1] > 0 for ch in chs])
    w0 = np.zeros(nch, dtype=complex)
    for i, ch in enumerate(chs):
        if ch["y"] is not None:
            p, q = ch["copies"]
            w0[i] = 0.5 * ch["y"] * (p + q)
    dims0 = 0.5 * np.einsum("ci,ij,cj->c", reps, D0, reps)
    w0[dims0 > 40.0] = 0.0
    N = ring.N
    ta, tb = np.array([e[2] for e in ope], int), np.array([e[3] for e in ope], int)
    tt = np.array([e[0] for e in ope], int)
    tconj, bconj = np.array([e[1] for e in ope]), np.array([e[4] for e in ope])
    tw = np.array([e[5] for e in ope])

    def rhs(_ell, s):
        w = s[:nch] + 1j * s[nch:2 * nch]
        D = s[2 * nch:].reshape(N, N)
        dims = 0.5 * np.einsum("ci,ij,cj->c", reps, D, reps)
        dw = (2.0 - dims) * w
        wb = np.where(bconj, np.conj(w[tb]), w[tb])
        prod = w[ta] * wb
        prod = np.where(tconj, np.conj(prod), prod)
        np.add.at(dw, tt, -0.5 * tw * prod)
        dw = np.where(real_only, dw.real + 0j, dw)
        c = -0.125 * 4.0 * np.abs(w) ** 2 * null
        M = np.tensordot(c, P, 1)
        Nm = np.tensordot(c, Q, 1)
        dD = D @ M @ D - Nm
        return np.concatenate([dw.real, dw.imag, dD.ravel()])

    def strong(_ell, s):
        return np.max(2.0 * np.abs(s[:nch] + 1j * s[nch:2 * nch])) - 1.0
    strong.terminal, strong.direction = True, 1

    def decayed(_ell, s):
        return np.max(2.0 * np.abs(s[:nch] + 1j * s[nch:2 * nch])) - 1e-6
    decayed.terminal, decayed.direction = True, -1

    y0 = np.concatenate([w0.real, w0.imag, D0.ravel()])
    sol = solve_ivp(rhs, (0.0, ell_max), y0, method=method, rtol=rtol, atol=atol,
                    events=[strong, decayed])
    if sol.t_events[0].size:
        ell = sol.t_events[0][0]
        s = sol.y_events[0][0]
        win = int(np.argmax(np.abs(s[:nch] + 1j * s[nch:2 * nch])))
        return ("strong" if chs[win]["null"] else "spinful"), chs[win]["name"], ell
    if sol.t_events[1].size:
        return "gapless", "", None
    return "undecided", "", None


def grid(n):
    xs = np.linspace(0.6, 0.9, n)
    ys = np.linspace(0.5, 0.9, n)
    return [(x, y) for y in ys for x in xs]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=24)
    ap.add_argument("--points", type=int, default=None, help="flow only the first K points")
    ap.add_argument("--method", default="DOP853")
    ap.add_argument("--compare", default=None)
    args = ap.parse_args()
    t0 = time.perf_counter()
    ring = Ring(MODEL)
    plan = Plan(ring)
    t_plan = time.perf_counter() - t0
    pts = grid(args.n)[: args.points]
    results = []
    t1, c1 = time.perf_counter(), time.process_time()
    for lam, g in pts:
        params = dict(ring.defaults, **{"lambda": lam, "g": g})
        results.append(flow_point(ring, plan, params, args.method))
    t_flow, c_flow = time.perf_counter() - t1, time.process_time() - c1
    print(f"channels {len(plan.channels)}, OPE entries {len(plan.ope)}, plan {t_plan:.2f} s")
    print(f"{len(pts)} points in {t_flow:.2f} s: {t_flow / len(pts) * 1e3:.1f} ms per point "
          f"({args.method}); CPU {c_flow:.2f} s")
    if args.compare:
        compare(args.compare, pts, results)


def compare(path, pts, results):
    rows = list(csv.DictReader(open(path)))
    worst, mismatched = 0.0, 0
    for (lam, g), (outcome, winner, ell) in zip(pts, results):
        row = next(r for r in rows
                   if math.isclose(float(r["lambda"]), lam, abs_tol=1e-12)
                   and math.isclose(float(r["g"]), g, abs_tol=1e-12))
        if row["outcome"] != outcome or (winner and row["winner"] != winner):
            mismatched += 1
            print(f"differs at lambda={lam} g={g}: {row['outcome']} {row['winner']} "
                  f"vs {outcome} {winner}", file=sys.stderr)
            continue
        if ell is not None and row["ell_star"]:
            worst = max(worst, abs(float(row["ell_star"]) - ell) / max(ell, 1.0))
    print(f"compared {len(results)} points: {mismatched} differ in outcome or winner, "
          f"largest relative ell* difference {worst:.2e}")


if __name__ == "__main__":
    main()
