"""The smallest changes that close the gaps, computed exactly on the max-coverage network.

- Raised caps: a min-cost flow with unit "raise" arcs source → reviewer. It first reaches the
  best coverage that raising caps can give (every paper up to its eligible reviewers), then
  takes the fewest raise units; among those it spreads the raises over people (the k-th extra
  paper asked of one reviewer costs more than a first one asked of another) and prefers pairs
  with higher scores. Only the total is a hard optimum; the rest is a tie-break.
- Recruits: per topic, how many new reviewers (each assumed to take up to the policy's cap,
  free of conflicts, eligible for that topic's papers) close what raising caps cannot or
  should not. A small integer program (HiGHS through scipy) over the shortfall groups' side of
  the cut, solved to optimality: first the best coverage recruits can give, then the fewest
  recruits.
- Conflicts and blocks: which of them keep the most reviews away, shown as information only.
  No fix lifts a conflict of interest.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from review_alloc.flow import max_flow, min_cost_flow
from review_alloc.model import Session
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.explain import (
    TIERS,
    CoverageNetwork,
    ShortfallGroup,
    coverage_network,
    shortfall_groups,
)
from review_alloc.plan.figures import active_demands
from review_alloc.plan.pairkeys import contains
from review_alloc.plan.report import find_gaps, load_issues
from review_alloc.plan.rules import candidate_pairs
from review_alloc.plan.solve import make_plan

PREFERENCE_STEPS = 100
"""Score steps used by the tie-break of the cap-raise fix (scores scaled to 0..100)."""

RECRUIT_SECONDS = 10.0
"""Time the integer program for several topics may take; past it the answer is flagged."""

MAX_RECRUIT_PAIRS = 200_000
"""Above this many pairs on the groups' side of the cut the recruit model is not attempted."""

_EVALUATED_REVIEWERS = 200
_COST_LIMIT = 2**62


@dataclass(frozen=True)
class CapRaise:
    """One reviewer's suggested cap raise."""

    reviewer: str
    name: str
    cap: int
    raise_by: int
    new_cap: int
    papers: tuple[str, ...]
    """Short papers this reviewer would take in the flow that proves the fix."""


@dataclass(frozen=True)
class Unclosable:
    """A paper that a kind of fix cannot bring to its reviews, and why."""

    paper: str
    missing: int
    reason: str


@dataclass(frozen=True)
class CapRaiseFix:
    """The least total cap increase that reaches the best coverage raising caps can give."""

    total: int
    raises: tuple[CapRaise, ...]
    coverage_before: int
    coverage_after: int
    demand: int
    unclosable: tuple[Unclosable, ...]


@dataclass(frozen=True)
class RecruitNeed:
    """New reviewers wanted in one topic, with the reviews they would give."""

    topic: str
    recruits: int
    reviews: int
    papers: tuple[str, ...]
    profile: str


@dataclass(frozen=True)
class RecruitFix:
    """The fewest recruits, per topic, that reach the best coverage recruits can give."""

    total: int
    needs: tuple[RecruitNeed, ...]
    recruit_cap: int
    coverage_before: int
    coverage_after: int
    demand: int
    unclosable: tuple[Unclosable, ...]
    note: str = ""
    exact: bool = True
    """False when the solver's time ran out: `total` is then an upper bound that works."""
    lower_bound: int = 0
    """No fewer recruits can reach `coverage_after` (equal to `total` when exact)."""


@dataclass(frozen=True)
class PairLoss:
    """Conflicted or blocked pairs of one reviewer and what allowing them would add (info only)."""

    reviewer: str
    kind: str
    papers: tuple[str, ...]
    reasons: tuple[str, ...]
    gain: int
    """Reviews the plan would gain if these pairs were allowed (one pair alone: exactly 1)."""
    exact: bool = True
    """False when, past the evaluated reviewers, `gain` is only the lower bound 1."""


def raise_caps_fix(cov: CoverageNetwork) -> CapRaiseFix:
    """The exact least total cap increase (and on whom) for the `reviews` tier's network."""
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    source, sink = 0, 1 + n_r + n_p
    degree = np.bincount(net.pair_reviewer, minlength=n_r).astype(np.int64)
    shortfall = cov.shortfall
    room = np.zeros(n_r, dtype=np.int64)
    # Only reviewers on the cut's sink side can turn extra capacity into coverage.
    candidates = cov.reviewers_on_sink_side()
    room[candidates] = np.clip(degree[candidates] - cov.capacity[candidates], 0, shortfall)
    raisers = np.flatnonzero(room > 0)

    unit_reviewer = np.repeat(raisers, room[raisers])
    unit_rank = np.concatenate(
        [np.zeros(0, np.int64), *(np.arange(k, dtype=np.int64) for k in room[raisers])]
    )
    tails = np.concatenate([cov.tails, np.zeros(len(unit_reviewer), np.int64)]).astype(np.int64)
    heads = np.concatenate([cov.heads, 1 + unit_reviewer]).astype(np.int64)
    caps = np.concatenate([cov.capacities, np.ones(len(unit_reviewer), np.int64)])
    lower = np.concatenate([cov.lower, np.zeros(len(unit_reviewer), np.int64)])
    best = max_flow(
        cov.n_nodes, tails, heads, caps, source, sink, lower=lower if lower.any() else None
    ).value

    score = net.pair_score
    top = float(score.max()) if len(score) else 0.0
    prefer = (
        PREFERENCE_STEPS - np.rint(PREFERENCE_STEPS * score / top).astype(np.int64)
        if top > 0
        else np.zeros(len(score), np.int64)
    )
    score_span = PREFERENCE_STEPS * max(best, 1) + 1
    spread_span = score_span * (shortfall * (shortfall + 1) // 2 + 1)
    w_raise = spread_span + score_span
    costs = np.zeros(len(tails), dtype=np.int64)
    costs[cov.pair_arcs] = prefer
    costs[len(cov.tails) :] = w_raise + unit_rank * score_span
    if w_raise * (shortfall + 1) * 4 >= _COST_LIMIT:
        raise OverflowError("the cap-raise model is too large to weigh exactly")
    supplies = np.zeros(cov.n_nodes, dtype=np.int64)
    supplies[source], supplies[sink] = best, -best
    result = min_cost_flow(
        cov.n_nodes,
        tails,
        heads,
        caps,
        costs,
        supplies=supplies,
        lower=lower if lower.any() else None,
    )
    flow = np.asarray(result.flow)
    raised = np.bincount(unit_reviewer, weights=flow[len(cov.tails) :], minlength=n_r).astype(
        np.int64
    )
    short = cov.demand - _paper_inflow(cov, cov.flow) > 0
    pair_flow = flow[cov.pair_arcs]
    raises = []
    _, _, cap, _ = active_demands(session)
    for j in np.flatnonzero(raised):
        took = np.flatnonzero((net.pair_reviewer == j) & (pair_flow > 0) & short[net.pair_paper])
        raises.append(
            CapRaise(
                reviewer=session.reviewers[j].id,
                name=session.reviewers[j].name,
                cap=int(cap[j]),
                raise_by=int(raised[j]),
                new_cap=int(cap[j] + raised[j]),
                papers=tuple(session.papers[i].id for i in net.pair_paper[took]),
            )
        )
    raises.sort(key=lambda r: (-r.raise_by, r.reviewer))
    p_degree = np.bincount(net.pair_paper, minlength=n_p)
    unclosable = tuple(
        Unclosable(
            paper=session.papers[i].id,
            missing=int(cov.demand[i] - p_degree[i]),
            reason=f"only {int(p_degree[i])} eligible reviewers for {int(cov.demand[i])} reviews",
        )
        for i in np.flatnonzero(p_degree < cov.demand)
    )
    return CapRaiseFix(
        total=int(raised.sum()),
        raises=tuple(raises),
        coverage_before=cov.value,
        coverage_after=int(best),
        demand=int(cov.demand.sum()),
        unclosable=unclosable,
    )


def _paper_inflow(cov: CoverageNetwork, flow: np.ndarray) -> np.ndarray:
    """Reviews each paper gets in a flow of the coverage network (its pair arcs only)."""
    net = cov.plan_net
    return np.bincount(net.pair_paper, weights=flow[cov.pair_arcs], minlength=net.n_papers).astype(
        np.int64
    )


def recruit_fix(cov: CoverageNetwork) -> RecruitFix:
    """The fewest recruits per topic, exactly, for the `reviews` tier's network.

    Recruits of one topic are alike, so they enter the network as one node per topic: source →
    topic (n recruits × cap) → each paper of the topic (at most n: one review per recruit and
    paper), which any integral flow splits back into n recruits round-robin. Only the numbers
    n are integer variables of the program; the flow that proves the answer is then found by
    the flow engine.
    """
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    recruit_cap = session.policy.cap
    papers_t = cov.paper_nodes_on_sink_side() if cov.shortfall else np.zeros(0, np.int64)
    empty = RecruitFix(0, (), recruit_cap, cov.value, cov.value, int(cov.demand.sum()), ())
    if len(papers_t) == 0:
        return empty
    on_t = cov.sink_reach
    pr, pp = net.pair_reviewer, net.pair_paper
    inner = np.flatnonzero(on_t[1 + pr] & on_t[1 + n_r + pp])
    if len(inner) > MAX_RECRUIT_PAIRS:
        return _no_recruits(
            cov,
            f"the short papers' side of the cut has {len(inner):,} pairs, more than the "
            f"{MAX_RECRUIT_PAIRS:,} the exact recruit model takes; raise caps first",
        )
    if recruit_cap == 0:
        return _no_recruits(cov, "the policy's cap is 0, so a recruit could review nothing")

    topics = sorted({t for i in papers_t for t in session.papers[i].topics})
    topic_at = {t: k for k, t in enumerate(topics)}
    y_topic = np.array(
        [topic_at[t] for i in papers_t for t in session.papers[i].topics], dtype=np.int64
    )
    y_paper = np.array([int(i) for i in papers_t for _ in session.papers[i].topics], np.int64)
    most = int(cov.demand[papers_t].sum())
    unlimited = np.full(len(topics), most, dtype=np.int64)
    best = _with_recruits(cov, y_topic, y_paper, unlimited, unlimited)[0]
    outside = int(cov.demand.sum()) - int(cov.demand[papers_t].sum())
    target = best - outside
    if len(topics) == 1:
        counts, bound, exact = _fewest_of_one_topic(cov, y_topic, y_paper, best), None, True
    else:
        found = _fewest_recruits(cov, papers_t, inner, y_topic, y_paper, len(topics), target)
        if found is None:
            return _no_recruits(
                cov, f"the recruit model found no answer within {RECRUIT_SECONDS:g} s"
            )
        counts, bound, exact = found
    note = (
        ""
        if exact
        else f"the solver's {RECRUIT_SECONDS:g} s ran out: these recruits close the gaps, but "
        f"as few as {bound} might"
    )
    value, given = _with_recruits(cov, y_topic, y_paper, counts * recruit_cap, counts)
    if value != best:
        return _no_recruits(cov, "the recruit model's answer did not check out; not shown")

    reviews_by_topic: dict[int, int] = defaultdict(int)
    papers_by_topic: dict[int, list[str]] = defaultdict(list)
    for k in np.flatnonzero(given):
        reviews_by_topic[int(y_topic[k])] += int(given[k])
        papers_by_topic[int(y_topic[k])].append(session.papers[int(y_paper[k])].id)
    word = "proposal" if session.kind == "panel" else "paper"
    needs = tuple(
        RecruitNeed(
            topic=topics[t],
            recruits=int(counts[t]),
            reviews=reviews_by_topic[t],
            papers=tuple(papers_by_topic[t]),
            profile=(
                f"{int(counts[t])} reviewer{'s' if counts[t] != 1 else ''} who work on "
                f"'{topics[t]}', free of conflicts with the authors of these {word}s, able to "
                f"take up to {recruit_cap} {word}s each (the policy's cap)"
            ),
        )
        for t in np.flatnonzero(counts)
    )
    inflow = _paper_inflow(cov, cov.flow)
    gets = inflow + np.bincount(y_paper, weights=given, minlength=n_p).astype(np.int64)
    unclosable = tuple(
        Unclosable(
            paper=session.papers[i].id,
            missing=int(cov.demand[i] - min(gets[i], cov.demand[i])),
            reason=f"the {word} has no topic, so no recruit profile fits it",
        )
        for i in papers_t
        if not session.papers[i].topics and gets[i] < cov.demand[i]
    )
    return RecruitFix(
        total=int(counts.sum()),
        needs=needs,
        recruit_cap=recruit_cap,
        coverage_before=cov.value,
        coverage_after=best,
        demand=int(cov.demand.sum()),
        unclosable=unclosable,
        note=note,
        exact=exact,
        lower_bound=int(counts.sum()) if exact else int(bound),
    )


def _fewest_of_one_topic(
    cov: CoverageNetwork, y_topic: np.ndarray, y_paper: np.ndarray, best: int
) -> np.ndarray:
    """One topic: the least n reaching `best`, by bisection on maximum flows (monotone in n)."""
    cap = cov.session.policy.cap
    low, high = 0, max(int(cov.demand.sum()), 1)
    while low < high:
        mid = (low + high) // 2
        value = _with_recruits(cov, y_topic, y_paper, np.array([mid * cap]), np.array([mid]))[0]
        if value >= best:
            high = mid
        else:
            low = mid + 1
    return np.array([low], dtype=np.int64)


def _with_recruits(
    cov: CoverageNetwork,
    y_topic: np.ndarray,
    y_paper: np.ndarray,
    topic_capacity: np.ndarray,
    per_paper: np.ndarray,
) -> tuple[int, np.ndarray]:
    """Max coverage with topic nodes added, and the flow on each topic → paper arc."""
    net = cov.plan_net
    n_topics = len(topic_capacity)
    topic_node = cov.n_nodes + np.arange(n_topics, dtype=np.int64)
    n_nodes = cov.n_nodes + n_topics
    tails = np.concatenate([cov.tails, np.zeros(n_topics, np.int64), topic_node[y_topic]])
    heads = np.concatenate([cov.heads, topic_node, 1 + net.n_reviewers + y_paper])
    caps = np.concatenate(
        [cov.capacities, np.asarray(topic_capacity, np.int64), np.asarray(per_paper)[y_topic]]
    ).astype(np.int64)
    lower = np.concatenate([cov.lower, np.zeros(n_topics + len(y_topic), np.int64)])
    result = max_flow(
        n_nodes,
        tails,
        heads,
        caps,
        0,
        cov.n_nodes - 1,
        lower=lower if lower.any() else None,
    )
    return int(result.value), np.asarray(result.flow)[len(cov.tails) + n_topics :]


def _fewest_recruits(
    cov: CoverageNetwork,
    papers_t: np.ndarray,
    inner: np.ndarray,
    y_topic: np.ndarray,
    y_paper: np.ndarray,
    n_topics: int,
    target: int,
) -> tuple[np.ndarray, int, bool] | None:
    """Fewest recruits per topic giving the sink-side papers `target` reviews (HiGHS MILP).

    Returns (counts, lower bound, proved optimal), or None when no answer was found in time.

    Everything outside the cut's sink side is fixed by the cut: the reviewers there give each
    of these papers one review per eligible pair, and the sink-side reviewers keep their
    capacity minus pins to papers outside. Only the recruit numbers are integer.
    """
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    on_t = cov.sink_reach
    pr, pp = net.pair_reviewer, net.pair_paper
    pinned = net.lower[net.pair_arcs]
    recruit_cap = float(session.policy.cap)
    reviewers_t = cov.reviewers_on_sink_side()
    pinned_out = np.bincount(pr, weights=pinned * ~on_t[1 + n_r + pp], minlength=n_r)
    room = cov.capacity - pinned_out.astype(np.int64)
    from_outside = np.bincount(pp, weights=~on_t[1 + pr], minlength=n_p).astype(np.int64)

    n_x, n_y, n_z, n_n = len(inner), len(y_topic), len(papers_t), n_topics
    x0, y0, z0, n0 = 0, n_x, n_x + n_y, n_x + n_y + n_z
    n_var = n0 + n_n
    z_of = np.full(n_p, -1, dtype=np.int64)
    z_of[papers_t] = np.arange(n_z)
    r_row = np.full(n_r, -1, dtype=np.int64)
    r_row[reviewers_t] = np.arange(len(reviewers_t))

    rows: list[np.ndarray] = []
    cols: list[np.ndarray] = []
    vals: list[np.ndarray] = []
    upper: list[np.ndarray] = []
    row = 0
    # Sink-side reviewers: the sum of x over a reviewer's arcs is at most their room.
    rows.append(r_row[pr[inner]])
    cols.append(x0 + np.arange(n_x))
    vals.append(np.ones(n_x))
    upper.append(room[reviewers_t].astype(float))
    row += len(reviewers_t)
    # Coverage: z_p - (x into p) - (y into p) <= reviews from the other side of the cut.
    rows += [row + np.arange(n_z), row + z_of[pp[inner]], row + z_of[y_paper]]
    cols += [z0 + np.arange(n_z), x0 + np.arange(n_x), y0 + np.arange(n_y)]
    vals += [np.ones(n_z), -np.ones(n_x), -np.ones(n_y)]
    upper.append(from_outside[papers_t].astype(float))
    row += n_z
    # A paper gets at most one review from each recruit: y_tp <= n_t.
    rows += [row + np.arange(n_y), row + np.arange(n_y)]
    cols += [y0 + np.arange(n_y), n0 + y_topic]
    vals += [np.ones(n_y), -np.ones(n_y)]
    upper.append(np.zeros(n_y))
    row += n_y
    # A recruit takes at most the cap: the sum over p of y_tp <= cap * n_t.
    rows += [row + y_topic, row + np.arange(n_n)]
    cols += [y0 + np.arange(n_y), n0 + np.arange(n_n)]
    vals += [np.ones(n_y), -recruit_cap * np.ones(n_n)]
    upper.append(np.zeros(n_n))
    row += n_n
    # Coverage target: the sum of z >= target.
    rows.append(np.full(n_z, row))
    cols.append(z0 + np.arange(n_z))
    vals.append(-np.ones(n_z))
    upper.append(np.array([-float(target)]))
    row += 1
    matrix = coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(row, n_var)
    ).tocsr()
    demand_t = cov.demand[papers_t].astype(float)
    most = float(demand_t.sum())
    lo = np.concatenate([pinned[inner].astype(float), np.zeros(n_y + n_z + n_n)])
    hi = np.concatenate([np.ones(n_x), np.full(n_y, most), demand_t, np.full(n_n, most)])
    objective = np.zeros(n_var)
    objective[n0:] = 1.0
    integral = np.zeros(n_var)
    integral[n0:] = 1
    found = milp(
        objective,
        constraints=[LinearConstraint(matrix, -np.inf, np.concatenate(upper))],
        integrality=integral,
        bounds=Bounds(lo, hi),
        options={"time_limit": RECRUIT_SECONDS},
    )
    if found.x is None:
        return None
    counts = np.rint(found.x[n0:]).astype(np.int64)
    if found.success:
        return counts, int(counts.sum()), True
    bound = getattr(found, "mip_dual_bound", None)
    lower = int(np.ceil(bound - 1e-6)) if bound is not None and np.isfinite(bound) else 0
    return counts, lower, False


def _no_recruits(cov: CoverageNetwork, note: str) -> RecruitFix:
    return RecruitFix(
        0,
        (),
        cov.session.policy.cap,
        cov.value,
        cov.value,
        int(cov.demand.sum()),
        (),
        note=note,
    )


def pair_losses(cov: CoverageNetwork) -> tuple[PairLoss, ...]:
    """Per reviewer, the conflicted or blocked pairs that keep reviews away (never lifted).

    A single pair (r, p) adds a review exactly when r is reachable from the source and p can
    reach the sink in the residual graph, so only those pairs are listed; each reviewer's pairs
    are then weighed together by one more maximum flow (for the reviewers with most pairs).
    """
    session, net = cov.session, cov.plan_net
    n_p = net.n_papers
    if cov.shortfall == 0:
        return ()
    cand_r, cand_p, _ = candidate_pairs(session)
    keys = cand_r * n_p + cand_p
    reasons = net.conflicts.reason_of()
    conflicted = contains(keys, net.conflicts.keys(n_p))
    block_reason: dict[tuple[int, int], str] = {}
    if session.blocks:
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        for b in session.blocks:
            block_reason[(reviewer_at[b.reviewer], paper_at[b.paper])] = b.reason or "blocked"
    useful = cov.source_reach[1 + cand_r] & cov.sink_reach[1 + net.n_reviewers + cand_p]
    found: dict[tuple[int, str], list[int]] = defaultdict(list)
    for k in np.flatnonzero(useful):
        j, i = int(cand_r[k]), int(cand_p[k])
        if conflicted[k]:
            found[(j, "conflict")].append(i)
        elif (j, i) in block_reason:
            found[(j, "block")].append(i)
    ranked = sorted(found.items(), key=lambda item: (-len(item[1]), item[0]))
    losses: list[PairLoss] = []
    for rank, ((j, kind), papers) in enumerate(ranked):
        exact = len(papers) == 1 or rank < _EVALUATED_REVIEWERS
        gain = 1
        if len(papers) > 1 and exact:
            extra = (np.full(len(papers), j, np.int64), np.array(papers, dtype=np.int64))
            more = coverage_network(session, cov.tier, plan_net=net, extra_pairs=extra)
            gain = more.value - cov.value
        why = reasons if kind == "conflict" else block_reason
        losses.append(
            PairLoss(
                reviewer=session.reviewers[j].id,
                kind=kind,
                papers=tuple(session.papers[i].id for i in papers),
                reasons=tuple(why[(j, i)] for i in papers),
                gain=gain,
                exact=exact,
            )
        )
    losses.sort(key=lambda x: (-x.gain, x.reviewer, x.kind))
    return tuple(losses)


def best_fixes(
    session: Session, cov: CoverageNetwork | None = None
) -> tuple[CapRaiseFix, RecruitFix, tuple[PairLoss, ...]]:
    """The cap-raise fix, the recruit fix and the conflict/block information, together."""
    cov = cov if cov is not None else coverage_network(session, "reviews")
    return raise_caps_fix(cov), recruit_fix(cov), pair_losses(cov)


CAUTIONS = (
    "Raising a cap asks more of a person: agree every raise with the reviewer before relying "
    "on it, and prefer recruiting when the raises are large.",
    "Conflicts of interest are never overridden by this tool: the conflicts listed here are "
    "information for the chair, not a suggested fix, and no fix lifts them.",
)


def explain_session(session: Session) -> dict[str, Any]:
    """The whole explanation as one JSON-ready object: gaps, groups, loads, fixes, cautions.

    The session is planned afresh (nothing is saved), and the plan's coverage in both tiers is
    checked against the maximum flows the groups come from.
    """
    outcome = make_plan(session)
    plan, net = outcome.plan, outcome.network
    covs = {tier: coverage_network(session, tier, plan_net=net) for tier in TIERS}
    got = {"min_reviews": plan.figures.required_coverage, "reviews": plan.figures.coverage}
    wrong = [
        f"{tier} coverage: plan {got[tier]}, maximum flow {cov.value}"
        for tier, cov in covs.items()
        if got[tier] != cov.value
    ]
    if wrong:
        raise PlanCheckError(wrong)
    groups = {tier: shortfall_groups(cov) for tier, cov in covs.items()}
    group_of: dict[tuple[str, str], str] = {}
    group_rows: list[dict[str, Any]] = []
    for tier in TIERS:
        for k, g in enumerate(groups[tier], start=1):
            gid = f"{tier}-{k}"
            group_rows.append({"id": gid, **_group_row(g)})
            for pid in g.papers:
                group_of[(tier, pid)] = gid
    gap_rows = [
        {
            **asdict(g),
            "group": group_of.get(("reviews", g.paper)),
            "min_reviews_group": group_of.get(("min_reviews", g.paper)),
        }
        for g in find_gaps(session, plan)
    ]
    over, under = load_issues(session, plan)
    caps_fix, recruits, losses = best_fixes(session, covs["reviews"])
    return {
        "session": session.name,
        "coverage": {
            tier: {
                "demand": int(cov.demand.sum()),
                "best": cov.value,
                "shortfall": cov.shortfall,
                "groups_shortfall": sum(g.shortfall for g in groups[tier]),
            }
            for tier, cov in covs.items()
        },
        "gaps": gap_rows,
        "groups": group_rows,
        "overloads": [asdict(x) for x in over],
        "underloads": [asdict(x) for x in under],
        "fixes": {
            "raise_caps": asdict(caps_fix),
            "recruit": asdict(recruits),
            "conflicts_and_blocks": {
                "note": "information only: what allowing these pairs would add; "
                "no fix lifts a conflict or a block",
                "pairs": [asdict(x) for x in losses],
            },
        },
        "cautions": list(CAUTIONS),
    }


def _group_row(g: ShortfallGroup) -> dict[str, Any]:
    return {
        "tier": g.tier,
        "papers": list(g.papers),
        "reviewers": list(g.reviewers),
        "saturated_reviewers": list(g.saturated_reviewers),
        "topics": list(g.topics),
        "needed": g.needed,
        "available": g.available,
        "shortfall": g.shortfall,
        "cause": g.cause,
        "factors": dict(g.factors),
    }
