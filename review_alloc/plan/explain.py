"""Why papers are short of reviews: the shortfall groups of the max-coverage minimum cut.

For one tier (the `min_reviews` tier or the `reviews` tier) the coverage network is
source → reviewer (cap plus allowed overload) → paper (eligible pairs, pins as lower bounds) →
sink (the tier's demand); a paper's reviews above the tier's demand may flow back to the source
so that pins never make the network infeasible. Its maximum flow is the tier's best coverage.

The sink side of the minimum cut that is closest to the sink (the nodes that can still reach it
in the residual graph) holds every short paper. By Hall's theorem in its deficiency form, the
papers there ask for more than their reviewers can give. Split into connected components through
the reviewers on that side, each component is a shortfall group: its reviewers spend all their
capacity inside it (minus pins outside, which the cut counts), and every other eligible
reviewer gives it exactly one review per eligible pair. So a group's `available` is what the cut
says, `needed - available` is what its papers miss in every optimal plan, and the groups'
shortfalls add up to the total shortfall (total demand minus maximum flow).
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from dataclasses import dataclass, field

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from review_alloc.flow import max_flow
from review_alloc.model import Session
from review_alloc.plan.figures import active_demands
from review_alloc.plan.institutions import reviewer_institutions
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import contains
from review_alloc.plan.rules import candidate_pairs

COVERAGE_TIERS = ("min_reviews", "reviews")
"""The two coverage tiers a group can explain, in objective order."""

_GAIN_GROUPS = 25
"""Groups (largest shortfall first) whose causes get exact coverage-gain figures."""


@dataclass(frozen=True)
class CoverageNetwork:
    """The max-coverage network of one tier, its maximum flow and both minimal cut sides."""

    session: Session
    plan_net: PlanNetwork
    tier: str
    n_nodes: int
    tails: np.ndarray
    heads: np.ndarray
    capacities: np.ndarray
    lower: np.ndarray
    capacity: np.ndarray
    """Per reviewer: cap plus allowed overload (0 when withdrawn)."""
    demand: np.ndarray
    """Per paper: the tier's demand (min_reviews or reviews; 0 when withdrawn)."""
    flow: np.ndarray
    value: int
    source_reach: np.ndarray
    """Nodes the source can still reach in the residual graph (the smallest source side)."""
    sink_reach: np.ndarray
    """Nodes that can still reach the sink in the residual graph (the smallest sink side)."""
    group_paper: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Paper of each (paper, institution) group node (node `sink + 1 + k`), as the planner
    caps them; their arcs to the papers are the last block."""

    @property
    def sink(self) -> int:
        """The sink's node id (group nodes, when any, come after it)."""
        return 1 + self.plan_net.n_reviewers + self.plan_net.n_papers

    @property
    def n_reviewers(self) -> int:
        """Number of reviewers (node 1 + j is reviewer j)."""
        return self.plan_net.n_reviewers

    @property
    def pair_arcs(self) -> slice:
        """The reviewer → paper arcs, in the plan network's pair order."""
        n_r = self.plan_net.n_reviewers
        return slice(n_r, n_r + len(self.plan_net.pair_reviewer))

    @property
    def shortfall(self) -> int:
        """Total demand of the tier minus its maximum coverage."""
        return int(self.demand.sum()) - self.value

    def paper_nodes_on_sink_side(self) -> np.ndarray:
        """Paper indices on the smallest sink side."""
        n_r, n_p = self.plan_net.n_reviewers, self.plan_net.n_papers
        return np.flatnonzero(self.sink_reach[1 + n_r : 1 + n_r + n_p])

    def reviewers_on_sink_side(self) -> np.ndarray:
        """Reviewer indices on the smallest sink side (their capacity is used up)."""
        n_r = self.plan_net.n_reviewers
        return np.flatnonzero(self.sink_reach[1 : 1 + n_r])


def reviewer_capacity(session: Session) -> np.ndarray:
    """Most papers each reviewer can take in a plan: cap plus allowed overload (0 if withdrawn)."""
    _, _, cap, _ = active_demands(session)
    return cap + overload_allowances(session)


def coverage_network(
    session: Session,
    tier: str = "reviews",
    *,
    plan_net: PlanNetwork | None = None,
    extra_pairs: tuple[np.ndarray, np.ndarray] | None = None,
) -> CoverageNetwork:
    """Solve the tier's max-coverage network; `extra_pairs` adds (reviewer, paper) arcs."""
    if tier not in COVERAGE_TIERS:
        raise ValueError(f"tier {tier!r} must be one of {COVERAGE_TIERS}")
    net = plan_net if plan_net is not None else build_network(session)
    reviews, minimum, _, _ = active_demands(session)
    capacity = reviewer_capacity(session)
    demand = minimum if tier == "min_reviews" else reviews
    n_r, n_p = net.n_reviewers, net.n_papers
    source, sink = 0, 1 + n_r + n_p
    reviewer = net.pair_reviewer
    paper = net.pair_paper
    pinned = net.lower[net.pair_arcs]
    if extra_pairs is not None:
        reviewer = np.concatenate([reviewer, extra_pairs[0].astype(np.int64)])
        paper = np.concatenate([paper, extra_pairs[1].astype(np.int64)])
        pinned = np.concatenate([pinned, np.zeros(len(extra_pairs[0]), np.int64)])
    r_nodes = 1 + np.arange(n_r, dtype=np.int64)
    p_nodes = 1 + n_r + np.arange(n_p, dtype=np.int64)
    # The institution limit as the planner states it: a (paper, institution) group with more
    # candidates than the limit passes through one node whose arc to the paper carries it.
    pair_group, group_paper = limited_groups(session, reviewer, paper)
    n_g = len(group_paper)
    g_nodes = sink + 1 + np.arange(n_g, dtype=np.int64)
    pair_head = np.where(pair_group >= 0, sink + 1 + pair_group, 1 + n_r + paper)
    limit = int(session.policy.max_per_institution or 0)
    tails = np.concatenate([np.zeros(n_r, np.int64), 1 + reviewer, p_nodes, p_nodes, g_nodes])
    heads = np.concatenate(
        [
            r_nodes,
            pair_head,
            np.full(n_p, sink, np.int64),
            np.zeros(n_p, np.int64),
            1 + n_r + group_paper,
        ]
    )
    # The arcs back to the source take pinned reviews above the tier's demand, uncounted.
    capacities = np.concatenate(
        [capacity, np.ones(len(reviewer), np.int64), demand, reviews - demand, np.full(n_g, limit)]
    ).astype(np.int64)
    lower = np.concatenate(
        [np.zeros(n_r, np.int64), pinned, np.zeros(2 * n_p + n_g, np.int64)]
    ).astype(np.int64)
    n_nodes = n_r + n_p + 2 + n_g
    result = max_flow(
        n_nodes, tails, heads, capacities, source, sink, lower=lower if lower.any() else None
    )
    flow = np.asarray(result.flow)
    return CoverageNetwork(
        session=session,
        plan_net=net,
        tier=tier,
        n_nodes=n_nodes,
        tails=tails,
        heads=heads,
        capacities=capacities,
        lower=lower,
        capacity=capacity,
        demand=demand,
        flow=flow,
        value=int(result.value),
        source_reach=np.asarray(result.source_side, dtype=bool),
        sink_reach=np.asarray(result.sink_side, dtype=bool),
        group_paper=group_paper,
    )


def limited_groups(
    session: Session, reviewer: np.ndarray, paper: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """(per pair its crowded (paper, institution) group or -1, the paper of each group).

    A group is crowded when it has more candidate pairs than `max_per_institution`; reviewers
    without an institution belong to none (as in `plan.institutions`).
    """
    none = np.full(len(reviewer), -1, dtype=np.int64)
    m = session.policy.max_per_institution
    if m is None or len(reviewer) == 0:
        return none, np.zeros(0, np.int64)
    inst, names = reviewer_institutions(session)
    n_inst = max(len(names), 1)
    g_inst = inst[reviewer]
    key = np.where(g_inst >= 0, paper * n_inst + g_inst, -1)
    uniq, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    crowded = (uniq >= 0) & (counts > m)
    number = np.cumsum(crowded) - 1
    pair_group = np.where(crowded[inverse], number[inverse], -1).astype(np.int64)
    return pair_group, (uniq[crowded] // n_inst).astype(np.int64)


@dataclass(frozen=True)
class ShortfallGroup:
    """Papers whose eligible reviewers cannot supply what they need, with the numbers of the cut."""

    tier: str
    papers: tuple[str, ...]
    reviewers: tuple[str, ...]
    """Every reviewer eligible for at least one of the papers."""
    saturated_reviewers: tuple[str, ...]
    """The reviewers whose whole capacity goes to these papers (the cut's sink side)."""
    topics: tuple[str, ...]
    """The papers' topics, most frequent first."""
    needed: int
    available: int
    shortfall: int
    cause: str
    factors: dict[str, int] = field(default_factory=dict)
    paper_index: tuple[int, ...] = ()
    reviewer_index: tuple[int, ...] = ()
    saturated_index: tuple[int, ...] = ()


def shortfall_groups(cov: CoverageNetwork, *, with_gains: bool = True) -> list[ShortfallGroup]:
    """The independent shortfall groups of one tier, largest shortfall first."""
    session, net = cov.session, cov.plan_net
    n_r, n_p = net.n_reviewers, net.n_papers
    papers_t = cov.paper_nodes_on_sink_side()
    if cov.shortfall == 0 or len(papers_t) == 0:
        return []
    on_t = cov.sink_reach
    pr, pp = net.pair_reviewer, net.pair_paper
    sink = cov.sink
    # Components over the sink side's reviewer, paper and group nodes, joined by any arc with
    # both ends there (pair arcs and the institution groups' arcs; never through the sink).
    inner_arc = on_t[cov.tails] & on_t[cov.heads] & (cov.tails != sink) & (cov.heads != sink)
    inner_arc &= (cov.tails != 0) & (cov.heads != 0)
    graph = coo_matrix(
        (np.ones(int(inner_arc.sum()), np.int8), (cov.tails[inner_arc], cov.heads[inner_arc])),
        shape=(cov.n_nodes, cov.n_nodes),
    )
    _, label = connected_components(graph, directed=False)
    paper_label = label[1 + n_r : 1 + n_r + n_p]
    reviewer_label = label[1 : 1 + n_r]
    reviewers_t = cov.reviewers_on_sink_side()
    # The cut's capacity into each component: arcs from the source side into it, less the
    # lower bounds (pins) of arcs leaving it for the source side.
    entering = ~on_t[cov.tails] & on_t[cov.heads] & (cov.heads != sink)
    leaving = on_t[cov.tails] & ~on_t[cov.heads] & (cov.tails != sink)
    into = np.bincount(
        label[cov.heads[entering]], weights=cov.capacities[entering], minlength=cov.n_nodes
    ) - np.bincount(label[cov.tails[leaving]], weights=cov.lower[leaving], minlength=cov.n_nodes)

    groups: list[ShortfallGroup] = []
    for comp in np.unique(paper_label[papers_t]):
        g_papers = papers_t[paper_label[papers_t] == comp]
        g_saturated = reviewers_t[reviewer_label[reviewers_t] == comp]
        in_group = np.zeros(n_p, dtype=bool)
        in_group[g_papers] = True
        available = int(round(into[comp]))
        needed = int(cov.demand[g_papers].sum())
        eligible = np.unique(pr[in_group[pp]])
        topics = Counter(t for i in g_papers for t in session.papers[i].topics)
        groups.append(
            ShortfallGroup(
                tier=cov.tier,
                papers=tuple(session.papers[i].id for i in g_papers),
                reviewers=tuple(session.reviewers[j].id for j in eligible),
                saturated_reviewers=tuple(session.reviewers[j].id for j in g_saturated),
                topics=tuple(t for t, _ in topics.most_common()),
                needed=needed,
                available=available,
                shortfall=needed - available,
                cause="",
                paper_index=tuple(int(i) for i in g_papers),
                reviewer_index=tuple(int(j) for j in eligible),
                saturated_index=tuple(int(j) for j in g_saturated),
            )
        )
    groups.sort(key=lambda g: (-g.shortfall, g.papers))
    # Candidates of the short papers only, computed once for every group.
    cand_r, cand_p, _ = candidate_pairs(session)
    short = np.zeros(n_p, dtype=bool)
    short[papers_t] = True
    candidates = (cand_r[short[cand_p]], cand_p[short[cand_p]])
    return [
        _with_cause(cov, g, candidates, with_gains=with_gains and k < _GAIN_GROUPS)
        for k, g in enumerate(groups)
    ]


def _with_cause(
    cov: CoverageNetwork,
    group: ShortfallGroup,
    candidates: tuple[np.ndarray, np.ndarray],
    *,
    with_gains: bool,
) -> ShortfallGroup:
    """Count what keeps reviewers away from the group's papers and name the main cause."""
    session, net = cov.session, cov.plan_net
    n_p = net.n_papers
    g_papers = np.array(group.paper_index, dtype=np.int64)
    in_group = np.zeros(n_p, dtype=bool)
    in_group[g_papers] = True
    eligible = np.array(group.reviewer_index, dtype=np.int64)

    cand_r, cand_p = candidates
    cand_keys = cand_r * n_p + cand_p
    keep = in_group[cand_p]
    cand_r, cand_p, cand_keys = cand_r[keep], cand_p[keep], cand_keys[keep]
    conflict_keys = cov.plan_net.conflicts.keys(n_p)
    conflicted = contains(cand_keys, conflict_keys)
    blocked = np.zeros(len(cand_keys), dtype=bool)
    if session.blocks:
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        block_keys = np.array(
            [reviewer_at[b.reviewer] * n_p + paper_at[b.paper] for b in session.blocks],
            dtype=np.int64,
        )
        blocked = contains(cand_keys, block_keys) & ~conflicted

    unscored_r, unscored_p = _unscored_topic_pairs(session, g_papers, conflict_keys)
    group_topics = set(group.topics)
    in_topic = sum(
        1 for r in session.reviewers if not r.withdrawn and group_topics.intersection(r.topics)
    )
    inside = in_group[net.pair_paper]
    used_elsewhere = int(
        cov.flow[cov.pair_arcs][contains(net.pair_reviewer, eligible) & ~inside].sum()
    )
    eligible_capacity = int(cov.capacity[eligible].sum()) if len(eligible) else 0
    degree = np.bincount(net.pair_paper[inside], minlength=n_p)[g_papers]
    own_deficit = np.maximum(cov.demand[g_papers] - degree, 0)
    saturated = np.array(group.saturated_index, dtype=np.int64)
    full = int((_paper_inflow(cov)[g_papers] >= cov.demand[g_papers]).sum())
    factors = {
        "eligible_reviewers": len(eligible),
        "reviewers_in_topics": in_topic,
        "eligible_capacity": eligible_capacity,
        "capacity_used_elsewhere": used_elsewhere,
        "saturated_capacity": int(cov.capacity[saturated].sum()) if len(saturated) else 0,
        "papers_with_too_few_eligible": int((own_deficit > 0).sum()),
        "missing_for_too_few_eligible": int(own_deficit.sum()),
        "full_papers_in_group": full,
        "conflicted_pairs": int(conflicted.sum()),
        "conflicted_reviewers": len(np.unique(cand_r[conflicted])),
        "blocked_pairs": int(blocked.sum()),
        "unscored_topic_pairs": len(unscored_r),
    }
    if with_gains:
        for name, pairs in (
            ("gain_if_conflicts_allowed", (cand_r[conflicted], cand_p[conflicted])),
            ("gain_if_blocks_lifted", (cand_r[blocked], cand_p[blocked])),
            ("gain_if_unscored_allowed", (unscored_r, unscored_p)),
        ):
            factors[name] = _gain(cov, pairs, g_papers) if len(pairs[0]) else 0
    return dataclasses.replace(group, cause=_cause_text(session, group, factors), factors=factors)


def _paper_inflow(cov: CoverageNetwork) -> np.ndarray:
    """Reviews each paper gets in the coverage network's maximum flow."""
    net = cov.plan_net
    flow = cov.flow[cov.pair_arcs]
    return np.bincount(net.pair_paper, weights=flow, minlength=net.n_papers).astype(np.int64)


def _gain(cov: CoverageNetwork, pairs: tuple[np.ndarray, np.ndarray], papers: np.ndarray) -> int:
    """Coverage of the group's papers gained in this tier if the given pairs were eligible."""
    more = coverage_network(cov.session, cov.tier, plan_net=cov.plan_net, extra_pairs=pairs)
    return more.value - cov.value if len(papers) else 0


def _unscored_topic_pairs(
    session: Session, papers: np.ndarray, conflict_keys: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Pairs left out only by the unscored rule: reviewer shares a topic, no score, no conflict."""
    if session.policy.unscored != "exclude":
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    n_p = len(session.papers)
    table = session.scores
    scored = np.unique(table.reviewer.astype(np.int64) * n_p + table.paper)
    blocked = set()
    if session.blocks:
        blocked = {(b.reviewer, b.paper) for b in session.blocks}
    rows_r: list[int] = []
    rows_p: list[int] = []
    for i in papers.tolist():
        topics = set(session.papers[i].topics)
        for j, r in enumerate(session.reviewers):
            if r.withdrawn or not topics.intersection(r.topics):
                continue
            if (r.id, session.papers[i].id) in blocked:
                continue
            rows_r.append(j)
            rows_p.append(i)
    r_arr = np.array(rows_r, dtype=np.int64)
    p_arr = np.array(rows_p, dtype=np.int64)
    keys = r_arr * n_p + p_arr
    keep = ~contains(keys, scored) & ~contains(keys, conflict_keys)
    return r_arr[keep], p_arr[keep]


def _cause_text(session: Session, group: ShortfallGroup, f: dict[str, int]) -> str:
    """The main cause in words, then the other factors that remove candidates."""
    word = session.noun
    n = len(group.papers)
    what = f"{n} {word}{'s' if n != 1 else ''}"
    topic = f" in '{group.topics[0]}'" if group.topics else ""
    parts: list[str] = []
    removers = [
        ("conflicts", f.get("gain_if_conflicts_allowed", 0)),
        ("blocks", f.get("gain_if_blocks_lifted", 0)),
        ("the unscored-pairs rule", f.get("gain_if_unscored_allowed", 0)),
    ]
    decisive = [name for name, gain in removers if gain >= group.shortfall]
    if f["missing_for_too_few_eligible"] >= group.shortfall:
        k = f["papers_with_too_few_eligible"]
        main = (
            f"too few eligible reviewers per {word}: {k} of these {what}{topic} "
            f"{'has' if k == 1 else 'have'} fewer eligible reviewers than the reviews wanted "
            f"({f['missing_for_too_few_eligible']} reviews cannot be given by anyone eligible)"
        )
    elif f["eligible_capacity"] < group.needed:
        main = (
            f"few eligible reviewers: only {f['eligible_reviewers']} reviewers can review "
            f"these {what}{topic} ({f['reviewers_in_topics']} reviewers share their topics), "
            f"with capacity {f['eligible_capacity']} for the {group.needed} reviews needed"
        )
    else:
        main = (
            f"caps exhausted: the {len(group.saturated_reviewers)} reviewers who could give "
            f"more have their caps full (capacity {f['saturated_capacity']}), and the other "
            f"eligible reviewers, whose remaining capacity ({f['capacity_used_elsewhere']} "
            f"reviews) goes to {word}s outside this group, can give each {word} at most one "
            f"review; {group.available} reviews are free for the {group.needed} needed"
        )
    if decisive:
        main = f"{decisive[0]} remove the candidates these {what} need; otherwise {main}"
    parts.append(main)
    if f["full_papers_in_group"]:
        k = f["full_papers_in_group"]
        parts.append(
            f"{k} of the {what} {'is' if k == 1 else 'are'} fully reviewed but compete for the "
            "same reviewers"
        )
    if f["conflicted_pairs"]:
        gain = f.get("gain_if_conflicts_allowed")
        extra = f"; allowing them would add {gain}" if gain is not None else ""
        parts.append(
            f"conflicts remove {f['conflicted_pairs']} candidate pairs "
            f"({f['conflicted_reviewers']} reviewers{extra})"
        )
    if f["blocked_pairs"]:
        gain = f.get("gain_if_blocks_lifted")
        extra = f"; allowing them would add {gain}" if gain is not None else ""
        parts.append(f"blocks remove {f['blocked_pairs']} candidate pairs{extra}")
    if f["unscored_topic_pairs"]:
        gain = f.get("gain_if_unscored_allowed")
        extra = f"; allowing them would add {gain}" if gain is not None else ""
        parts.append(
            f"the unscored-pairs rule leaves out {f['unscored_topic_pairs']} pairs of reviewers "
            f"who share a topic{extra}"
        )
    return "; ".join(parts)
