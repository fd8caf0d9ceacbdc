#!/usr/bin/env python3
"""Independent reference solver for tailpack's CVaR portfolio programs.

The Rust test-suite runs this script to check tailpack's LP optima against
scipy's HiGHS ``linprog``. It reads one JSON instance and prints one JSON
object holding the results ``max_return``, ``min_cvar``, ``max_ratio``,
``min_cvar_over_x`` and ``max_return_over_x``; with an active-CVaR budget
also ``max_ratio_cc`` (the ratio by its own Charnes-Cooper LP) and
``min_active_cvar_over_x``.

Usage::

    python3 tests/reference/cvar_reference.py INPUT.json

Exit status is 0 on success (whatever the LP statuses are) and 2 on bad
input, with the reason on stderr.

Notation: S scenarios with probabilities p_k, N assets, simple returns
r_k (row k of R), loss L_k(x) = -r_k . x, expected return mu . x with
mu = sum_k p_k r_k, confidence c and tail fraction 1 - c.

Transaction costs (optional ``cost_rates``, one-way fractions per asset,
with ``current`` holdings h): every "return" is net of the cost of getting
there, N(x) = mu . x - sum_i rate_i |x_i - h_i|, written with the
turnover variables d_i >= |x_i - h_i| as mu . x - rate . d (exact where
N is maximised or bounded below, since rate >= 0). Each result then also
reports ``cost`` and ``expected_return_net`` of its portfolio.

Active-CVaR budget (optional ``benchmark``, the benchmark's return b_k in
each scenario, with ``active_cvar_budget`` B): X also requires
CVaR_c of the active loss A_k(x) = b_k - r_k . x to be at most B, written
after Rockafellar & Uryasev (2000) with its own auxiliaries l_a, v_k:
l_a + 1/(1-c) sum_k p_k v_k <= B, v_k >= 0, v_k >= A_k(x) - l_a. Every
program then runs over that smaller X, and each result also reports the
``active_cvar`` of its portfolio (by sorting the active losses).

Surplus basis (optional ``liability_offsets``, the liabilities' part
c_k = l_k / F of each scenario's loss: the liability proxy's return l_k over
the funded ratio F): the loss is the surplus loss L_k(x) = c_k - r_k . x
(Sharpe & Tint 1990, "Liabilities - a new approach", Journal of Portfolio
Management 16(2): surplus return on assets r_k . x - l_k / F), so the RU rows
read u_k >= c_k - r_k . x - l, and every "return" is the expected surplus
return N(x) - sum_k p_k c_k (a constant taken off: the floor row's bound
moves by it, and the Charnes-Cooper LP carries it as a coefficient on t).
Each result's ``cvar`` and ``expected_return`` are then the surplus ones.
Without the key every c_k is 0.
"""

import json
import sys

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog

LP_OPTIONS = {
    "presolve": True,
    "primal_feasibility_tolerance": 1e-10,
    "dual_feasibility_tolerance": 1e-10,
}
CUM_PROB_TOL = 1e-12
DINKELBACH_TOL = 1e-12
DINKELBACH_MAX_ITER = 100


class InputError(ValueError):
    """The instance file is malformed or inconsistent."""


# ---------------------------------------------------------------------------
# Input
# ---------------------------------------------------------------------------

def _vector(data, key, n=None):
    value = np.asarray(data[key], dtype=float)
    if value.ndim != 1 or (n is not None and value.size != n):
        raise InputError(f"'{key}' must be a list of {n if n else 'some'} numbers")
    if not np.all(np.isfinite(value)):
        raise InputError(f"'{key}' must hold finite numbers")
    return value


def _bounds(data, key, n, missing):
    """Per-asset bounds; null (or an infinite value) means no bound."""
    raw = data[key]
    if not isinstance(raw, list) or len(raw) != n:
        raise InputError(f"'{key}' must be a list of {n} numbers")
    value = np.array([missing if v is None else v for v in raw], dtype=float)
    if np.any(np.isnan(value)):
        raise InputError(f"'{key}' must hold numbers")
    return value


def _number(data, key):
    value = data[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"'{key}' must be a number")
    if not np.isfinite(value):
        raise InputError(f"'{key}' must be finite")
    return float(value)


def _groups(raw, n):
    groups = []
    for j, group in enumerate(raw or []):
        members = group["members"]
        if not all(isinstance(i, int) and not isinstance(i, bool) for i in members):
            raise InputError(f"group {j}: members must be integers")
        if len(set(members)) != len(members) or any(i < 0 or i >= n for i in members):
            raise InputError(f"group {j}: members must be distinct indices in [0, {n})")
        lo = -np.inf if group.get("min") is None else float(group["min"])
        hi = np.inf if group.get("max") is None else float(group["max"])
        if lo > hi:
            raise InputError(f"group {j}: min > max")
        groups.append((list(members), lo, hi))
    return groups


def _turnover(data, n):
    tau = data.get("turnover_max")
    rates = None
    if data.get("cost_rates") is not None:
        rates = _vector(data, "cost_rates", n)
        if np.any(rates < 0):
            raise InputError("'cost_rates' must be non-negative")
    if tau is not None:
        tau = _number(data, "turnover_max")
        if tau < 0:
            raise InputError("'turnover_max' must be non-negative")
    needs_current = tau is not None or (rates is not None and np.any(rates > 0))
    if not needs_current:
        return None, None, None
    if data.get("current") is None:
        raise InputError("'current' is required with 'turnover_max' or positive 'cost_rates'")
    current = _vector(data, "current", n)
    if rates is None or not np.any(rates > 0):
        rates = None
    return tau, current, rates


def _active(data, s):
    """The benchmark's scenario returns and the active-CVaR budget, both or neither."""
    if data.get("benchmark") is None and data.get("active_cvar_budget") is None:
        return None, None
    if data.get("benchmark") is None or data.get("active_cvar_budget") is None:
        raise InputError("'benchmark' and 'active_cvar_budget' go together")
    budget = _number(data, "active_cvar_budget")
    if budget < 0:
        raise InputError("'active_cvar_budget' must be non-negative")
    return _vector(data, "benchmark", s), budget


def parse_instance(data):
    """Validate the JSON instance and return it as a dict of numpy arrays."""
    try:
        conf = _number(data, "confidence")
        if not 0.0 < conf < 1.0:
            raise InputError("'confidence' must lie in (0, 1)")
        returns = np.asarray(data["returns"], dtype=float)
        if returns.ndim != 2 or returns.size == 0:
            raise InputError("'returns' must be a non-empty S x N matrix")
        if not np.all(np.isfinite(returns)):
            raise InputError("'returns' must hold finite numbers")
        s, n = returns.shape
        probs = _vector(data, "probabilities", s)
        if np.any(probs < 0) or abs(probs.sum() - 1.0) > 1e-9:
            raise InputError("'probabilities' must be non-negative and sum to 1")
        lower, upper = _bounds(data, "lower", n, -np.inf), _bounds(data, "upper", n, np.inf)
        if np.any(lower > upper) or np.any(lower == np.inf) or np.any(upper == -np.inf):
            raise InputError("'lower'/'upper' are inconsistent for some asset")
        tau, current, rates = _turnover(data, n)
        benchmark, budget = _active(data, s)
        offsets = np.zeros(s)
        if data.get("liability_offsets") is not None:
            offsets = _vector(data, "liability_offsets", s)
        return {
            "confidence": conf, "probs": probs, "returns": returns,
            "lower": lower, "upper": upper,
            "groups": _groups(data.get("groups"), n),
            "tau": tau, "current": current, "rates": rates,
            "cvar_cap": _number(data, "cvar_cap"),
            "return_floor": _number(data, "return_floor"),
            "benchmark": benchmark, "budget": budget,
            "offsets": offsets,
        }
    except KeyError as err:
        raise InputError(f"missing key {err}") from None
    except (TypeError, ValueError) as err:
        if isinstance(err, InputError):
            raise
        raise InputError(f"malformed instance: {err}") from None


# ---------------------------------------------------------------------------
# Exact CVaR of a fixed portfolio
# ---------------------------------------------------------------------------

def exact_cvar(inst, x, losses=None):
    """CVaR of portfolio x by sorting the scenario losses (or of the given losses).

    VaR_c is the smallest loss l with P(L <= l) >= c, and
    CVaR_c = VaR_c + 1/(1-c) * sum_k p_k (L_k - VaR_c)^+
    (Rockafellar & Uryasev (2000), "Optimization of conditional
    value-at-risk", Journal of Risk 2(3), Theorem 1: VaR_c is the left end
    of the set of minimisers of F_c(x, .), so this is min_l F_c(x, l)).
    """
    conf, probs = inst["confidence"], inst["probs"]
    if losses is None:
        losses = inst["offsets"] - inst["returns"] @ x
    order = np.argsort(losses, kind="stable")
    cum = np.cumsum(probs[order])
    idx = int(np.searchsorted(cum, conf - CUM_PROB_TOL, side="left"))
    var = losses[order[min(idx, len(order) - 1)]]
    excess = np.maximum(losses - var, 0.0)
    return float(var + probs @ excess / (1.0 - conf))


def exact_active_cvar(inst, x):
    """CVaR of the active loss b_k - r_k . x, by the same sorting."""
    return exact_cvar(inst, x, inst["benchmark"] - inst["returns"] @ x)


def expected_returns(inst):
    """mu = sum_k p_k r_k."""
    return inst["probs"] @ inst["returns"]


def expected_offset(inst):
    """sum_k p_k c_k: the liabilities' expected part of the loss (0 without liabilities)."""
    return float(inst["probs"] @ inst["offsets"])


# ---------------------------------------------------------------------------
# LP construction
# ---------------------------------------------------------------------------
#
# Variable layout: [ x (N) | l (1) | u (S) | d (N, only with turnover or costs)
# | l_a (1) | v (S), only with an active-CVaR budget ].
# The l and u blocks are the Rockafellar-Uryasev auxiliaries; they are
# present only when the model involves CVaR. l_a and v are those of the
# active loss.

class Layout:
    """Column offsets of one LP's variable blocks."""

    def __init__(self, inst, with_cvar, budget_row=True):
        self.s, self.n = inst["returns"].shape
        self.with_cvar = with_cvar
        self.l = self.n
        self.u = self.n + 1
        self.d = self.n + (1 + self.s if with_cvar else 0)
        self.has_d = inst["tau"] is not None or inst["rates"] is not None
        self.la = self.d + (self.n if self.has_d else 0)
        self.has_active = inst["benchmark"] is not None
        self.budget_row = budget_row
        self.v = self.la + 1
        self.total = self.la + (1 + self.s if self.has_active else 0)

    def active_row(self, inst):
        """Coefficients of l_a + 1/(1-c) sum_k p_k v_k, the RU function of the active loss."""
        row = np.zeros(self.total)
        row[self.la] = 1.0
        row[self.v:self.v + self.s] = inst["probs"] / (1.0 - inst["confidence"])
        return row

    def cvar_row(self, inst):
        """Coefficients of the RU objective l + 1/(1-c) sum_k p_k u_k.

        Rockafellar & Uryasev (2000), Journal of Risk 2(3), scenario form
        of F_c(x, l) = l + 1/(1-c) sum_k p_k [L_k(x) - l]^+, whose minimum
        over l is CVaR_c(x) (Theorem 1); minimising it jointly in (x, l)
        minimises CVaR_c over x (Theorem 2).
        """
        row = np.zeros(self.total)
        row[self.l] = 1.0
        row[self.u:self.u + self.s] = inst["probs"] / (1.0 - inst["confidence"])
        return row


def _ru_block(inst, lay):
    """Rows u_k >= L_k(x) - l, i.e. -r_k.x - l - u_k <= -c_k.

    Rockafellar & Uryasev (2000), Journal of Risk 2(3), linear-programming
    form: [L_k - l]^+ is replaced by u_k with u_k >= 0, u_k >= L_k(x) - l.
    """
    s = lay.s
    x_part = sp.csr_matrix(-inst["returns"])
    l_part = sp.csr_matrix(-np.ones((s, 1)))
    u_part = -sp.identity(s, format="csr")
    pad = sp.csr_matrix((s, lay.total - lay.u - s))
    return sp.hstack([x_part, l_part, u_part, pad], format="csr"), -inst["offsets"]


def _active_block(inst, lay):
    """Rows v_k >= b_k - r_k.x - l_a, i.e. -r_k.x - l_a - v_k <= -b_k, and
    the budget row l_a + 1/(1-c) sum_k p_k v_k <= B unless the program
    minimises that function itself (Rockafellar & Uryasev 2000, the same
    linear-programming form for the active loss)."""
    s = lay.s
    a = sp.lil_matrix((s, lay.total))
    a[:, :lay.n] = -inst["returns"]
    a[:, lay.la] = -1.0
    a[:, lay.v:lay.v + s] = -sp.identity(s)
    rows, rhs = [a.tocsr()], [-inst["benchmark"]]
    if lay.budget_row:
        rows.append(sp.csr_matrix(lay.active_row(inst)))
        rhs.append(np.array([inst["budget"]]))
    return sp.vstack(rows, format="csr"), np.concatenate(rhs)


def _group_block(inst, lay):
    rows, rhs = [], []
    for members, lo, hi in inst["groups"]:
        coef = np.zeros(lay.total)
        coef[members] = 1.0
        if np.isfinite(hi):
            rows.append(coef)
            rhs.append(hi)
        if np.isfinite(lo):
            rows.append(-coef)
            rhs.append(-lo)
    return rows, rhs


def _turnover_block(inst, lay):
    """x_i - d_i <= cur_i, -x_i - d_i <= -cur_i, and sum_i d_i <= tau with a turnover limit."""
    n, cur = lay.n, inst["current"]
    eye_x = sp.identity(n, format="csr")
    left = sp.csr_matrix((n, lay.d - n))
    right = sp.csr_matrix((n, lay.total - lay.d - n))
    top = sp.hstack([eye_x, left, -eye_x, right], format="csr")
    mid = sp.hstack([-eye_x, left, -eye_x, right], format="csr")
    if inst["tau"] is None:
        return sp.vstack([top, mid], format="csr"), np.concatenate([cur, -cur])
    total = np.zeros(lay.total)
    total[lay.d:lay.d + n] = 1.0
    a = sp.vstack([top, mid, sp.csr_matrix(total)], format="csr")
    return a, np.concatenate([cur, -cur, [inst["tau"]]])


def feasible_set(inst, lay):
    """Sparse (A_ub, b_ub, A_eq, b_eq, bounds) describing x in X."""
    blocks, rhs = [], []
    if lay.with_cvar:
        a, b = _ru_block(inst, lay)
        blocks.append(a)
        rhs.append(b)
    g_rows, g_rhs = _group_block(inst, lay)
    if g_rows:
        blocks.append(sp.csr_matrix(np.array(g_rows)))
        rhs.append(np.array(g_rhs))
    if lay.has_d:
        a, b = _turnover_block(inst, lay)
        blocks.append(a)
        rhs.append(b)
    if lay.has_active:
        a, b = _active_block(inst, lay)
        blocks.append(a)
        rhs.append(b)
    a_eq = np.zeros((1, lay.total))
    a_eq[0, :lay.n] = 1.0
    bounds = np.zeros((lay.total, 2))
    bounds[:lay.n, 0], bounds[:lay.n, 1] = inst["lower"], inst["upper"]
    bounds[lay.n:, 1] = np.inf
    if lay.with_cvar:
        bounds[lay.l] = (-np.inf, np.inf)
    if lay.has_active:
        bounds[lay.la] = (-np.inf, np.inf)
    return blocks, rhs, sp.csr_matrix(a_eq), np.array([1.0]), bounds


def solve_lp(inst, lay, objective, extra_rows=(), extra_rhs=()):
    """Minimise objective . z over X plus extra rows; return (status, z, fun)."""
    blocks, rhs, a_eq, b_eq, bounds = feasible_set(inst, lay)
    blocks += [sp.csr_matrix(np.atleast_2d(row)) for row in extra_rows]
    rhs += [np.array([v]) for v in extra_rhs]
    a_ub = sp.vstack(blocks, format="csr") if blocks else None
    b_ub = np.concatenate(rhs) if rhs else None
    res = linprog(objective, A_ub=a_ub, b_ub=b_ub, A_eq=a_eq, b_eq=b_eq,
                  bounds=bounds, method="highs", options=LP_OPTIONS)
    status = {0: "optimal", 2: "infeasible", 3: "unbounded"}.get(
        res.status, f"error: {res.message}")
    return status, res.x, res.fun


# ---------------------------------------------------------------------------
# The five programs
# ---------------------------------------------------------------------------

def cost(inst, x):
    """sum_i rate_i |x_i - h_i|: the one-way cost of trading from h to x."""
    if inst["rates"] is None:
        return 0.0
    return float(inst["rates"] @ np.abs(x - inst["current"]))


def net_return(inst, x):
    """mu . x minus the cost of getting there (less the liabilities' expected part)."""
    return float(expected_returns(inst) @ x) - cost(inst, x) - expected_offset(inst)


def _report(inst, status, z, objective):
    if status != "optimal":
        return {"status": status}
    x = np.asarray(z[:inst["returns"].shape[1]], dtype=float)
    out = {
        "status": status,
        "objective": float(objective),
        "weights": x.tolist(),
        "cvar": exact_cvar(inst, x),
        "expected_return": float(expected_returns(inst) @ x) - expected_offset(inst),
        "cost": cost(inst, x),
        "expected_return_net": net_return(inst, x),
    }
    if inst["benchmark"] is not None:
        out["active_cvar"] = exact_active_cvar(inst, x)
    return out


def _return_row(inst, lay):
    """mu . x - rate . d: the (net) expected return as an LP row."""
    row = np.zeros(lay.total)
    row[:lay.n] = expected_returns(inst)
    if inst["rates"] is not None:
        row[lay.d:lay.d + lay.n] = -inst["rates"]
    return row


def max_return(inst, capped):
    """max N(x) over X, with CVaR_c(x) <= cvar_cap when capped."""
    lay = Layout(inst, with_cvar=capped)
    rows, rhs = ([lay.cvar_row(inst)], [inst["cvar_cap"]]) if capped else ((), ())
    status, z, fun = solve_lp(inst, lay, -_return_row(inst, lay), rows, rhs)
    return _report(inst, status, z, None if fun is None else -fun - expected_offset(inst))


def min_cvar(inst, floored):
    """min CVaR_c(x) over X, with N(x) >= return_floor when floored."""
    lay = Layout(inst, with_cvar=True)
    floor = inst["return_floor"] + expected_offset(inst)
    rows, rhs = ([-_return_row(inst, lay)], [-floor]) if floored else ((), ())
    status, z, fun = solve_lp(inst, lay, lay.cvar_row(inst), rows, rhs)
    return _report(inst, status, z, fun)


def parametric_step(inst, lam):
    """Solve F(lam) = max_{x in X} mu.x - lam * CVaR_c(x) as one LP.

    Dinkelbach (1967), "On nonlinear fractional programming", Management
    Science 13(7): F(lam) = max_x N(x) - lam D(x), with N = mu.x net of
    costs (concave) and D = CVaR_c (convex); CVaR_c is linearised after Rockafellar & Uryasev (2000),
    Journal of Risk 2(3), which is exact here because lam >= 0 makes the
    LP minimise the RU function over (l, u).
    """
    lay = Layout(inst, with_cvar=True)
    objective = lam * lay.cvar_row(inst) - _return_row(inst, lay)
    status, z, fun = solve_lp(inst, lay, objective)
    if status != "optimal":
        return status, None, None
    return status, np.asarray(z[:lay.n]), -fun - expected_offset(inst)


def _not_applicable(reason):
    return {"status": "not_applicable", "reason": reason}


def _ratio_preconditions(lowest, highest):
    if lowest["status"] != "optimal" or highest["status"] != "optimal":
        return f"min CVaR over X is {lowest['status']}, max return over X is {highest['status']}"
    if lowest["objective"] <= 0.0:
        return f"min CVaR over X is {lowest['objective']!r} <= 0"
    if highest["objective"] <= 0.0:
        return f"max return over X is {highest['objective']!r} <= 0"
    return None


def max_ratio(inst, lowest, highest):
    """max mu.x / CVaR_c(x) over X by Dinkelbach's parametric method.

    Dinkelbach (1967), Management Science 13(7): with lam_k = N(x_k)/D(x_k),
    x_{k+1} maximises N(x) - lam_k D(x); F(lam_k) >= 0, lam_k increases,
    and F(lam_k) = 0 exactly when lam_k is the optimal ratio (Dinkelbach's
    theorem). Requires D > 0 on X, guaranteed by min CVaR over X > 0.
    Stops when F(lam) <= 1e-12 * max(1, |mu.x|), when lam no longer
    increases (solver precision reached), or after 100 LPs.
    """
    reason = _ratio_preconditions(lowest, highest)
    if reason:
        return _not_applicable(reason)
    lam = 0.0
    if lowest["expected_return_net"] > 0.0:
        lam = lowest["expected_return_net"] / lowest["cvar"]
    best = None
    for iteration in range(1, DINKELBACH_MAX_ITER + 1):
        status, x, f_val = parametric_step(inst, lam)
        if status != "optimal":
            return {"status": status, "iterations": iteration}
        ret, risk = net_return(inst, x), exact_cvar(inst, x)
        new_lam = ret / risk
        if best is None or new_lam >= best[0]:
            best = (new_lam, x)
        converged = f_val <= DINKELBACH_TOL * max(1.0, abs(ret))
        stalled = new_lam <= lam
        lam = max(lam, new_lam)
        if converged or stalled:
            break
    out = _report(inst, "optimal", best[1], best[0])
    out["iterations"] = iteration
    out["converged"] = bool(converged or stalled)
    out["final_f"] = float(f_val)
    return out


def min_active_cvar(inst):
    """min over X of the active CVaR, its budget left out: the budget leaves
    some portfolio exactly when this is <= B."""
    lay = Layout(inst, with_cvar=False, budget_row=False)
    status, z, fun = solve_lp(inst, lay, lay.active_row(inst))
    return _report(inst, status, z, fun)


def _cc_columns(inst):
    """Column offsets of the Charnes-Cooper LP:
    [ z (N) | t | l | u (S) | d (N, with turnover or costs) | l_a | v (S) ]."""
    s, n = inst["returns"].shape
    cols = {"z": 0, "t": n, "l": n + 1, "u": n + 2}
    cols["d"] = n + 2 + s
    has_d = inst["tau"] is not None or inst["rates"] is not None
    cols["la"] = cols["d"] + (n if has_d else 0)
    cols["v"] = cols["la"] + 1
    cols["total"] = cols["v"] + s
    return cols, has_d


def _cc_rows(inst, cols, has_d):
    """Every row of X multiplied through by t (Charnes & Cooper 1962): each
    constant b of a row becomes b*t, as a column coefficient -b on t, so all
    rows are homogeneous (<= 0) except the normalisation of the scaled CVaR."""
    s, n = inst["returns"].shape
    c, probs, ret = inst["confidence"], inst["probs"], inst["returns"]
    rows, rhs = [], []

    def add(coefs, bound=0.0):
        row = np.zeros(cols["total"])
        for col, val in coefs:
            row[col] += val
        rows.append(row)
        rhs.append(bound)

    z, t = cols["z"], cols["t"]
    for i in range(n):
        if np.isfinite(inst["upper"][i]):
            add([(z + i, 1.0), (t, -inst["upper"][i])])
        if np.isfinite(inst["lower"][i]):
            add([(z + i, -1.0), (t, inst["lower"][i])])
    for members, lo, hi in inst["groups"]:
        if np.isfinite(hi):
            add([(z + i, 1.0) for i in members] + [(t, -hi)])
        if np.isfinite(lo):
            add([(z + i, -1.0) for i in members] + [(t, lo)])
    if has_d:
        cur, d = inst["current"], cols["d"]
        for i in range(n):
            add([(z + i, 1.0), (d + i, -1.0), (t, -cur[i])])
            add([(z + i, -1.0), (d + i, -1.0), (t, cur[i])])
        if inst["tau"] is not None:
            add([(d + i, 1.0) for i in range(n)] + [(t, -inst["tau"])])
    for k in range(s):
        add([(z + i, -ret[k, i]) for i in range(n)]
            + [(cols["l"], -1.0), (cols["u"] + k, -1.0), (t, inst["offsets"][k])])
        add([(z + i, -ret[k, i]) for i in range(n)]
            + [(cols["la"], -1.0), (cols["v"] + k, -1.0), (t, inst["benchmark"][k])])
    add([(cols["l"], 1.0)] + [(cols["u"] + k, probs[k] / (1.0 - c)) for k in range(s)], 1.0)
    add([(cols["la"], 1.0)] + [(cols["v"] + k, probs[k] / (1.0 - c)) for k in range(s)]
        + [(t, -inst["budget"])])
    return np.array(rows), np.array(rhs)


def max_ratio_cc(inst, lowest, highest):
    """max N(x) / CVaR_c(x) over X (with the active budget) as one LP, after
    Charnes & Cooper (1962), "Programming with linear fractional
    functionals", Naval Research Logistics Quarterly 9: z = t x,
    t = 1/CVaR, maximise mu.z - rate.(t d) with the scaled CVaR <= 1 and
    every constant of X (bounds, group limits, holdings, turnover limit,
    the benchmark's returns and the active budget) times t. Written from
    scratch here, apart from the LPs above; x = z/t."""
    reason = _ratio_preconditions(lowest, highest)
    if reason:
        return _not_applicable(reason)
    cols, has_d = _cc_columns(inst)
    n = inst["returns"].shape[1]
    a_ub, b_ub = _cc_rows(inst, cols, has_d)
    a_eq = np.zeros((1, cols["total"]))
    a_eq[0, :n] = 1.0
    a_eq[0, cols["t"]] = -1.0
    objective = np.zeros(cols["total"])
    objective[:n] = -expected_returns(inst)
    objective[cols["t"]] = expected_offset(inst)
    if inst["rates"] is not None:
        objective[cols["d"]:cols["d"] + n] = inst["rates"]
    bounds = [(None, None)] * n + [(0, None), (None, None)] + [(0, None)] * (cols["la"] - n - 2)
    bounds += [(None, None)] + [(0, None)] * (cols["total"] - cols["v"])
    res = linprog(objective, A_ub=sp.csr_matrix(a_ub), b_ub=b_ub, A_eq=a_eq, b_eq=[0.0],
                  bounds=bounds, method="highs", options=LP_OPTIONS)
    if res.status != 0:
        return {"status": {2: "infeasible", 3: "unbounded"}.get(res.status, f"error: {res.message}")}
    t = res.x[cols["t"]]
    x = res.x[:n] / t
    out = _report(inst, "optimal", np.concatenate([x, res.x[n:]]), net_return(inst, x) / exact_cvar(inst, x))
    out["scale_t"] = float(t)
    out["lp_objective"] = float(-res.fun)
    return out


def solve_all(inst):
    """Run the programs and return the output object."""
    lowest = min_cvar(inst, floored=False)
    highest = max_return(inst, capped=False)
    out = {
        "max_return": max_return(inst, capped=True),
        "min_cvar": min_cvar(inst, floored=True),
        "max_ratio": max_ratio(inst, lowest, highest),
        "min_cvar_over_x": lowest,
        "max_return_over_x": highest,
    }
    if inst["benchmark"] is not None:
        out["max_ratio_cc"] = max_ratio_cc(inst, lowest, highest)
        out["min_active_cvar_over_x"] = min_active_cvar(inst)
    return out


def main(argv):
    if len(argv) != 2:
        print("usage: cvar_reference.py INPUT.json", file=sys.stderr)
        return 2
    try:
        with open(argv[1], encoding="utf-8") as handle:
            data = json.load(handle)
        if not isinstance(data, dict):
            raise InputError("top level must be a JSON object")
        inst = parse_instance(data)
    except (OSError, json.JSONDecodeError, InputError) as err:
        print(f"cvar_reference: bad input: {err}", file=sys.stderr)
        return 2
    json.dump(solve_all(inst), sys.stdout, allow_nan=False)
    sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
