"""A reference for re-plans built only from HiGHS (scipy.optimize.linprog) and the session rows.

The objective of a re-plan is lexicographic: required coverage, coverage, floors, earlier pairs
kept, total score. The reference maximises each tier in turn over the optimal face of the ones
before (the face of an integral polytope is integral, so each stage optimum is the exact
integer optimum) and never looks at the planner's network or weights.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import linprog
from scipy.sparse import coo_matrix, csr_matrix, vstack

from review_alloc.model import Plan, Session


@dataclass(frozen=True)
class ReplanInstance:
    """Eligible pairs with their scores, pins and earlier-plan marks, and the limits."""

    cap: np.ndarray
    floor: np.ndarray
    reviews: np.ndarray
    min_reviews: np.ndarray
    reviewer: np.ndarray
    paper: np.ndarray
    score: np.ndarray
    pinned: np.ndarray
    earlier: np.ndarray


def replan_instance(
    session: Session, earlier: Plan | None, banned: set[tuple[int, int]] | None = None
) -> ReplanInstance:
    """The instance read straight from the session's rows; `banned` adds conflicted pairs."""
    pol = session.policy
    rid = {r.id: j for j, r in enumerate(session.reviewers)}
    pid = {p.id: i for i, p in enumerate(session.papers)}
    gone_r = np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    gone_p = np.array([p.withdrawn for p in session.papers], dtype=bool)
    cap = np.array([pol.cap if r.cap is None else r.cap for r in session.reviewers])
    floor = np.array(
        [
            min(pol.floor, cap[j]) if r.floor is None else r.floor
            for j, r in enumerate(session.reviewers)
        ]
    )
    reviews = np.array([pol.reviews if p.reviews is None else p.reviews for p in session.papers])
    minimum = np.array(
        [
            min(pol.min_reviews, reviews[i]) if p.min_reviews is None else p.min_reviews
            for i, p in enumerate(session.papers)
        ]
    )
    cap[gone_r] = 0
    floor[gone_r] = 0
    reviews[gone_p] = 0
    minimum[gone_p] = 0
    excluded = set(banned or ())
    excluded |= {(rid[c.reviewer], pid[c.paper]) for c in session.conflicts}
    excluded |= {(rid[b.reviewer], pid[b.paper]) for b in session.blocks}
    pins = {(rid[p.reviewer], pid[p.paper]) for p in session.pins}
    table = session.scores
    scored = {
        (int(j), int(i)): float(v)
        for j, i, v in zip(table.reviewer, table.paper, table.value, strict=True)
    }
    if pol.unscored == "zero":
        candidates = {(j, i) for j in range(len(cap)) for i in range(len(reviews))}
    else:
        candidates = set(scored) | pins
    pairs = sorted(
        (j, i) for j, i in candidates if (j, i) not in excluded and not gone_r[j] and not gone_p[i]
    )
    before = set()
    if earlier is not None:
        before = {
            (rid[a.reviewer], pid[a.paper])
            for a in earlier.assignments
            if a.reviewer in rid and a.paper in pid
        }
    arr = np.array(pairs, dtype=np.int64).reshape(-1, 2)
    return ReplanInstance(
        cap=cap,
        floor=floor,
        reviews=reviews,
        min_reviews=minimum,
        reviewer=arr[:, 0],
        paper=arr[:, 1],
        score=np.array([scored.get(p, 0.0) for p in pairs]),
        pinned=np.array([p in pins for p in pairs], dtype=bool),
        earlier=np.array([p in before for p in pairs], dtype=bool),
    )


def replan_optimum(inst: ReplanInstance, *, with_score: bool = True) -> tuple[float, ...]:
    """(required coverage, coverage, floors met, earlier pairs kept[, total score]) by HiGHS."""
    n_r, n_p, n_e = len(inst.cap), len(inst.reviews), len(inst.reviewer)
    n_var = n_e + n_p + n_r
    e = np.arange(n_e)
    ones = np.ones(n_e)
    # rows: papers' reviews, reviewers' caps, y_i <= sum_j x_ij, z_j <= sum_i x_ij
    by_paper = coo_matrix((ones, (inst.paper, e)), shape=(n_p, n_var))
    by_reviewer = coo_matrix((ones, (inst.reviewer, e)), shape=(n_r, n_var))
    y_rows = coo_matrix((np.ones(n_p), (np.arange(n_p), n_e + np.arange(n_p))), shape=(n_p, n_var))
    z_rows = coo_matrix(
        (np.ones(n_r), (np.arange(n_r), n_e + n_p + np.arange(n_r))), shape=(n_r, n_var)
    )
    a_ub = vstack([by_paper, by_reviewer, y_rows - by_paper, z_rows - by_reviewer]).tocsr()
    b_ub = np.concatenate([inst.reviews, inst.cap, np.zeros(n_p), np.zeros(n_r)]).astype(float)
    lower = np.concatenate([inst.pinned.astype(float), np.zeros(n_p + n_r)])
    upper = np.concatenate([np.ones(n_e), inst.min_reviews, inst.floor]).astype(float)
    bounds = np.column_stack([lower, upper])
    stages = []
    c = np.zeros(n_var)
    c[n_e : n_e + n_p] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[:n_e] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[n_e + n_p :] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[:n_e] = inst.earlier
    stages.append(c)
    if with_score:
        c = np.zeros(n_var)
        c[:n_e] = inst.score
        stages.append(c)
    values: list[float] = []
    for c in stages:
        res = linprog(-c, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
        assert res.status == 0, res.message
        best = -res.fun
        values.append(best)
        a_ub = vstack([a_ub, csr_matrix(-c.reshape(1, -1))]).tocsr()
        b_ub = np.append(b_ub, -best + 1e-7)
    counts = tuple(float(round(v)) for v in values[:4])
    return (*counts, values[4]) if with_score else counts


def ortools_count_optimum(inst: ReplanInstance) -> tuple[int, int, int, int]:
    """(required coverage, coverage, floors met, earlier pairs kept) by OR-tools min-cost flow.

    OR-tools' SimpleMinCostFlow solves one flow with the count tiers weighted in the test's own
    way: a simple cycle moves each of the first three counts by at most one and the kept count
    by at most its pair arcs, so a floor is worth more than every pair arc at once, and so on
    up. It serves where the staged HiGHS programs would take minutes (the conference sample).
    Pins are not modelled: the cases given to it have none.
    """
    from ortools.graph.python import min_cost_flow

    assert not inst.pinned.any(), "the OR-tools reference does not model pins"
    n_r, n_p = len(inst.cap), len(inst.reviews)
    w_keep = 1
    w_floor = (2 * min(n_r, n_p) + 2) * w_keep + 1
    w_coverage = 2 * w_floor
    w_required = 2 * w_coverage
    source, sink = n_r + n_p, n_r + n_p + 1
    total = int(inst.reviews.sum())
    tails, heads, caps, costs = [], [], [], []

    def arc(t: int, h: int, c: int, w: int) -> None:
        tails.append(t)
        heads.append(h)
        caps.append(c)
        costs.append(w)

    for j in range(n_r):
        arc(source, j, int(inst.floor[j]), -w_floor)
        arc(source, j, int(inst.cap[j] - inst.floor[j]), 0)
    for j, i, was in zip(inst.reviewer, inst.paper, inst.earlier, strict=True):
        arc(int(j), n_r + int(i), 1, -w_keep if was else 0)
    for i in range(n_p):
        arc(n_r + i, sink, int(inst.min_reviews[i]), -(w_required + w_coverage))
        arc(n_r + i, sink, int(inst.reviews[i] - inst.min_reviews[i]), -w_coverage)
    arc(source, sink, total, 0)  # unused supply goes straight through at no gain
    solver = min_cost_flow.SimpleMinCostFlow()
    solver.add_arcs_with_capacity_and_unit_cost(
        np.array(tails, dtype=np.int32),
        np.array(heads, dtype=np.int32),
        np.array(caps, dtype=np.int64),
        np.array(costs, dtype=np.int64),
    )
    solver.set_node_supply(source, total)
    solver.set_node_supply(sink, -total)
    assert solver.solve() == solver.OPTIMAL
    flow = solver.flows(np.arange(len(tails), dtype=np.int32))
    n_e = len(inst.reviewer)
    pair_flow = flow[2 * n_r : 2 * n_r + n_e]
    sink_flow = flow[2 * n_r + n_e : 2 * n_r + n_e + 2 * n_p]
    return (
        int(sink_flow[0::2].sum()),
        int(sink_flow.sum()),
        int(flow[0 : 2 * n_r : 2].sum()),
        int(pair_flow[inst.earlier].sum()),
    )
