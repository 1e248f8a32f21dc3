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
from review_alloc.plan.network import candidate_pairs
from review_alloc.plan.report import find_gaps, load_issues
from review_alloc.plan.solve import make_plan

PREFERENCE_STEPS = 100
"""Score steps used by the tie-break of the cap-raise fix (scores scaled to 0..100)."""

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
    return np.bincount(
        net.pair_paper, weights=flow[cov.pair_arcs], minlength=net.n_papers
    ).astype(np.int64)


def recruit_fix(cov: CoverageNetwork) -> RecruitFix:
    """The fewest recruits per topic, exactly, for the `reviews` tier's network."""
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    recruit_cap = session.policy.cap
    papers_t = cov.paper_nodes_on_sink_side() if cov.shortfall else np.zeros(0, np.int64)
    empty = RecruitFix(0, (), recruit_cap, cov.value, cov.value, int(cov.demand.sum()), ())
    if len(papers_t) == 0:
        return empty
    on_t = cov.sink_reach
    pr, pp = net.pair_reviewer, net.pair_paper
    pinned = net.lower[net.pair_arcs]
    inner = np.flatnonzero(on_t[1 + pr] & on_t[1 + n_r + pp])
    if len(inner) > MAX_RECRUIT_PAIRS:
        return _no_recruits(
            cov, f"the short papers' side of the cut has {len(inner):,} pairs, more than the "
            f"{MAX_RECRUIT_PAIRS:,} the exact recruit model takes; raise caps first"
        )
    if recruit_cap == 0:
        return _no_recruits(cov, "the policy's cap is 0, so a recruit could review nothing")
    reviewers_t = cov.reviewers_on_sink_side()
    pinned_out = np.bincount(
        pr, weights=pinned * ~on_t[1 + n_r + pp], minlength=n_r
    ).astype(np.int64)
    room = cov.capacity - pinned_out
    from_outside = np.bincount(pp, weights=~on_t[1 + pr], minlength=n_p).astype(np.int64)

    topics = sorted({t for i in papers_t for t in session.papers[i].topics})
    topic_at = {t: k for k, t in enumerate(topics)}
    y_topic = [topic_at[t] for i in papers_t for t in session.papers[i].topics]
    y_paper = [int(i) for i in papers_t for _ in session.papers[i].topics]
    n_x, n_y, n_z, n_n = len(inner), len(y_topic), len(papers_t), len(topics)
    x0, y0, z0, n0 = 0, n_x, n_x + n_y, n_x + n_y + n_z
    n_var = n0 + n_n
    z_of = {int(i): k for k, i in enumerate(papers_t)}
    r_row = {int(j): k for k, j in enumerate(reviewers_t)}

    rows: list[np.ndarray] = []
    cols: list[np.ndarray] = []
    vals: list[np.ndarray] = []
    upper: list[np.ndarray] = []
    row = 0
    # Reviewer capacity on the sink side: sum of x over a reviewer's arcs <= room.
    x_rows = np.array([r_row[int(j)] for j in pr[inner]], dtype=np.int64)
    rows.append(x_rows)
    cols.append(x0 + np.arange(n_x))
    vals.append(np.ones(n_x))
    upper.append(room[reviewers_t].astype(float))
    row += len(reviewers_t)
    # Coverage: z_p - x into p - y into p <= reviews from the other side of the cut.
    x_paper = np.array([z_of[int(i)] for i in pp[inner]], dtype=np.int64)
    y_paper_row = np.array([z_of[i] for i in y_paper], dtype=np.int64)
    rows += [row + np.arange(n_z), row + x_paper, row + y_paper_row]
    cols += [z0 + np.arange(n_z), x0 + np.arange(n_x), y0 + np.arange(n_y)]
    vals += [np.ones(n_z), -np.ones(n_x), -np.ones(n_y)]
    upper.append(from_outside[papers_t].astype(float))
    row += n_z
    # A paper gets at most one review from each recruit: y_tp <= n_t.
    rows += [row + np.arange(n_y), row + np.arange(n_y)]
    cols += [y0 + np.arange(n_y), n0 + np.array(y_topic, dtype=np.int64)]
    vals += [np.ones(n_y), -np.ones(n_y)]
    upper.append(np.zeros(n_y))
    row += n_y
    # A recruit takes at most the cap: sum_p y_tp <= cap * n_t.
    rows += [row + np.array(y_topic, dtype=np.int64), row + np.arange(n_n)]
    cols += [y0 + np.arange(n_y), n0 + np.arange(n_n)]
    vals += [np.ones(n_y), -float(recruit_cap) * np.ones(n_n)]
    upper.append(np.zeros(n_n))
    row += n_n
    matrix = coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(row, n_var)
    ).tocsr()
    b_up = np.concatenate(upper)
    demand_t = cov.demand[papers_t].astype(float)
    most = float(demand_t.sum())
    lo = np.concatenate(
        [pinned[inner].astype(float), np.zeros(n_y), np.zeros(n_z), np.zeros(n_n)]
    )
    hi = np.concatenate([np.ones(n_x), np.full(n_y, most), demand_t, np.full(n_n, most)])
    # All integer: only n must be, but integral x and y let the answer be read off directly.
    integral = np.ones(n_var)
    capacity = LinearConstraint(matrix, -np.inf, b_up)

    first = np.zeros(n_var)
    first[z0 : z0 + n_z] = -1.0
    stage1 = milp(first, constraints=[capacity], integrality=integral, bounds=Bounds(lo, hi))
    if not stage1.success:
        return _no_recruits(cov, f"the recruit model could not be solved: {stage1.message}")
    target = int(round(-stage1.fun))
    second = np.zeros(n_var)
    second[n0:] = 1.0
    reach = np.zeros((1, n_var))
    reach[0, z0 : z0 + n_z] = 1.0
    stage2 = milp(
        second,
        constraints=[capacity, LinearConstraint(reach, target - 0.5, np.inf)],
        integrality=integral,
        bounds=Bounds(lo, hi),
    )
    if not stage2.success:
        return _no_recruits(cov, f"the recruit model could not be solved: {stage2.message}")
    counts = np.rint(stage2.x[n0:]).astype(np.int64)
    given = np.rint(stage2.x[y0 : y0 + n_y]).astype(np.int64)
    reviews_by_topic: dict[int, int] = defaultdict(int)
    papers_by_topic: dict[int, list[str]] = defaultdict(list)
    for k, (t, i) in enumerate(zip(y_topic, y_paper, strict=True)):
        if given[k] > 0:
            reviews_by_topic[t] += int(given[k])
            papers_by_topic[t].append(session.papers[i].id)
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
    outside = int(cov.demand.sum() - demand_t.sum())
    topicless = tuple(
        Unclosable(
            paper=session.papers[i].id,
            missing=int(cov.demand[i] - round(stage2.x[z0 + k])),
            reason=f"the {word} has no topic, so no recruit profile fits it",
        )
        for k, i in enumerate(papers_t)
        if not session.papers[i].topics and round(stage2.x[z0 + k]) < cov.demand[i]
    )
    return RecruitFix(
        total=int(counts.sum()),
        needs=needs,
        recruit_cap=recruit_cap,
        coverage_before=cov.value,
        coverage_after=outside + target,
        demand=int(cov.demand.sum()),
        unclosable=topicless,
    )


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
    conflicted = np.isin(keys, net.conflicts.keys(n_p))
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
