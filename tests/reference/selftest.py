#!/usr/bin/env python3
"""Self-test for cvar_reference.py.

Runs the reference script through its command line on

* a 3-asset, 5-scenario instance whose optima are worked out by hand below
  (plus variants with turnover, an active-CVaR budget, infeasible caps, a
  non-positive CVaR and malformed input), and
* a random 3-asset instance, cross-checking every program, Dinkelbach's
  ratio in particular, against a brute-force grid over the simplex
  (step 0.01), then against a step-1e-4 grid around the coarse maximiser.

Usage: python3 tests/reference/selftest.py   (exit 0 when all checks pass)
"""

import json
import os
import subprocess
import sys
import tempfile

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
SCRIPT = os.path.join(HERE, "cvar_reference.py")
TOL = 1e-9

# ---------------------------------------------------------------------------
# Hand instance
# ---------------------------------------------------------------------------
#
# Five equally likely scenarios (p = 0.2), c = 0.6, so the tail has mass
# 0.4 = exactly the two worst scenarios and CVaR = mean of the two largest
# losses. Returns (rows = scenarios, columns = assets A, B, C):
#
#            A      B      C
#   s1    -0.01  -0.03  -0.08
#   s2    -0.01  -0.01  -0.04
#   s3     0.01   0.03   0.06
#   s4     0.02   0.04   0.08
#   s5     0.03   0.07   0.13
#
# Every asset loses in s1, s2 and gains in s3..s5, so for any long-only x
# the two worst scenarios are s1, s2 and CVaR is linear on X:
#   CVaR(x) = -(r1 + r2)/2 . x = 0.01 a + 0.02 b + 0.06 c
#   mu . x  =                    0.008 a + 0.02 b + 0.03 c
# Bounds 0 <= x <= (1, 0.5, 1); group {B, C} <= 0.8 (so a >= 0.2).
# Writing a = 1 - b - c:
#   mu   = 0.008 + 0.012 b + 0.022 c
#   CVaR = 0.01  + 0.01  b + 0.05  c,   with b <= 0.5, b + c <= 0.8.
#
# Vertices of X (a, b, c) and their values:
#   (1, 0, 0)        mu 0.008   CVaR 0.01   ratio 0.8
#   (0.2, 0, 0.8)    mu 0.0256  CVaR 0.05   ratio 0.512
#   (0.5, 0.5, 0)    mu 0.014   CVaR 0.015  ratio 14/15
#   (0.2, 0.5, 0.3)  mu 0.0206  CVaR 0.03   ratio 0.6867
#
# min_cvar_over_x:   (1, 0, 0), CVaR 0.01.
# max_return_over_x: (0.2, 0, 0.8), mu 0.0256.
# max_ratio: mu/CVaR is linear-fractional, so its maximum is at a vertex:
#   (0.5, 0.5, 0), ratio 14/15. Dinkelbach from lambda_0 = 0.8 (the min-CVaR
#   portfolio's ratio): max mu - 0.8 CVaR = 0.004 b - 0.018 c gives
#   (0.5, 0.5, 0); lambda_1 = 14/15 and
#   F(14/15) = max (0.04 b - 0.74 c)/30 = 0 at b = 0.5, c = 0: two LPs.
# max_return with cvar_cap 0.02: 0.01 b + 0.05 c <= 0.01, i.e. b + 5c <= 1.
#   Maximise 0.012 b + 0.022 c: vertices (0.5, 0) -> 0.006,
#   (0.5, 0.1) -> 0.0082, (0, 0.2) -> 0.0044; best b = 0.5, c = 0.1:
#   x = (0.4, 0.5, 0.1), mu 0.0162, CVaR 0.02.
# min_cvar with return_floor 0.0184: 0.012 b + 0.022 c >= 0.0104.
#   B buys return at 0.01/0.012 CVaR per unit, C at 0.05/0.022, so fill B
#   to its bound 0.5 (return 0.006) and add c = 0.0044/0.022 = 0.2:
#   x = (0.3, 0.5, 0.2), CVaR 0.025 (b + c = 0.7 <= 0.8).

HAND_RETURNS = [
    [-0.01, -0.03, -0.08],
    [-0.01, -0.01, -0.04],
    [0.01, 0.03, 0.06],
    [0.02, 0.04, 0.08],
    [0.03, 0.07, 0.13],
]


def hand_instance(**changes):
    inst = {
        "confidence": 0.6,
        "probabilities": [0.2] * 5,
        "returns": HAND_RETURNS,
        "lower": [0.0, 0.0, 0.0],
        "upper": [1.0, 0.5, 1.0],
        "groups": [{"members": [1, 2], "min": 0.0, "max": 0.8}],
        "turnover_max": None,
        "current": None,
        "cvar_cap": 0.02,
        "return_floor": 0.0184,
    }
    inst.update(changes)
    return inst


# ---------------------------------------------------------------------------
# Helpers
# ---------------------------------------------------------------------------

def run(instance):
    """Run the reference script on an instance; return (rc, stdout, stderr)."""
    with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as handle:
        json.dump(instance, handle)
        path = handle.name
    try:
        proc = subprocess.run([sys.executable, SCRIPT, path],
                              capture_output=True, text=True, check=False)
    finally:
        os.unlink(path)
    return proc.returncode, proc.stdout, proc.stderr


def solve(instance):
    rc, out, err = run(instance)
    assert rc == 0, f"exit {rc}: {err}"
    return json.loads(out)


def close(got, want, what, tol=TOL):
    assert abs(got - want) <= tol, f"{what}: got {got!r}, want {want!r}"


def check(result, name, weights, objective, cvar, ret):
    entry = result[name]
    assert entry["status"] == "optimal", f"{name}: {entry}"
    close(entry["objective"], objective, f"{name} objective")
    close(entry["cvar"], cvar, f"{name} cvar")
    close(entry["expected_return"], ret, f"{name} expected_return")
    for i, (got, want) in enumerate(zip(entry["weights"], weights)):
        close(got, want, f"{name} weight {i}")


# ---------------------------------------------------------------------------
# Hand checks
# ---------------------------------------------------------------------------

def test_hand_base():
    res = solve(hand_instance())
    check(res, "max_return", [0.4, 0.5, 0.1], 0.0162, 0.02, 0.0162)
    check(res, "min_cvar", [0.3, 0.5, 0.2], 0.025, 0.025, 0.0184)
    check(res, "max_ratio", [0.5, 0.5, 0.0], 14 / 15, 0.015, 0.014)
    check(res, "min_cvar_over_x", [1.0, 0.0, 0.0], 0.01, 0.01, 0.008)
    check(res, "max_return_over_x", [0.2, 0.0, 0.8], 0.0256, 0.05, 0.0256)
    assert res["max_ratio"]["iterations"] == 2, res["max_ratio"]


def test_hand_turnover():
    # current = A only, tau = 0.4: |a - 1| + b + c = 2 (b + c) <= 0.4, so
    # b + c <= 0.2. Vertices (1,0,0) ratio 0.8; (0.8,0.2,0) mu 0.0104,
    # CVaR 0.012, ratio 13/15; (0.8,0,0.2) mu 0.0124, CVaR 0.02, ratio 0.62.
    # max_return, cap 0.011: 0.01 b + 0.05 c <= 0.001; B gives more return
    #   per unit CVaR (1.2 vs 0.44), so b = 0.1: x = (0.9, 0.1, 0), mu 0.0092.
    # min_cvar, floor 0.0104: b = 0.2 reaches it exactly, CVaR 0.012; C
    #   alone would need c = 0.0024/0.022 and CVaR 0.01545.
    # Dinkelbach: lambda_0 = 0.8 -> (0.8, 0.2, 0) -> lambda_1 = 13/15, F = 0.
    res = solve(hand_instance(turnover_max=0.4, current=[1.0, 0.0, 0.0],
                              cvar_cap=0.011, return_floor=0.0104))
    check(res, "max_return", [0.9, 0.1, 0.0], 0.0092, 0.011, 0.0092)
    check(res, "min_cvar", [0.8, 0.2, 0.0], 0.012, 0.012, 0.0104)
    check(res, "max_ratio", [0.8, 0.2, 0.0], 13 / 15, 0.012, 0.0104)
    check(res, "min_cvar_over_x", [1.0, 0.0, 0.0], 0.01, 0.01, 0.008)
    check(res, "max_return_over_x", [0.8, 0.0, 0.2], 0.0124, 0.02, 0.0124)
    assert res["max_ratio"]["iterations"] == 2, res["max_ratio"]


def test_hand_active_budget():
    # Benchmark = asset A (b_k = r_kA), active-CVaR budget 0.004. The active
    # loss b_k - r_k.x is, with a = 1 - b - c, s1: 0.02 b + 0.07 c,
    # s2: 0.03 c, and <= 0 in s3..s5 (B and C gain more than A there), so
    # the two worst are s1, s2 and active CVaR = 0.01 b + 0.05 c, linear on
    # X. The budget 0.01 b + 0.05 c <= 0.004 cuts X to the triangle (b, c) =
    # (0, 0), (0.4, 0), (0, 0.08) (group and bounds slack there):
    #   (1, 0, 0)        mu 0.008    CVaR 0.01    ratio 0.8
    #   (0.6, 0.4, 0)    mu 0.0128   CVaR 0.014   ratio 32/35
    #   (0.92, 0, 0.08)  mu 0.00976  CVaR 0.014   ratio 0.697
    # max_return (cap 0.02 slack): (0.6, 0.4, 0), mu 0.0128.
    # min_cvar, floor 0.0112: 0.012 b + 0.022 c >= 0.0032, B cheaper per
    #   unit of return, b = 0.8/3 within the budget: x = (2.2/3, 0.8/3, 0),
    #   CVaR 0.038/3.
    # max_ratio: the vertex (0.6, 0.4, 0), 32/35; Dinkelbach from 0.8 gives
    #   it at once and F(32/35) = 0: two LPs. The Charnes-Cooper LP, with
    #   b_k and the budget times t, gives the same portfolio.
    # min_active_cvar_over_x: 0 at A alone (0.01 b + 0.05 c > 0 elsewhere).
    res = solve(hand_instance(benchmark=[r[0] for r in HAND_RETURNS], active_cvar_budget=0.004,
                              return_floor=0.0112))
    check(res, "max_return", [0.6, 0.4, 0.0], 0.0128, 0.014, 0.0128)
    check(res, "min_cvar", [2.2 / 3, 0.8 / 3, 0.0], 0.038 / 3, 0.038 / 3, 0.0112)
    check(res, "max_ratio", [0.6, 0.4, 0.0], 32 / 35, 0.014, 0.0128)
    check(res, "max_ratio_cc", [0.6, 0.4, 0.0], 32 / 35, 0.014, 0.0128)
    check(res, "min_cvar_over_x", [1.0, 0.0, 0.0], 0.01, 0.01, 0.008)
    check(res, "max_return_over_x", [0.6, 0.4, 0.0], 0.0128, 0.014, 0.0128)
    check(res, "min_active_cvar_over_x", [1.0, 0.0, 0.0], 0.0, 0.01, 0.008)
    close(res["max_return"]["active_cvar"], 0.004, "max_return active_cvar")
    close(res["min_cvar"]["active_cvar"], 0.008 / 3, "min_cvar active_cvar")
    assert res["max_ratio"]["iterations"] == 2, res["max_ratio"]


def test_hand_infeasible():
    # cap 0.005 < min CVaR 0.01 and floor 0.03 > max return 0.0256.
    res = solve(hand_instance(cvar_cap=0.005, return_floor=0.03))
    assert res["max_return"]["status"] == "infeasible", res["max_return"]
    assert res["min_cvar"]["status"] == "infeasible", res["min_cvar"]
    check(res, "max_ratio", [0.5, 0.5, 0.0], 14 / 15, 0.015, 0.014)


def test_hand_not_applicable():
    # Adding 0.02 to every return adds 0.02 to mu.x and subtracts 0.02 from
    # CVaR (weights sum to 1) without reordering the losses: min CVaR over X
    # becomes 0.01 - 0.02 = -0.01 at (1,0,0), so the ratio is not applicable.
    shifted = [[v + 0.02 for v in row] for row in HAND_RETURNS]
    res = solve(hand_instance(returns=shifted))
    assert res["max_ratio"]["status"] == "not_applicable", res["max_ratio"]
    assert res["max_ratio"]["reason"], res["max_ratio"]
    check(res, "min_cvar_over_x", [1.0, 0.0, 0.0], -0.01, -0.01, 0.028)
    check(res, "max_return_over_x", [0.2, 0.0, 0.8], 0.0456, 0.03, 0.0456)


def test_bad_input():
    for broken in (hand_instance(probabilities=[0.2] * 4 + [0.3]),
                   hand_instance(turnover_max=0.1),
                   hand_instance(confidence=1.0),
                   hand_instance(groups=[{"members": [0, 3], "max": 1.0}])):
        rc, out, err = run(broken)
        assert rc != 0 and out == "" and err.strip(), (rc, out, err)


# ---------------------------------------------------------------------------
# Random instance against a simplex grid
# ---------------------------------------------------------------------------

def simplex_grid(step=0.01):
    m = int(round(1 / step))
    pts = [(i, j, m - i - j) for i in range(m + 1) for j in range(m + 1 - i)]
    return np.array(pts, dtype=float) / m


def grid_cvar(points, returns, probs, conf):
    """CVaR at each point as min over l in {L_j} of the RU function.

    The RU function l + 1/(1-c) sum_k p_k (L_k - l)^+ is convex and
    piecewise linear in l with kinks at the losses, so its minimum (the
    CVaR) is attained at one of them.
    """
    out = []
    for start in range(0, len(points), 500):
        losses = -(points[start:start + 500] @ returns.T)      # G x S
        excess = np.maximum(losses[:, None, :] - losses[:, :, None], 0.0)
        ru = losses + (excess @ probs) / (1.0 - conf)          # G x S candidates
        out.append(ru.min(axis=1))
    return np.concatenate(out)


def local_grid(centre, step, reach):
    """Simplex points centre + step*(i, j, -i-j) with |i|, |j| <= reach."""
    offs = np.arange(-reach, reach + 1) * step
    i, j = (a.ravel() for a in np.meshgrid(offs, offs))
    pts = centre + np.column_stack([i, j, -i - j])
    return pts[(pts >= 0).all(axis=1)]


def random_instance(seed=9, scenarios=40):
    rng = np.random.default_rng(seed)
    means = np.array([0.004, 0.008, 0.012])
    vols = np.array([0.02, 0.04, 0.07])
    returns = means + vols * rng.standard_normal((scenarios, 3))
    probs = rng.dirichlet(np.ones(scenarios))
    return {
        "confidence": 0.9, "probabilities": probs.tolist(),
        "returns": returns.tolist(), "lower": [0.0] * 3, "upper": [1.0] * 3,
        "groups": [], "turnover_max": None, "current": None,
        "cvar_cap": 0.0, "return_floor": 0.0,
    }


def test_random_against_grid():
    inst = random_instance()
    returns, probs = np.array(inst["returns"]), np.array(inst["probabilities"])
    conf = inst["confidence"]
    grid = simplex_grid()
    risk = grid_cvar(grid, returns, probs, conf)
    mu = probs @ returns
    ret = grid @ mu
    assert risk.min() > 0 and ret.max() > 0, "instance unsuitable for the ratio"
    inst["cvar_cap"] = float(np.median(risk))
    inst["return_floor"] = float(np.median(ret))
    res = solve(inst)

    # Moving x by delta in L1 changes mu.x by at most |mu|_inf delta and
    # every loss, hence the CVaR, by at most |R|_max delta. Rounding a point
    # of the simplex to the 0.01 grid moves it by at most 0.02 in L1.
    delta = 0.02
    d_ret = np.abs(mu).max() * delta
    d_risk = np.abs(returns).max() * delta

    def recomputed(entry):
        x = np.array(entry["weights"])
        assert abs(x.sum() - 1) <= TOL and x.min() >= -TOL, x
        r, c = float(mu @ x), float(grid_cvar(x[None, :], returns, probs, conf)[0])
        close(entry["expected_return"], r, "expected_return")
        close(entry["cvar"], c, "cvar")
        return r, c

    ratio = res["max_ratio"]
    r, c = recomputed(ratio)
    close(ratio["objective"], r / c, "ratio objective")
    grid_best = (ret / risk).max()
    slack = (d_ret + ratio["objective"] * d_risk) / (risk.min() - d_risk)
    assert ratio["objective"] >= grid_best - TOL, (ratio, grid_best)
    assert ratio["objective"] - grid_best <= slack, (ratio, grid_best, slack)
    # The ratio is quasi-concave (positive linear over positive convex), so
    # refine around the coarse maximiser with step 1e-4 and a tighter bound.
    fine = local_grid(grid[np.argmax(ret / risk)], 1e-4, 200)
    fine_ratio = (fine @ mu) / grid_cvar(fine, returns, probs, conf)
    fine_slack = slack * 1e-2
    assert ratio["objective"] >= fine_ratio.max() - TOL, (ratio, fine_ratio.max())
    assert ratio["objective"] - fine_ratio.max() <= fine_slack, (ratio, fine_ratio.max())

    lo = res["min_cvar_over_x"]
    recomputed(lo)
    assert risk.min() - d_risk <= lo["objective"] <= risk.min() + TOL, lo

    hi = res["max_return_over_x"]
    recomputed(hi)
    close(hi["objective"], ret.max(), "max return over simplex")   # a vertex

    capped = res["max_return"]
    _, c = recomputed(capped)
    assert c <= inst["cvar_cap"] + 1e-8, capped
    # Grid points under the cap bound it from below; rounding the optimum
    # to the grid lands under cap + d_risk and loses at most d_ret.
    below = ret[risk <= inst["cvar_cap"]].max()
    above = ret[risk <= inst["cvar_cap"] + d_risk].max() + d_ret
    assert below - TOL <= capped["objective"] <= above, (capped, below, above)

    floored = res["min_cvar"]
    r, _ = recomputed(floored)
    assert r >= inst["return_floor"] - 1e-8, floored
    above = risk[ret >= inst["return_floor"]].min()
    below = risk[ret >= inst["return_floor"] - d_ret].min() - d_risk
    assert below <= floored["objective"] <= above + TOL, (floored, below, above)
    return ratio, grid_best, fine_ratio.max()


def main():
    for test in (test_hand_base, test_hand_turnover, test_hand_active_budget, test_hand_infeasible,
                 test_hand_not_applicable, test_bad_input):
        test()
        print(f"ok  {test.__name__}")
    ratio, coarse, fine = test_random_against_grid()
    print(f"ok  test_random_against_grid  dinkelbach={ratio['objective']:.12f}"
          f" grid={coarse:.12f} fine_grid={fine:.12f}"
          f" iterations={ratio['iterations']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
