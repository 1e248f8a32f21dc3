"""The crossing rules solved exactly: a lexicographic mixed-integer program over the network.

Where a (paper, institution) group mixes seniors and juniors on a paper with a senior rule, the
institution limit and the senior rule cut across each other and no flow network states both
(`plan.institutions`). The relaxed network (each part of such a group capped at m) plus one
side constraint per group (both parts together at most m) is the exact problem. It is solved
here with HiGHS (`scipy.optimize.milp`), one tier at a time, highest first: each tier's
optimum becomes a constraint of the next, so the result is lexicographic by construction, with
no tier weights (weights that make one min-cost flow lexicographic do not carry over to a
problem with side constraints).

The flow relaxation starts it: its tier values bound the optimum from above, and a plan that
keeps the rule (the split dive of `plan.solve`) bounds it from below; every tier on which the two
agree, from the top, is settled without a solve. The program's answer is used only to choose
how each mixed group shares its cap (`ExactResult.split`); the plan itself comes from the flow
engine on that split network, with its dual certificate, and its tier values must equal the
program's optimum. Each solve has a time limit (`TIME_LIMIT`, seconds, for all tiers together)
and a size limit (`MAX_FREE_ARCS`); when either is reached, the best plan found is kept and the
tiers are reported with their bound and the measured gap.

Where the relaxation's reduced costs leave more than `MAX_FREE_ARCS` arcs free (the conference
sample: its score gap is a fraction of one score point, and most arcs' reduced costs are below
it), the tier's linear relaxation *with* the group limits is solved first (`_lp_stage`, HiGHS
dual simplex). Its duals give a Lagrangian bound checked here in float64 with a stated error
margin, valid for every plan whatever the solver did: when the linear optimum is integral and
reaches that bound, the tier is proven optimal without branching; otherwise the duals' reduced
costs fix the arcs that no plan at least as good as the best known can move, and the integer
program runs on what is left.
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, linprog, milp
from scipy.sparse import coo_matrix, csr_matrix, vstack

from review_alloc.flow import FlowCheckError, check_cost_certificate
from review_alloc.flow.sums import exact_dot
from review_alloc.plan.network import PlanNetwork

TIME_LIMIT = 30.0
"""Seconds the program may spend on all tiers of one plan before a bound is reported instead."""

MAX_FREE_ARCS = 20_000
"""Most arcs the program may leave free; a larger program would not finish within the time
limit (HiGHS's set-up alone outgrows it), so the plan keeps the dive and reports the bound."""

EXACT_TIERS = ("required", "seniors", "coverage", "overload", "floors", "keep", "score")
"""The tiers the program settles one by one, highest first (overload is least overload, kept
pairs a re-plan's tier; score is the score in integer steps minus the balance penalty)."""

GroupKey = tuple[int, str]
"""(paper index, normalised institution) of a mixed group."""


@dataclass(frozen=True)
class ExactResult:
    """How the mixed groups share their caps, and the proof (or the bound) that goes with it."""

    split: dict[GroupKey, int]
    """Seniors' share of each mixed group's cap in the best plan found."""
    tiers: dict[str, int]
    """Integer tier values (see `exact_tiers`) of the program's best solution."""
    proven: bool
    """Every tier solved to optimality with gap 0 (HiGHS status optimal)."""
    status: str
    """HiGHS's last status message ("optimal", or why it stopped)."""
    gap: float = 0.0
    """Relative gap of the first tier not proven (0 when proven)."""
    bound: dict[str, float] = field(default_factory=dict)
    """Integer tier upper bounds where not proven: proven tiers, then the open tier's bound."""
    solved: tuple[str, ...] = ()
    """Tiers the program solved (the others agreed between relaxation and dive)."""
    seconds: float = 0.0
    by_bound: tuple[str, ...] = ()
    """Solved tiers proven by their linear relaxation's checked bound, met by an integral
    solution (no branching needed)."""


def mixed_groups(net: PlanNetwork) -> dict[GroupKey, tuple[int, ...]]:
    """Parts (indices into the part arrays) of each mixed group the network relaxes."""
    groups: dict[GroupKey, list[int]] = {}
    for g in net.relaxed_groups:
        key = (int(net.part_paper[g]), net.part_institution[g])
        groups.setdefault(key, []).append(int(g))
    return {key: tuple(parts) for key, parts in groups.items()}


def pair_objectives(net: PlanNetwork) -> dict[str, np.ndarray]:
    """Per tier, its integer objective (to maximise) as a vector over the network's arcs."""
    n = len(net.tails)
    out = {name: np.zeros(n, dtype=np.int64) for name in EXACT_TIERS}
    out["required"][net.required_arcs] = 1
    out["seniors"][net.senior_required_arcs] = 1
    out["coverage"][net.required_arcs] = 1
    out["coverage"][net.extra_arcs] = 1
    out["overload"][net.overload_arcs] = -1
    out["floors"][net.floor_arcs] = 1
    bonus = 0
    if net.kept is not None:
        out["keep"][net.pair_arcs] = net.kept.astype(np.int64)
        bonus = net.keep_weight * net.kept.astype(np.int64)
    # A pair arc costs max_score - score - bonus; the source arcs carry the balance steps (the
    # floor arcs also the floor weight), so the score tier is what the costs leave.
    out["score"][net.pair_arcs] = net.max_score - net.costs[net.pair_arcs] - bonus
    out["score"][net.floor_arcs] = -(net.costs[net.floor_arcs] + net.weights[2])
    out["score"][net.rest_arcs] = -net.costs[net.rest_arcs]
    return out


def exact_tiers(net: PlanNetwork, used: np.ndarray, max_per_institution: int | None) -> dict:
    """Integer tier values of the pairs `used` (boolean per pair arc) on any split of `net`."""
    loads = np.bincount(net.pair_reviewer[used], minlength=net.n_reviewers)
    counts = np.bincount(net.pair_paper[used], minlength=net.n_papers)
    minimum = net.capacities[net.required_arcs]
    reviews = minimum + net.capacities[net.extra_arcs]
    floor = np.bincount(
        net.floor_arc_reviewer, weights=net.capacities[net.floor_arcs], minlength=net.n_reviewers
    ).astype(np.int64)
    cap = floor + np.bincount(
        net.rest_arc_reviewer, weights=net.capacities[net.rest_arcs], minlength=net.n_reviewers
    ).astype(np.int64)
    in_senior = used & (net.pair_senior >= 0)
    seniors = np.bincount(net.pair_senior[in_senior], minlength=len(net.senior_paper))
    within = np.minimum(loads, cap)
    kept = int((used & net.kept).sum()) if net.kept is not None else 0
    score_int = net.max_score - net.costs[net.pair_arcs]
    if net.kept is not None:
        score_int = score_int - net.keep_weight * net.kept.astype(np.int64)
    return {
        "required": int(np.minimum(counts, minimum).sum()),
        "seniors": int(np.minimum(seniors, net.senior_need).sum()),
        "coverage": int(np.minimum(counts, reviews).sum()),
        "overload": -int(np.maximum(loads - cap, 0).sum()),
        "floors": int(np.minimum(loads, floor).sum()),
        "keep": kept,
        "score": int(score_int[used].sum())
        - net.balance_step * int((within * (within - 1) // 2).sum()),
    }


def tier_weights(net: PlanNetwork) -> dict[str, int]:
    """The weight of each tier in the network's costs: cost = -sum(weight * tier value)."""
    over = int(net.costs[net.overload_arcs][0]) if len(net.costs[net.overload_arcs]) else 0
    return {
        "required": int(net.weights[0]),
        "seniors": int(net.senior_weight),
        "coverage": int(net.weights[1]),
        "overload": over,
        "floors": int(net.weights[2]),
        "keep": int(net.keep_weight),
        "score": 1,
    }


def _least_values(net: PlanNetwork, objectives: Mapping[str, np.ndarray]) -> dict[str, int]:
    """The least value each tier can take on the network's arcs (its negative entries filled)."""
    return {
        name: int(np.minimum(c, 0) @ net.capacities) + int(np.maximum(c, 0) @ net.lower)
        for name, c in objectives.items()
    }


def free_arcs(
    net: PlanNetwork,
    flow: np.ndarray,
    potentials: np.ndarray,
    upper: Mapping[str, int],
    lower: Mapping[str, int],
    objectives: Mapping[str, np.ndarray],
) -> np.ndarray:
    """Arcs a plan lexicographically at least as good as `lower` may move off the relaxation.

    Reduced-cost fixing: for any circulation x, cost(x) - cost(relaxed) is the sum over arcs of
    |reduced cost| * |x - relaxed flow| (each term is >= 0 at an optimal flow with its
    potentials). Such a plan has the relaxation's values on the tiers above the first one where
    relaxation and `lower` differ, at least `lower`'s there and at least each tier's least value
    below, which bounds its cost; an arc whose reduced cost exceeds that bound's distance from
    the relaxation's cost cannot move. Returns every arc as free when the potentials do not
    certify the relaxation (nothing is fixed on trust).
    """
    n = len(net.tails)
    every = np.ones(n, dtype=bool)
    weight = tier_weights(net)
    cost = exact_dot(flow, net.costs)
    if cost != -sum(weight[k] * int(upper[k]) for k in EXACT_TIERS):
        return every
    try:
        check_cost_certificate(
            net.n_nodes, net.tails, net.heads, net.capacities, net.costs, flow, potentials,
            lower=net.lower,
        )
    except FlowCheckError:
        return every
    least = _least_values(net, objectives)
    bound = 0
    differs = False
    for name in EXACT_TIERS:
        if differs:
            bound -= weight[name] * least[name]
        elif upper[name] != lower[name]:
            differs = True
            bound -= weight[name] * int(lower[name])
        else:
            bound -= weight[name] * int(upper[name])
    slack = bound - cost
    reduced = net.costs + potentials[net.tails] - potentials[net.heads]
    return np.abs(reduced).astype(np.float64) <= float(slack)


@dataclass(frozen=True)
class _Restricted:
    """The program over the free arcs, the fixed arcs' flows moved into the right-hand sides."""

    free: np.ndarray
    fixed_flow: np.ndarray
    constraints: list[LinearConstraint]
    bounds: Bounds


def _model(
    net: PlanNetwork,
    m: int,
    groups: Mapping[GroupKey, tuple[int, ...]],
    free: np.ndarray,
    flow: np.ndarray,
) -> _Restricted:
    """Flow conservation and the group limits over the free arcs; other arcs keep `flow`."""
    n = len(net.tails)
    fixed_flow = np.where(free, 0, flow).astype(np.int64)
    idx = np.flatnonzero(free)
    k = len(idx)
    # Fixed arcs move their flow into each node's right-hand side (in - out = 0 overall).
    fixed_in = np.bincount(net.heads, weights=fixed_flow, minlength=net.n_nodes)
    fixed_out = np.bincount(net.tails, weights=fixed_flow, minlength=net.n_nodes)
    rhs = fixed_out - fixed_in
    local = np.arange(k)
    incidence = coo_matrix(
        (
            np.concatenate([np.ones(k), -np.ones(k)]),
            (np.concatenate([net.heads[idx], net.tails[idx]]), np.concatenate([local, local])),
        ),
        shape=(net.n_nodes, k),
    ).tocsr()
    touched = np.unique(np.concatenate([net.heads[idx], net.tails[idx]]))
    constraints = [LinearConstraint(incidence[touched], rhs[touched], rhs[touched])]
    part_row = np.full(len(net.part_paper) + 1, -1, dtype=np.int64)
    for row, parts in enumerate(groups.values()):
        part_row[list(parts)] = row
    pair_idx = np.arange(net.pair_arcs.start, net.pair_arcs.stop)
    row_of_pair = part_row[net.pair_part] if len(net.pair_part) else np.zeros(0, np.int64)
    inside = row_of_pair >= 0
    fixed_in_group = np.bincount(
        row_of_pair[inside], weights=fixed_flow[pair_idx[inside]], minlength=len(groups)
    )
    position = np.full(n, -1, dtype=np.int64)
    position[idx] = local
    movable = inside & free[pair_idx]
    if movable.any():
        rows, row_id = np.unique(row_of_pair[movable], return_inverse=True)
        limits = coo_matrix(
            (np.ones(int(movable.sum())), (row_id, position[pair_idx[movable]])),
            shape=(len(rows), k),
        ).tocsr()
        constraints.append(LinearConstraint(limits, -np.inf, m - fixed_in_group[rows]))
    bounds = Bounds(net.lower[idx].astype(float), net.capacities[idx].astype(float))
    return _Restricted(free, fixed_flow, constraints, bounds)


def solve_exact(
    net: PlanNetwork,
    m: int,
    relaxed_flow: np.ndarray,
    potentials: np.ndarray,
    upper: Mapping[str, int],
    lower: Mapping[str, int],
    fallback: dict[GroupKey, int],
    time_limit: float | None = None,
) -> ExactResult:
    """Solve the relaxed network with every mixed group limited to m, tier by tier.

    `relaxed_flow` and `potentials` are the relaxation's optimum and its dual certificate,
    `upper` its integer tier values, `lower` those of a plan keeping the rule (its split is
    `fallback`): tiers where the two agree from the top are settled without a solve, and arcs
    that no better plan can move keep their relaxed flow (`free_arcs`); where too many stay
    free, the linear relaxation with the group limits proves the tier or fixes more (`_lp_stage`).
    """
    start = time.monotonic()
    limit_s = TIME_LIMIT if time_limit is None else time_limit
    groups = mixed_groups(net)
    objectives = pair_objectives(net)
    settled: dict[str, int] = {}
    open_tiers = list(EXACT_TIERS)
    while open_tiers and upper[open_tiers[0]] == lower[open_tiers[0]]:
        name = open_tiers.pop(0)
        settled[name] = int(upper[name])
    if not open_tiers:
        return ExactResult(dict(fallback), settled, True, "optimal", seconds=0.0)
    free = free_arcs(net, relaxed_flow, potentials, upper, lower, objectives)
    values = relaxed_flow.astype(np.int64)
    split = dict(fallback)
    solved: list[str] = []
    by_bound: list[str] = []
    best: np.ndarray | None = None
    for name in open_tiers:
        left = limit_s - (time.monotonic() - start)
        if int(free.sum()) > MAX_FREE_ARCS:
            if best is not None:
                known: int | None = int(objectives[name] @ best)
            elif all(settled[k] == lower[k] for k in settled):
                known = int(lower[name])
            else:
                known = None
            stage = _lp_stage(net, m, groups, free, values, objectives, settled, name, known, left)
            if stage is None and not solved:
                return _too_large(int(free.sum()), name, settled, upper, lower, fallback)
            if stage is None:
                # The relaxation bounds this tier only while the tiers above keep its values.
                top = objectives[name]
                ceiling = (
                    int(upper[name])
                    if all(settled[k] == upper[k] for k in settled)
                    else int(np.maximum(top, 0) @ net.capacities)
                )
                return _bounded(name, ceiling, known, settled, lower, split, solved, start)
            free, values = stage.free, stage.values
            if stage.x is not None and stage.value == stage.bound:
                settled[name] = stage.value
                best = stage.x
                split = _split_of(net, groups, stage.x)
                solved.append(name)
                by_bound.append(name)
                continue
            if int(free.sum()) > MAX_FREE_ARCS:
                found = stage.value if stage.value is not None else known
                return _bounded(name, stage.bound, found, settled, lower, split, solved, start)
        model = _model(net, m, groups, free, values)
        idx = np.flatnonzero(free)
        c = objectives[name]
        constant = int(c @ model.fixed_flow)
        local = c[idx].astype(float)
        if not local.any():
            settled[name] = constant
            continue
        constraints = list(model.constraints)
        rows, floors = _settled_rows(objectives, settled, idx, model.fixed_flow)
        if rows is not None:
            constraints.append(LinearConstraint(rows, floors, np.inf))
        result = milp(
            -local,
            constraints=constraints,
            bounds=model.bounds,
            integrality=np.ones(len(idx)),
            options={
                "time_limit": max(limit_s - (time.monotonic() - start), 0.5),
                "mip_rel_gap": 0.0,
                "presolve": True,
            },
        )
        solved.append(name)
        if result.x is not None:
            x = model.fixed_flow.copy()
            x[idx] = np.rint(result.x).astype(np.int64)
            split = _split_of(net, groups, x)
            best = x
        if result.status != 0:
            return _stopped(
                result, name, constant, settled, upper, split, tuple(solved), start
            )
        settled[name] = constant + int(round(-result.fun))
    status = "optimal"
    if by_bound:
        status = (
            "optimal; tier(s) " + ", ".join(by_bound) + " met their checked linear bound with "
            "an integral solution"
        )
    return ExactResult(
        split,
        settled,
        True,
        status,
        solved=tuple(solved),
        seconds=time.monotonic() - start,
        by_bound=tuple(by_bound),
    )


def _settled_rows(
    objectives: Mapping[str, np.ndarray],
    settled: Mapping[str, int],
    idx: np.ndarray,
    fixed_flow: np.ndarray,
) -> tuple[csr_matrix | None, list[float]]:
    """Rows keeping every settled tier at its value over the free arcs `idx` (>=: maximised)."""
    rows: list[np.ndarray] = []
    floors: list[float] = []
    for name, value in settled.items():
        c = objectives[name]
        if c[idx].any():
            rows.append(c[idx].astype(float))
            floors.append(float(value - int(c @ fixed_flow)))
    return (csr_matrix(np.vstack(rows)) if rows else None), floors


@dataclass(frozen=True)
class _Stage:
    """What the linear relaxation with the group limits says about one tier."""

    bound: int
    """Checked upper bound on the tier (the Lagrangian bound of the solver's duals, floored)."""
    x: np.ndarray | None
    """The linear optimum over every arc, when it is integral and keeps every constraint."""
    value: int | None
    """The tier's value at `x`."""
    free: np.ndarray
    values: np.ndarray
    """Arcs still free, and what every other arc carries after the reduced-cost fixing."""


def _lp_stage(
    net: PlanNetwork,
    m: int,
    groups: Mapping[GroupKey, tuple[int, ...]],
    free: np.ndarray,
    values: np.ndarray,
    objectives: Mapping[str, np.ndarray],
    settled: Mapping[str, int],
    name: str,
    known: int | None,
    time_left: float,
) -> _Stage | None:
    """Solve the tier's linear relaxation with the group limits and check its dual bound.

    For any duals y (conservation and settled tiers, free sign) and mu <= 0 (group limits) of
    min c.x, every feasible x has c.x >= L + sum |d_a| |x_a - xhat_a|, where d = c - A'y - G'mu
    are the reduced costs, L is the minimum over the arc bounds of d.x plus y.b + mu.h, and xhat
    is that minimiser. So -L bounds the tier whatever the duals' accuracy, and an arc whose
    |d_a| exceeds -L less a known value cannot move in any plan reaching that value. The sums
    run in float64 with a margin 10^4 times the worst rounding error, so nothing rests on the
    solver's tolerances. None when HiGHS does not reach an optimum within the time left.
    """
    model = _model(net, m, groups, free, values)
    idx = np.flatnonzero(free)
    conservation = model.constraints[0]
    a_eq = conservation.A
    b_eq = np.asarray(conservation.lb, dtype=float)
    rows, floors = _settled_rows(objectives, settled, idx, model.fixed_flow)
    if rows is not None:
        # Settled tiers hold their optimum in every lexicographically optimal plan: equalities.
        a_eq = vstack([a_eq, rows]).tocsr()
        b_eq = np.concatenate([b_eq, floors])
    if len(model.constraints) > 1:
        a_ub = model.constraints[1].A
        b_ub = np.asarray(model.constraints[1].ub, dtype=float)
    else:
        a_ub = csr_matrix((0, len(idx)))
        b_ub = np.zeros(0)
    c = objectives[name]
    constant = int(c @ model.fixed_flow)
    cost = -c[idx].astype(float)
    lb, ub = model.bounds.lb, model.bounds.ub
    result = linprog(
        cost,
        A_ub=a_ub if a_ub.shape[0] else None,
        b_ub=b_ub if a_ub.shape[0] else None,
        A_eq=a_eq,
        b_eq=b_eq,
        bounds=np.column_stack([lb, ub]),
        method="highs-ds",
        # HiGHS's presolve makes this degenerate network program slower by orders of magnitude
        # (measured on the conference sample: 1.5 s without it, 8 s to minutes with it).
        options={"time_limit": max(time_left, 0.5), "presolve": False},
    )
    if result.status != 0 or result.x is None:
        return None
    y = np.asarray(result.eqlin.marginals, dtype=float)
    mu = (
        np.minimum(np.asarray(result.ineqlin.marginals, dtype=float), 0.0)
        if a_ub.shape[0]
        else np.zeros(0)
    )
    d = cost - a_eq.T @ y - a_ub.T @ mu
    terms = np.concatenate([np.minimum(d * lb, d * ub), y * b_eq, mu * b_ub])
    least = math.fsum(terms.tolist())
    size = (np.abs(cost) + abs(a_eq).T @ np.abs(y) + abs(a_ub).T @ np.abs(mu)) * ub
    magnitude = math.fsum(size.tolist()) + math.fsum(np.abs(terms[len(d) :]).tolist())
    margin = 1e-12 * magnitude + 1e-9
    top = -least + margin
    bound = constant + math.floor(top)
    x, value = None, None
    rounded = np.rint(result.x)
    if len(idx) == 0 or float(np.max(np.abs(result.x - rounded))) <= 1e-6:
        full = model.fixed_flow.copy()
        full[idx] = rounded.astype(np.int64)
        if _keeps(net, m, groups, full, objectives, settled):
            x, value = full, int(c @ full)
    target = value if value is not None else known
    if target is None:
        return _Stage(bound, x, value, free, values)
    slack = top - (target - constant) + margin
    if slack < 0:
        # A known plan above a checked bound: something is off, so nothing is fixed.
        return None
    fix = np.abs(d) > slack
    xhat = np.where(d > 0, lb, ub)
    new_free = free.copy()
    new_free[idx[fix]] = False
    new_values = values.copy()
    new_values[idx[fix]] = np.rint(xhat[fix]).astype(np.int64)
    return _Stage(bound, x, value, new_free, new_values)


def _keeps(
    net: PlanNetwork,
    m: int,
    groups: Mapping[GroupKey, tuple[int, ...]],
    x: np.ndarray,
    objectives: Mapping[str, np.ndarray],
    settled: Mapping[str, int],
) -> bool:
    """Whether integer arc flows `x` are a circulation within bounds that keeps every group
    limit and every settled tier (checked in integers)."""
    if np.any(x < net.lower) or np.any(x > net.capacities):
        return False
    into = np.bincount(net.heads, weights=x, minlength=net.n_nodes)
    out = np.bincount(net.tails, weights=x, minlength=net.n_nodes)
    if not np.array_equal(into, out):
        return False
    used = x[net.pair_arcs] > 0
    inside = used & (net.pair_part >= 0)
    per_part = np.bincount(net.pair_part[inside], minlength=len(net.part_paper))
    if any(int(per_part[list(parts)].sum()) > m for parts in groups.values()):
        return False
    return all(int(objectives[k] @ x) >= v for k, v in settled.items())


def _bounded(
    name: str,
    bound: int,
    found: int | None,
    settled: dict[str, int],
    lower: Mapping[str, int],
    split: dict[GroupKey, int],
    solved: list[str],
    start: float,
) -> ExactResult:
    """The linear stage's checked bound and the best plan known, with the gap between them."""
    value = found if found is not None else int(lower[name])
    gap = abs(bound - value) / max(abs(bound), 1)
    return ExactResult(
        split,
        {**settled, name: value} if solved else {k: int(v) for k, v in lower.items()},
        False,
        f"not solved: too many arcs stay free after the linear bound's fixing (above "
        f"{MAX_FREE_ARCS}); checked bound {bound}",
        gap=gap,
        bound={**{k: float(v) for k, v in settled.items()}, name: float(bound)},
        solved=tuple(solved),
        seconds=time.monotonic() - start,
    )


def _too_large(
    n_free: int,
    name: str,
    settled: dict[str, int],
    upper: Mapping[str, int],
    lower: Mapping[str, int],
    fallback: dict[GroupKey, int],
) -> ExactResult:
    """No program: the dive's plan, the relaxation as its bound, the gap measured between them."""
    gap = abs(int(upper[name]) - int(lower[name])) / max(abs(int(upper[name])), 1)
    return ExactResult(
        dict(fallback),
        {k: int(v) for k, v in lower.items()},
        False,
        f"not solved: {n_free} arcs stay free after reduced-cost fixing, above {MAX_FREE_ARCS}",
        gap=gap,
        bound={k: float(v) for k, v in upper.items()},
    )


def _stopped(
    result: object,
    name: str,
    constant: int,
    settled: dict[str, int],
    upper: Mapping[str, int],
    split: dict[GroupKey, int],
    solved: tuple[str, ...],
    start: float,
) -> ExactResult:
    """The result when HiGHS stopped before proving a tier: its best value, bound and gap."""
    found = getattr(result, "x", None) is not None
    value = constant + int(round(-result.fun)) if found else None
    dual = getattr(result, "mip_dual_bound", None)
    bound_value = float(upper[name])
    if dual is not None and np.isfinite(dual):
        bound_value = constant - float(dual)
        if all(settled[k] == upper[k] for k in settled):
            # The relaxation bounds this tier too while every tier above is at its value.
            bound_value = min(bound_value, float(upper[name]))
    gap = float(getattr(result, "mip_gap", np.nan)) if found else float("inf")
    return ExactResult(
        split,
        {**settled, name: value} if value is not None else dict(settled),
        False,
        str(getattr(result, "message", "stopped")),
        gap=gap,
        bound={**{k: float(v) for k, v in settled.items()}, name: float(np.floor(bound_value))},
        solved=solved,
        seconds=time.monotonic() - start,
    )


def _split_of(
    net: PlanNetwork, groups: Mapping[GroupKey, tuple[int, ...]], x: np.ndarray
) -> dict[GroupKey, int]:
    """Seniors' share of each mixed group in the arc flows `x`."""
    used = x[net.pair_arcs] > 0
    inside = used & (net.pair_part >= 0)
    per_part = np.bincount(net.pair_part[inside], minlength=len(net.part_paper))
    split: dict[GroupKey, int] = {}
    for key, parts in groups.items():
        seniors = [g for g in parts if int(net.part_senior[g]) == 1]
        split[key] = int(per_part[seniors[0]]) if seniors else 0
    return split
