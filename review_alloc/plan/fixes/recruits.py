"""The recruit fix: per topic, how many new reviewers close what raising caps cannot or should not.

Each recruit is assumed to take up to the policy's cap, free of conflicts, eligible for that
topic's papers. A small integer program (HiGHS through scipy) over the shortfall groups' side of
the cut, solved to optimality: first the best coverage recruits can give, then the fewest
recruits.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from review_alloc.flow import max_flow
from review_alloc.plan.explain import CoverageNetwork
from review_alloc.plan.fixes.common import Unclosable, paper_inflow

RECRUIT_SECONDS = 10.0
"""Time the integer program for several topics may take; past it the answer is flagged."""

MAX_NETWORK_MODEL_ARCS = 60_000
"""Under the institution limit, the largest coverage network the whole-network model takes."""

MAX_RECRUIT_PAIRS = 200_000
"""Above this many pairs on the groups' side of the cut the recruit model is not attempted."""


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
        if len(cov.group_paper) and len(cov.tails) + 2 * len(y_topic) <= MAX_NETWORK_MODEL_ARCS:
            # Crowded (paper, institution) groups cap what the reviewers inside the cut give,
            # which the cut-side model below cannot state: model the whole network instead.
            found = _fewest_recruits_on_network(cov, y_topic, y_paper, len(topics), best)
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
    word = session.noun
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
    inflow = paper_inflow(cov)
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
        cov.sink,
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
    constraint = LinearConstraint(matrix, -np.inf, np.concatenate(upper))
    return _fewest_counts(constraint, lo, hi, n0)


def _fewest_counts(
    constraint: LinearConstraint, lo: np.ndarray, hi: np.ndarray, first: int
) -> tuple[np.ndarray, int, bool] | None:
    """Minimise the recruit numbers (the integer variables from `first` on) within the time
    limit: (counts, lower bound, proved optimal), or None when nothing was found in time."""
    objective = np.zeros(len(lo))
    objective[first:] = 1.0
    integral = np.zeros(len(lo))
    integral[first:] = 1
    found = milp(
        objective,
        constraints=[constraint],
        integrality=integral,
        bounds=Bounds(lo, hi),
        options={"time_limit": RECRUIT_SECONDS},
    )
    if found.x is None:
        return None
    counts = np.rint(found.x[first:]).astype(np.int64)
    if found.success:
        return counts, int(counts.sum()), True
    bound = getattr(found, "mip_dual_bound", None)
    lower = int(np.ceil(bound - 1e-6)) if bound is not None and np.isfinite(bound) else 0
    return counts, lower, False


def _fewest_recruits_on_network(
    cov: CoverageNetwork,
    y_topic: np.ndarray,
    y_paper: np.ndarray,
    n_topics: int,
    best: int,
) -> tuple[np.ndarray, int, bool] | None:
    """Fewest recruits per topic for coverage `best`, as one program over the whole network.

    Variables: the flow on every arc of the coverage network (bounded by its lower bound and
    capacity, group arcs included), on each source -> topic arc (at most cap x n_t) and topic
    -> paper arc (at most n_t), and the integer recruit numbers n_t. Flow is conserved at every
    node but the source and the sink, and the sink receives at least `best`. For integer n_t the
    flow part is a network matrix, so its optimum is integral: only the n_t need branching.
    """
    net = cov.plan_net
    cap = float(cov.session.policy.cap)
    n_a, n_y = len(cov.tails), len(y_topic)
    source, sink = 0, cov.sink
    topic_node = cov.n_nodes + np.arange(n_topics, dtype=np.int64)
    n_nodes = cov.n_nodes + n_topics
    tails = np.concatenate([cov.tails, np.full(n_topics, source), topic_node[y_topic]])
    heads = np.concatenate([cov.heads, topic_node, 1 + net.n_reviewers + y_paper])
    n_f = n_a + n_topics + n_y
    n_var = n_f + n_topics
    arcs = np.arange(n_f)
    # Conservation: inflow - outflow = 0 at every node but the source and the sink.
    inner = np.ones(n_nodes, dtype=bool)
    inner[[source, sink]] = False
    row_of = np.full(n_nodes, -1, dtype=np.int64)
    row_of[inner] = np.arange(int(inner.sum()))
    into, out = inner[heads], inner[tails]
    rows = [row_of[heads[into]], row_of[tails[out]]]
    cols = [arcs[into], arcs[out]]
    vals = [np.ones(int(into.sum())), -np.ones(int(out.sum()))]
    n_rows = int(inner.sum())
    low = [np.zeros(n_rows)]
    high = [np.zeros(n_rows)]
    # Coverage: the flow into the sink is at least `best`.
    to_sink = np.flatnonzero(heads == sink)
    from_sink = np.flatnonzero(tails == sink)
    rows += [np.full(len(to_sink), n_rows), np.full(len(from_sink), n_rows)]
    cols += [to_sink, from_sink]
    vals += [np.ones(len(to_sink)), -np.ones(len(from_sink))]
    low.append(np.array([float(best)]))
    high.append(np.array([np.inf]))
    n_rows += 1
    # A recruit takes at most the cap, and gives a paper at most one review.
    k = np.arange(n_topics)
    rows += [n_rows + k, n_rows + k]
    cols += [n_a + k, n_f + k]
    vals += [np.ones(n_topics), -cap * np.ones(n_topics)]
    n_rows += n_topics
    y = np.arange(n_y)
    rows += [n_rows + y, n_rows + y]
    cols += [n_a + n_topics + y, n_f + y_topic]
    vals += [np.ones(n_y), -np.ones(n_y)]
    n_rows += n_y
    low.append(np.full(n_topics + n_y, -np.inf))
    high.append(np.zeros(n_topics + n_y))
    matrix = coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(n_rows, n_var),
    ).tocsr()
    most = float(cov.demand.sum())
    lo = np.concatenate([cov.lower.astype(float), np.zeros(n_topics + n_y + n_topics)])
    hi = np.concatenate(
        [cov.capacities.astype(float), np.full(n_topics + n_y, most), np.full(n_topics, most)]
    )
    constraint = LinearConstraint(matrix, np.concatenate(low), np.concatenate(high))
    return _fewest_counts(constraint, lo, hi, n_f)


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
