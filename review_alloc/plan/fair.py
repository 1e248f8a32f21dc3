"""The fairest plan: the highest lowest total score of any paper, among the plans with the best
coverage tiers, then the total score (the max-min objective of PeerReview4All: Stelmakh, Shah and
Singh, ALT 2019 / JMLR 2021).

A lower bound on every paper's total score is a side constraint on arc costs, not a capacity,
so this is not one flow problem (see `plan.fairness`); the exact problem is NP-hard. Two ways:

1. Exact, when it finishes within `FAIR_TIME_LIMIT`: a mixed-integer program solved by HiGHS
   (scipy.optimize.milp) with every hard rule (caps and overload allowances, reviews, pins,
   the institution limit, a hard senior rule) and the plain plan's required coverage, seniors
   and coverage as constraints. Stage one maximises t, with t <= each paper's total score;
   later stages fix t and take least overload, floors, then total score, one after another.
2. Otherwise, the PeerReview4All algorithm's first round on the planner's own network, with
   the engine's min-cost flow: for each kappa = 1..(most reviews), the highest score threshold
   s at which every paper can still get min(kappa, its plain count) of its directly routed
   reviewers scoring at least s while the coverage tiers stay optimal (a lower bound on a new
   node per paper, found by binary search over the distinct scores); the candidate whose
   worst-off paper scores highest is kept (or HiGHS's best plan so far, when it stopped at
   the time limit with a better one). The result is set beside a stated upper bound (the
   MIP's dual bound or LP relaxation when HiGHS gave one, and the weakest paper's best
   possible total), and the gap is reported. Only pairs routed straight to their paper count
   towards kappa: a pair that passes a senior or institution node cannot be told apart from
   its group in the flow, so with those rules the round can be weak (the gap says so).

The balance penalty and a re-plan's keep tier do not apply to the fairest plan (it is a fresh
plan); leads are picked afterwards as for any plan. The independent checker verifies every
hard rule of the result.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from datetime import UTC, datetime

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix, csr_matrix

from review_alloc.flow import InfeasibleError, min_cost_flow
from review_alloc.model import Plan, Session
from review_alloc.model.plans import PlanFairness, comparable_figures
from review_alloc.plan.assemble import assemble_plan
from review_alloc.plan.cautions import FAIR_CAUTION
from review_alloc.plan.checker import check_plan
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.fairness import highest_threshold
from review_alloc.plan.figures import active_demands
from review_alloc.plan.institutions import reviewer_institutions
from review_alloc.plan.network import PlanNetwork
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.solve import PlanOutcome, make_plan, tier_values

FAIR_TIME_LIMIT = 20.0
"""Seconds HiGHS may spend on the exact fairest plan before the PeerReview4All round is used."""

MIP_PAIR_LIMIT = 200_000
"""Sessions with more eligible pairs than this go straight to the PeerReview4All round."""

MIP_METHOD = "exact: mixed-integer program (HiGHS via scipy.optimize.milp)"
MIP_STOPPED_METHOD = (
    "mixed-integer program (HiGHS via scipy.optimize.milp) stopped at its time limit: its best "
    "plan so far, better than PeerReview4All's round here; not proven optimal"
)
PR4A_METHOD = (
    "PeerReview4All (Stelmakh, Shah and Singh), first round, on the planner's min-cost flow "
    "network; not proven optimal"
)

FAIR_METHODS = ("auto", "peerreview4all")

_EPS = 1e-7


@dataclass(frozen=True)
class FairOutcome(PlanOutcome):
    """The fairest plan found, with the plain plan beside it."""

    plain: PlanOutcome | None = None


def paper_totals(net: PlanNetwork, used: np.ndarray) -> np.ndarray:
    """Total score of each paper for the pairs `used` (boolean per pair arc)."""
    return np.bincount(net.pair_paper[used], weights=net.pair_score[used], minlength=net.n_papers)


def _lowest(net: PlanNetwork, used: np.ndarray, active: np.ndarray) -> float:
    """The lowest total score of an active paper for the pairs `used`."""
    return float(paper_totals(net, used)[active].min()) if len(active) else 0.0


def _active_papers(session: Session) -> np.ndarray:
    """Papers with reviews to get (not withdrawn, reviews > 0): those the minimum runs over."""
    reviews, _, _, _ = active_demands(session)
    return np.flatnonzero(reviews > 0)


def weakest_pool_bound(session: Session, net: PlanNetwork) -> float:
    """An upper bound on any plan's lowest paper total: the smallest, over papers, of the sum
    of a paper's best `reviews` eligible scores (no plan can give that paper more)."""
    reviews, _, _, _ = active_demands(session)
    best = np.inf
    for i in _active_papers(session).tolist():
        scores = np.sort(net.pair_score[net.pair_paper == i])[::-1]
        best = min(best, float(scores[: int(reviews[i])].sum()))
    return 0.0 if best == np.inf else best


@dataclass
class _Program:
    """The fairest plan as a MIP over x (pairs), t, u (required), v (seniors), o, f."""

    c_size: int
    rows: list[LinearConstraint]
    lower: np.ndarray
    upper: np.ndarray
    integrality: np.ndarray
    n_pairs: int
    t: int
    overload: slice
    floors: slice
    required: slice
    seniors: slice
    scores: np.ndarray


def _program(session: Session, net: PlanNetwork, plain_tiers: dict[str, float]) -> _Program:
    """Build the MIP of the fairest plan with the coverage tiers held at their optimum."""
    reviews, minimum, cap, floor = active_demands(session)
    allowance = overload_allowances(session)
    n_e, n_p, n_r = len(net.pair_reviewer), net.n_papers, net.n_reviewers
    n_s = len(net.senior_paper)
    t = n_e
    req = slice(t + 1, t + 1 + n_p)
    sen = slice(req.stop, req.stop + n_s)
    over = slice(sen.stop, sen.stop + n_r)
    flo = slice(over.stop, over.stop + n_r)
    size = flo.stop
    e = np.arange(n_e)
    paper_rows = coo_matrix((np.ones(n_e), (net.pair_paper, e)), shape=(n_p, size)).tocsr()
    reviewer_rows = coo_matrix((np.ones(n_e), (net.pair_reviewer, e)), shape=(n_r, size)).tocsr()
    rows: list[LinearConstraint] = [LinearConstraint(paper_rows, -np.inf, reviews)]

    def identity(block: slice, n: int) -> csr_matrix:
        return coo_matrix(
            (np.ones(n), (np.arange(n), np.arange(block.start, block.stop))), shape=(n, size)
        ).tocsr()

    # load - overload <= cap; u_i <= count_i; f_j <= load_j
    rows.append(LinearConstraint(reviewer_rows - identity(over, n_r), -np.inf, cap))
    rows.append(LinearConstraint(identity(req, n_p) - paper_rows, -np.inf, 0))
    rows.append(LinearConstraint(identity(flo, n_r) - reviewer_rows, -np.inf, 0))
    senior = net.pair_senior >= 0
    if n_s:
        senior_rows = coo_matrix(
            (np.ones(int(senior.sum())), (net.pair_senior[senior], e[senior])), shape=(n_s, size)
        ).tocsr()
        rows.append(LinearConstraint(identity(sen, n_s) - senior_rows, -np.inf, 0))
        if net.senior_hard:
            rows.append(LinearConstraint(senior_rows, net.senior_need, np.inf))
    m = session.policy.max_per_institution
    if m is not None and n_e:
        inst, names = reviewer_institutions(session)
        g_inst = inst[net.pair_reviewer]
        member = g_inst >= 0
        key = np.where(member, net.pair_paper * max(len(names), 1) + g_inst, -1)
        uniq, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
        crowded = (uniq >= 0) & (counts > m)
        if crowded.any():
            group_of = np.full(len(uniq), -1)
            group_of[crowded] = np.arange(int(crowded.sum()))
            g = group_of[inverse]
            inside = g >= 0
            group_rows = coo_matrix(
                (np.ones(int(inside.sum())), (g[inside], e[inside])),
                shape=(int(crowded.sum()), size),
            ).tocsr()
            rows.append(LinearConstraint(group_rows, -np.inf, m))
    active = _active_papers(session)
    score_rows = coo_matrix(
        (net.pair_score, (net.pair_paper, e)), shape=(n_p, size)
    ).tocsr()[active]
    t_column = coo_matrix(
        (np.ones(len(active)), (np.arange(len(active)), np.full(len(active), t))),
        shape=(len(active), size),
    ).tocsr()
    rows.append(LinearConstraint(t_column - score_rows, -np.inf, 0))
    # The coverage tiers at the plain plan's optimum (coverage = sum of counts: counts <= reviews).
    tiers = np.zeros((3, size))
    tiers[0, req] = 1
    tiers[1, sen] = 1
    tiers[2, :n_e] = 1
    want = [plain_tiers["required"], plain_tiers["seniors"], plain_tiers["coverage"]]
    rows.append(LinearConstraint(csr_matrix(tiers), np.array(want) - _EPS, np.inf))
    lower = np.zeros(size)
    upper = np.zeros(size)
    upper[:n_e] = 1
    lower[:n_e][net.pair_pinned] = 1
    upper[t] = float(net.pair_score.sum()) + 1
    upper[req] = minimum
    upper[sen] = net.senior_need
    upper[over] = allowance
    upper[flo] = floor
    integrality = np.zeros(size)
    integrality[:n_e] = 1
    return _Program(
        size, rows, lower, upper, integrality, n_e, t, over, flo, req, sen, net.pair_score
    )


def _solve_stages(
    prog: _Program, deadline: float
) -> tuple[np.ndarray | None, bool, float | None]:
    """(pairs used or None, whether stage one was proven optimal, its best upper bound on t);
    when HiGHS stopped early, the pairs are its best plan so far (None if it had none)."""

    def run(c: np.ndarray, rows: list[LinearConstraint]) -> object:
        left = max(deadline - time.monotonic(), 0.1)
        return milp(
            c,
            constraints=rows,
            integrality=prog.integrality,
            bounds=Bounds(prog.lower, prog.upper),
            options={"time_limit": left, "mip_rel_gap": 1e-9},
        )

    c = np.zeros(prog.c_size)
    c[prog.t] = -1.0
    first = run(c, prog.rows)
    x = getattr(first, "x", None)
    if x is None:
        return None, False, _dual_bound(first)
    proven = getattr(first, "status", 1) == 0
    if not proven:
        # Stopped at the time limit with a feasible plan: offered as a candidate, not exact.
        return x[: prog.n_pairs] > 0.5, False, _dual_bound(first)
    best_t = -float(first.fun)
    rows = list(prog.rows)
    fixed = np.zeros(prog.c_size)
    fixed[prog.t] = 1
    rows.append(LinearConstraint(fixed, best_t - 1e-6, np.inf))
    stages = []
    if prog.upper[prog.overload].any():
        c = np.zeros(prog.c_size)
        c[prog.overload] = 1.0
        stages.append(c)
    if prog.upper[prog.floors].any():
        c = np.zeros(prog.c_size)
        c[prog.floors] = -1.0
        stages.append(c)
    c = np.zeros(prog.c_size)
    c[: prog.n_pairs] = -prog.scores
    stages.append(c)
    for c in stages:
        res = run(c, rows)
        if getattr(res, "x", None) is None:
            break
        x = res.x
        if getattr(res, "status", 1) != 0:
            break
        rows.append(LinearConstraint(c, -np.inf, float(res.fun) + 1e-6 + 1e-9 * abs(res.fun)))
    return x[: prog.n_pairs] > 0.5, True, best_t


def _relaxation_bound(prog: _Program, deadline: float) -> float | None:
    """The LP relaxation's optimum t (HiGHS): no plan's lowest paper total is above it."""
    c = np.zeros(prog.c_size)
    c[prog.t] = -1.0
    res = milp(
        c,
        constraints=prog.rows,
        integrality=np.zeros(prog.c_size),
        bounds=Bounds(prog.lower, prog.upper),
        options={"time_limit": max(deadline - time.monotonic(), 0.1)},
    )
    if getattr(res, "status", 1) != 0 or getattr(res, "fun", None) is None:
        return None
    return -float(res.fun) + 1e-9


def _dual_bound(result: object) -> float | None:
    """HiGHS's upper bound on t when stage one stopped early (None when it gave none)."""
    bound = getattr(result, "mip_dual_bound", None)
    if bound is None or not np.isfinite(bound):
        return None
    return -float(bound)


def _thresholds(net: PlanNetwork) -> np.ndarray:
    """The distinct pair scores, ascending: the candidate thresholds of PeerReview4All."""
    return np.unique(net.pair_score)


def _pr4a_candidate(
    session: Session,
    net: PlanNetwork,
    plain_used: np.ndarray,
    plain_tiers: dict[str, float],
    kappa: int,
    threshold: float,
) -> np.ndarray | None:
    """Pairs of the best flow in which each paper gets min(kappa, plain count, direct pairs) of
    its directly routed reviewers scoring >= threshold, or None when the coverage tiers drop."""
    n_p = net.n_papers
    counts = np.bincount(net.pair_paper[plain_used], minlength=n_p)
    pair_head = net.heads[net.pair_arcs]
    paper_nodes = net.paper_node(net.pair_paper)
    direct = pair_head == paper_nodes
    per_paper_direct = np.bincount(net.pair_paper[direct], minlength=n_p)
    need = np.minimum(np.minimum(kappa, counts), per_paper_direct)
    top = direct & (net.pair_score >= threshold - 1e-12)
    if np.any(np.bincount(net.pair_paper[top], minlength=n_p) < need):
        return None
    first_top = net.n_nodes
    heads = net.heads.copy()
    pair_heads = heads[net.pair_arcs]
    pair_heads[top] = first_top + net.pair_paper[top]
    heads[net.pair_arcs] = pair_heads
    reviews = net.capacities[net.required_arcs] + net.capacities[net.extra_arcs]
    papers = np.arange(n_p)
    tails = np.concatenate([net.tails, first_top + papers])
    heads = np.concatenate([heads, net.paper_node(papers)])
    caps = np.concatenate([net.capacities, reviews])
    lower = np.concatenate([net.lower, need])
    costs = np.concatenate([net.costs, np.zeros(n_p, np.int64)])
    try:
        result = min_cost_flow(net.n_nodes + n_p, tails, heads, caps, costs, lower=lower)
    except InfeasibleError:
        return None
    used = result.flow[net.pair_arcs] > 0
    tiers = tier_values(net, used)
    if any(tiers[k] < plain_tiers[k] - _EPS for k in ("required", "seniors", "coverage")):
        return None
    return used


def peer_review4all(
    session: Session, net: PlanNetwork, plain_used: np.ndarray, plain_tiers: dict[str, float]
) -> np.ndarray:
    """PeerReview4All's first round: the best of the per-kappa threshold candidates (and the
    plain plan), by the lowest paper total; returns the pairs used."""
    active = _active_papers(session)

    def worst(used: np.ndarray) -> float:
        return float(paper_totals(net, used)[active].min()) if len(active) else 0.0

    best, best_value = plain_used, worst(plain_used)
    thresholds = _thresholds(net)
    if len(thresholds) == 0:
        return best
    reviews = net.capacities[net.required_arcs] + net.capacities[net.extra_arcs]
    for kappa in range(1, int(reviews.max(initial=0)) + 1):
        found: dict[int, np.ndarray] = {}

        def reaches(s: float, kappa: int = kappa, found: dict[int, np.ndarray] = found) -> bool:
            used = _pr4a_candidate(session, net, plain_used, plain_tiers, kappa, s)
            if used is not None:
                found[int(np.searchsorted(thresholds, s))] = used
            return used is not None

        if not reaches(float(thresholds[0])):
            continue
        k = highest_threshold(thresholds, reaches)
        used = found.get(k)
        if used is None:
            continue
        value = worst(used)
        if value > best_value + _EPS:
            best, best_value = used, value
    return best


def fair_plan(
    session: Session,
    *,
    now: datetime | None = None,
    plain: PlanOutcome | None = None,
    time_limit: float = FAIR_TIME_LIMIT,
    method: str = "auto",
) -> FairOutcome:
    """The checked plan with the highest lowest paper total among the coverage-optimal plans:
    exact by MIP within `time_limit` seconds, else PeerReview4All's first round and a bound.

    `method` is "auto" (as just said) or "peerreview4all" (skip the MIP; its LP relaxation
    still gives the bound when the session is small enough).
    """
    if method not in FAIR_METHODS:
        raise ValueError(f"method {method!r}: choose one of {', '.join(FAIR_METHODS)}")
    now = now or datetime.now(UTC)
    if plain is None:
        plain = make_plan(session, fresh=True, now=now)
    # The search starts from a fresh plan with every eligible pair (no bottleneck threshold,
    # no balance, no keep tier): its coverage tiers are the ones to hold.
    policy = session.policy.model_copy(update={"bottleneck": False, "balance": 0.0})
    base = make_plan(session.model_copy(update={"policy": policy}), fresh=True, now=now)
    net = base.network
    assert base.flow is not None
    plain_used = base.flow[net.pair_arcs] > 0
    plain_tiers = tier_values(net, plain_used)
    active = _active_papers(session)
    bound = weakest_pool_bound(session, net)
    used = None
    exact = False
    if len(net.pair_reviewer) <= MIP_PAIR_LIMIT:
        prog = _program(session, net, plain_tiers)
        deadline = time.monotonic() + time_limit
        if method == "auto":
            used, exact, mip_bound = _solve_stages(prog, deadline)
        else:
            mip_bound = _relaxation_bound(prog, deadline)
        if mip_bound is not None:
            bound = min(bound, mip_bound)
    method = MIP_METHOD
    if not exact:
        # PeerReview4All's round, or HiGHS's best plan so far when its worst-off paper is better.
        found = peer_review4all(session, net, plain_used, plain_tiers)
        method = PR4A_METHOD
        if used is not None and _lowest(net, used, active) > _lowest(net, found, active) + _EPS:
            method = MIP_STOPPED_METHOD
        else:
            used = found
    plan, leads = _checked(session, net, used, now, method)
    if plan is None:
        # A candidate broke a rule the network only relaxes (crossing institution and senior
        # rules): fall back to the plain plan, which the checker has passed.
        used = plain_used
        plan, leads = _checked(session, net, used, now, method)
        exact = False
    assert plan is not None
    totals = paper_totals(net, used)
    lowest = float(totals[active].min()) if len(active) else 0.0
    plain_lowest = _plan_lowest(session, plain.plan, active)
    if exact:
        bound = lowest
    worst_ids = [
        session.papers[int(i)].id for i in active[totals[active] <= lowest + 1e-9].tolist()
    ][:10]
    record = PlanFairness(
        lowest_paper_score=round(lowest, 6),
        bound=round(max(bound, lowest), 6),
        exact=exact,
        method=method,
        worst_papers=worst_ids,
        plain_lowest_paper_score=round(plain_lowest, 6),
        plain=comparable_figures(plain.plan.figures),
    )
    return FairOutcome(
        plan=plan.model_copy(update={"checked": True, "fairness": record}),
        network=net,
        potentials=plain.potentials,
        leads=leads,
        flow=None,
        tiers=tier_values(net, used),
        plain=plain,
    )


def _plan_lowest(session: Session, plan: Plan, active: np.ndarray) -> float:
    """The lowest total score of an active paper in a plan."""
    at = session.paper_index()
    totals = np.zeros(len(session.papers))
    for a in plan.assignments:
        totals[at[a.paper]] += a.score
    return float(totals[active].min()) if len(active) else 0.0


def _checked(
    session: Session, net: PlanNetwork, used: np.ndarray, now: datetime, method: str
) -> tuple[Plan | None, object]:
    """The assembled plan of `used` when the independent checker passes it, else (None, None)."""
    plan, leads = assemble_plan(
        session,
        net.pair_reviewer[used],
        net.pair_paper[used],
        net.pair_score[used],
        now,
        f"fairest plan ({method})",
    )
    try:
        check_plan(session, plan, None)
    except PlanCheckError:
        return None, None
    return plan, leads


def fairness_report(plan: Plan) -> dict[str, object]:
    """The JSON of the fairest plan's figures beside the plain plan's, with the caution."""
    f = plan.fairness
    if f is None:
        raise ValueError("the plan is not a fairest plan")
    return {
        "lowest_paper_score": f.lowest_paper_score,
        "bound": f.bound,
        "gap_to_bound": round(f.bound - f.lowest_paper_score, 6),
        "exact": f.exact,
        "method": f.method,
        "worst_papers": f.worst_papers,
        "plain_lowest_paper_score": f.plain_lowest_paper_score,
        "fair": comparable_figures(plan.figures),
        "plain": f.plain,
        "score_given_up": None
        if f.plain is None
        else round(f.plain["total_score"] - plan.figures.total_score, 6),
        "caution": FAIR_CAUTION,
    }
