#!/usr/bin/env python3
"""Reference solver for `tailpack bench`: the same three CVaR models on the same synthetic problem, built
here independently from the raw problem data and solved with scipy.optimize.linprog(method="highs").

Usage: bench_reference.py PROBLEM.json   (written by `tailpack bench --reference ...`)

Prints one JSON object per model: build and solve seconds (medians), objective, status.

Formulations (independent of tailpack's code):
- CVaR by Rockafellar & Uryasev (2000), "Optimization of conditional value-at-risk", J. Risk 2(3), eq. 17:
  CVaR_c(x) = min over l, u >= 0 of l + 1/(1-c) sum_k p_k u_k with u_k >= -r_k.x - l.
- The return/CVaR ratio by the Charnes & Cooper (1962) change of variables z = t.x, t >= 0, with the
  scaled CVaR <= 1 and every constant right-hand side b of the feasible set multiplied by t.
"""

import json
import sys
import time
from pathlib import Path

import numpy as np
import scipy
from scipy import sparse
from scipy.optimize import linprog

TOL = 1e-9  # the primal/dual feasibility tolerance tailpack gives HiGHS


def load(path):
    spec = json.loads(Path(path).read_text())
    n, s = spec["assets"], spec["scenarios"]
    r = np.fromfile(Path(path).parent / spec["returns_file"], dtype="<f8").reshape(s, n)
    return spec, r


class Rows:
    """Constraint rows collected as COO triplets, block by block (vectorised, no per-row objects)."""

    def __init__(self, ncol):
        self.ncol, self.n = ncol, 0
        self.r, self.c, self.v, self.b = [], [], [], []

    def block(self, rows, cols, vals, rhs):
        """Adds len(rhs) rows; `rows` are 0-based within the block."""
        self.r.append(np.asarray(rows, dtype=np.int64) + self.n)
        self.c.append(np.asarray(cols, dtype=np.int64))
        self.v.append(np.asarray(vals, dtype=float))
        self.b.append(np.atleast_1d(np.asarray(rhs, dtype=float)))
        self.n += len(self.b[-1])

    def one(self, cols, vals, rhs):
        self.block(np.zeros(len(cols)), cols, vals, [rhs])

    def matrix(self):
        a = sparse.coo_matrix(
            (np.concatenate(self.v), (np.concatenate(self.r), np.concatenate(self.c))),
            shape=(self.n, self.ncol),
        ).tocsr()
        return a, np.concatenate(self.b)


def build(spec, r, model):
    """c, A_ub, b_ub, A_eq, b_eq, bounds for linprog (which minimises). Column order:
    x (or z) [n], t [ratio only], d [n, turnover], l, u [s]."""
    n, s = spec["assets"], spec["scenarios"]
    p = np.asarray(spec["probabilities"])
    conf = spec["confidence"]
    lo, hi = np.asarray(spec["lower"]), np.asarray(spec["upper"])
    cur = np.asarray(spec["current"]) if spec["current"] is not None else None
    tau = spec["turnover_max"]
    mu = p @ r
    ratio = model == "max_ratio"
    has_d = cur is not None and tau is not None
    nt = 1 if ratio else 0
    nd = n if has_d else 0
    ix, it, idd, il, iu = 0, n, n + nt, n + nt + nd, n + nt + nd + 1
    ncol = iu + s
    xs = np.arange(n)
    ub, eq = Rows(ncol), Rows(ncol)

    def scaled(rows, cols, vals, rhs, out):
        """rows . x <= rhs, or rows . z - rhs t <= 0 when scaled (Charnes-Cooper)."""
        rhs = np.atleast_1d(np.asarray(rhs, dtype=float))
        if ratio:
            k = len(rhs)
            rows = np.concatenate([rows, np.arange(k)])
            cols = np.concatenate([cols, np.full(k, it)])
            vals = np.concatenate([vals, -rhs])
            rhs = np.zeros(k)
        out.block(rows, cols, vals, rhs)

    # Rockafellar-Uryasev rows: -r_k.x - l - u_k <= 0
    ks = np.arange(s)
    ub.block(
        np.concatenate([np.repeat(ks, n), ks, ks]),
        np.concatenate([np.tile(xs, s), np.full(s, il), iu + ks]),
        np.concatenate([-r.ravel(), -np.ones(s), -np.ones(s)]),
        np.zeros(s),
    )
    cvar_cols = np.concatenate([[il], iu + ks])
    cvar_vals = np.concatenate([[1.0], p / (1 - conf)])
    # budget, and in the scaled LP the per-asset bounds as rows
    scaled(np.zeros(n), xs, np.ones(n), [1.0], eq)
    if ratio:
        scaled(xs, xs, np.ones(n), hi, ub)
        pos = np.flatnonzero(lo > 0)
        if len(pos):
            scaled(np.arange(len(pos)), pos, -np.ones(len(pos)), -lo[pos], ub)
    for g in spec["groups"]:
        m = np.asarray(g["members"], dtype=np.int64)
        if g["max"] < 1.0:
            scaled(np.zeros(len(m)), m, np.ones(len(m)), [g["max"]], ub)
        if g["min"] > 0.0:
            scaled(np.zeros(len(m)), m, -np.ones(len(m)), [-g["min"]], ub)
    if has_d:
        # x_i - d_i <= cur_i ; -x_i - d_i <= -cur_i ; sum d <= tau
        two = np.concatenate([xs, xs])
        scaled(two, np.concatenate([xs, idd + xs]), np.concatenate([np.ones(n), -np.ones(n)]), cur, ub)
        scaled(two, np.concatenate([xs, idd + xs]), -np.ones(2 * n), -cur, ub)
        scaled(np.zeros(n), idd + xs, np.ones(n), [tau], ub)

    c = np.zeros(ncol)
    if model == "max_return":
        c[xs] = -mu
        ub.one(cvar_cols, cvar_vals, spec["cvar_cap"])
    elif model == "min_cvar":
        c[cvar_cols] = cvar_vals
        ub.one(xs, -mu, -spec["return_floor"])
    else:
        c[xs] = -mu
        ub.one(cvar_cols, cvar_vals, 1.0)

    bounds = np.zeros((ncol, 2))
    bounds[:, 1] = np.inf
    if not ratio:
        bounds[xs, 0] = lo
        bounds[xs, 1] = hi
    bounds[il] = [-np.inf, np.inf]
    a_ub, b_ub = ub.matrix()
    a_eq, b_eq = eq.matrix()
    return c, a_ub, b_ub, a_eq, b_eq, bounds


def solve(spec, lp):
    c, a_ub, b_ub, a_eq, b_eq, bounds = lp
    return linprog(
        c,
        A_ub=a_ub,
        b_ub=b_ub,
        A_eq=a_eq,
        b_eq=b_eq,
        bounds=bounds,
        method="highs",
        options={
            "primal_feasibility_tolerance": TOL,
            "dual_feasibility_tolerance": TOL,
            "time_limit": float(spec["time_limit"]),
        },
    )


def main():
    spec, r = load(sys.argv[1])
    runs = max(1, int(spec.get("runs", 3)))
    long_run = float(spec.get("long_run_seconds", 20))
    for model in ("max_return", "min_cvar", "max_ratio"):
        builds, solves, res = [], [], None
        for _ in range(runs):
            t0 = time.perf_counter()
            lp = build(spec, r, model)
            t1 = time.perf_counter()
            res = solve(spec, lp)
            t2 = time.perf_counter()
            builds.append(t1 - t0)
            solves.append(t2 - t1)
            del lp
            if t2 - t0 > long_run:
                break
        objective = None
        if res.status == 0:
            objective = -res.fun if model != "min_cvar" else res.fun
        status = {0: "optimal", 1: "time_limit", 2: "infeasible", 3: "unbounded"}.get(res.status, "failed")
        print(
            json.dumps(
                {
                    "model": model,
                    "build_seconds": float(np.median(builds)),
                    "solve_seconds": float(np.median(solves)),
                    "runs": len(builds),
                    "objective": None if objective is None else float(objective),
                    "status": status,
                    "solver": f"scipy {scipy.__version__} linprog(method='highs')",
                }
            ),
            flush=True,
        )


if __name__ == "__main__":
    main()
