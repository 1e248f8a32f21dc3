"""Session → bounded flow network: the arrays the engine solves, and the maps back to papers."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs, normalise_institution
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.figures import active_demands
from review_alloc.plan.keep import earlier_pair_mask
from review_alloc.plan.overload import add_overload_arcs, overload_allowances
from review_alloc.plan.rules import PairRules

SCORE_RESOLUTION = 10_000
"""Integer cost steps per score unit: a score of 0.8532 becomes 8532 (ties closer than 1e-4 are
treated as equal)."""

_COST_LIMIT = 2**62


@dataclass(frozen=True)
class TierWeights:
    """Cost weights of the tiers above the score, highest first (see `constraint_weights`)."""

    required: int
    seniors: int
    coverage: int
    overload: int
    floors: int
    keep: int = 0


def constraint_weights(
    max_pair_arcs_in_cycle: int,
    max_score: int,
    senior_nodes: int,
    balance_spread: int,
    *,
    overload: bool = False,
    keep: bool = False,
) -> TierWeights:
    """Weights for required > seniors > coverage > (least overload) > floors > (kept) > score.

    Why one min-cost flow is then lexicographic: an optimal flow has no negative residual cycle,
    and every flow difference splits into simple residual cycles. With each weight larger than
    everything below it can move in one simple cycle, no cycle can trade a higher tier for lower
    ones. A simple cycle holds at most `max_pair_arcs_in_cycle` pair arcs, so it changes the score
    by at most that many times `max_score`; it passes the source and the sink once, so it moves
    required coverage, coverage, overload and floors by at most one each,
    and it changes the balance penalty by at most `balance_spread` (two source arcs). It may pass
    many papers' senior nodes, but each one once and each beside a reviewer, moving the senior
    tier by at most min(`senior_nodes`, pair arcs in the cycle); the required weight outweighs
    all of that. The overload tier exists only when some reviewer may go above cap.

    A re-plan (`keep`) adds the kept-earlier-pairs tier between floors and score: each kept
    pair is worth more than a cycle can change score and balance together, and a cycle changes
    the kept count by at most its pair arcs, so the floors weight covers that many kept pairs.
    """
    below = max_pair_arcs_in_cycle * max_score + balance_spread + 1
    kept = below if keep else 0
    floors = max_pair_arcs_in_cycle * kept + below
    over = 2 * floors if overload else 0
    coverage = 2 * (over or floors)
    seniors = 2 * coverage
    required = (min(senior_nodes, max_pair_arcs_in_cycle) + 1) * seniors
    return TierWeights(
        required=required,
        seniors=seniors,
        coverage=coverage,
        overload=over,
        floors=floors,
        keep=kept,
    )


@dataclass(frozen=True)
class PlanNetwork:
    """The planner's flow network; arc blocks are contiguous and named by the slices below.

    Nodes: source 0, reviewer j at 1 + j, paper i at 1 + R + i, the sink at 1 + R + P, then one
    senior node per paper with a senior rule, then one node per (paper, institution) group.
    Arc blocks in order: floor, rest (source → reviewer; unit arcs when balancing), pair, required,
    extra (paper → sink), the return arc, senior required, senior rest (senior node → paper),
    group (group node → senior node or paper).
    """

    n_nodes: int
    source: int
    sink: int
    tails: np.ndarray
    heads: np.ndarray
    capacities: np.ndarray
    lower: np.ndarray
    costs: np.ndarray
    pair_reviewer: np.ndarray
    pair_paper: np.ndarray
    pair_score: np.ndarray
    floor_arcs: slice
    rest_arcs: slice
    pair_arcs: slice
    required_arcs: slice
    extra_arcs: slice
    return_arc: int
    weights: tuple[int, int, int]
    max_score: int
    conflicts: ConflictSet

    n_reviewers: int
    n_papers: int
    overload_arcs: slice = field(default_factory=lambda: slice(0, 0))
    overload_reviewers: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))

    floor_arc_reviewer: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Reviewer of each floor arc (one per reviewer, or unit arcs in load order when balancing)."""
    rest_arc_reviewer: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    pair_pinned: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    senior_weight: int = 0
    senior_paper: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Paper of each senior node; node id `sink + 1 + k`."""
    senior_need: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    senior_hard: bool = False
    senior_required_arcs: slice = field(default_factory=lambda: slice(0, 0))
    senior_rest_arcs: slice = field(default_factory=lambda: slice(0, 0))
    pair_senior: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Per pair: its paper's senior node index when the pair's flow passes it, else -1."""
    group_paper: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    group_institution: tuple[str, ...] = ()
    group_senior: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Per group node: 1 for the senior part of a group, 0 for juniors, -1 for a whole group."""
    group_arcs: slice = field(default_factory=lambda: slice(0, 0))
    pair_group: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Per pair: the group node index its flow passes, else -1."""
    relaxed_groups: tuple[int, ...] = ()
    """Parts (indices into the part arrays) of mixed groups capped at m each: a relaxation."""
    pair_part: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Per pair: its part of a crowded (paper, institution) group, else -1."""
    part_paper: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    part_senior: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    part_institution: tuple[str, ...] = ()
    balance_step: int = 0
    kept: np.ndarray | None = None
    """Per pair arc: True where the earlier plan of a re-plan assigned it (None: fresh plan)."""
    keep_weight: int = 0
    resolution: int = SCORE_RESOLUTION
    """Score steps per unit actually used (coarser only when the tier weights need the room)."""

    def paper_node(self, i: np.ndarray | int) -> np.ndarray | int:
        """Node id of paper index i (reviewer j is node 1 + j)."""
        return 1 + self.n_reviewers + i


class _ArcBlocks:
    """Collects named arc blocks in order, so each constraint adds its own contiguous slice."""

    def __init__(self) -> None:
        self.parts: list[tuple[np.ndarray, ...]] = []
        self.size = 0

    def add(
        self,
        tails: np.ndarray,
        heads: np.ndarray,
        capacities: np.ndarray,
        costs: np.ndarray,
        lower: np.ndarray | None = None,
    ) -> slice:
        """Append one block of arcs and return its slice."""
        n = len(tails)
        low = np.zeros(n, np.int64) if lower is None else lower
        arrays = (tails, heads, capacities, low, costs)
        self.parts.append(tuple(np.asarray(x, dtype=np.int64).reshape(n) for x in arrays))
        start = self.size
        self.size += n
        return slice(start, self.size)

    def arrays(self) -> tuple[np.ndarray, ...]:
        """(tails, heads, capacities, lower, costs) of every block, concatenated."""
        return tuple(np.concatenate([p[k] for p in self.parts]) for k in range(5))


def paper_senior_need(session: Session) -> np.ndarray:
    """Seniors wanted per paper: its own `senior_min`, else the policy's; clamped to its reviews,
    0 for withdrawn papers."""
    own = np.fromiter(
        (-1 if p.senior_min is None else p.senior_min for p in session.papers),
        dtype=np.int64,
        count=len(session.papers),
    )
    need = np.where(own < 0, session.policy.senior_min, own)
    need = np.minimum(need, session.paper_reviews_array())
    need[np.array([p.withdrawn for p in session.papers], dtype=bool)] = 0
    return need.astype(np.int64)


def reviewer_institutions(session: Session) -> tuple[np.ndarray, list[str]]:
    """(institution id per reviewer, -1 when none given; the normalised institution names)."""
    names: dict[str, int] = {}
    ids = np.full(len(session.reviewers), -1, dtype=np.int64)
    for j, r in enumerate(session.reviewers):
        key = normalise_institution(r.institution)
        if key:
            ids[j] = names.setdefault(key, len(names))
    return ids, list(names)


def _source_arcs(
    blocks: _ArcBlocks, cap: np.ndarray, floor: np.ndarray, w_floor: int, step: int
) -> tuple[slice, slice, np.ndarray, np.ndarray]:
    """Source → reviewer: [0, floor] at -w_floor and [0, cap - floor] at 0.

    With a balance step, one unit arc per load unit k instead, costing step * (k - 1): the costs
    rise with k (convex), so an optimal flow fills each reviewer's units in order.
    """
    n_r = len(cap)
    r_nodes = 1 + np.arange(n_r, dtype=np.int64)
    if step == 0:
        floors = blocks.add(np.zeros(n_r), r_nodes, floor, np.full(n_r, -w_floor))
        rest = blocks.add(np.zeros(n_r), r_nodes, cap - floor, np.zeros(n_r))
        every = np.arange(n_r, dtype=np.int64)
        return floors, rest, every, every
    owner = np.repeat(np.arange(n_r, dtype=np.int64), cap)
    rank = np.arange(len(owner)) - np.repeat(np.cumsum(cap) - cap, cap)
    in_floor = rank < floor[owner]
    unit_cost = step * rank
    f_owner, r_owner = owner[in_floor], owner[~in_floor]
    floors = blocks.add(
        np.zeros(len(f_owner)), 1 + f_owner, np.ones(len(f_owner)), unit_cost[in_floor] - w_floor
    )
    rest = blocks.add(
        np.zeros(len(r_owner)), 1 + r_owner, np.ones(len(r_owner)), unit_cost[~in_floor]
    )
    return floors, rest, f_owner, r_owner


def _senior_nodes(
    session: Session, reviewer: np.ndarray, paper: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(senior papers, their need, per pair the senior node index or -1)."""
    need = paper_senior_need(session)
    senior_papers = np.flatnonzero(need > 0).astype(np.int64)
    index_of = np.full(len(session.papers), -1, dtype=np.int64)
    index_of[senior_papers] = np.arange(len(senior_papers))
    is_senior = session.reviewer_senior_array()
    pair_senior = np.where(is_senior[reviewer], index_of[paper], -1) if len(paper) else paper
    return senior_papers, need[senior_papers], pair_senior.astype(np.int64)


@dataclass(frozen=True)
class GroupParts:
    """Parts of crowded (paper, institution) groups: a whole group, or its senior or junior part.

    Only parts with more candidates than their cap get a node in the network.
    """

    pair_part: np.ndarray
    """Per pair: its part, or -1 outside crowded groups."""
    paper: np.ndarray
    senior: np.ndarray
    """1 senior part, 0 junior part, -1 whole group."""
    institution: tuple[str, ...]
    cap: np.ndarray
    relaxed: tuple[int, ...]
    """Parts of mixed groups capped at m each (no split fixed): a relaxation."""


def _institution_groups(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    pair_senior: np.ndarray,
    has_senior_node: np.ndarray,
    split: Mapping[tuple[int, str], int] | None,
) -> GroupParts:
    """The (paper, institution) groups with more candidates than the cap allows, as parts.

    Where a paper has a senior node
    and a group mixes seniors and juniors, the group is split into a senior part (routed through
    the senior node) and a junior part; `split[(paper, institution)] = k` caps the seniors at k
    and the juniors at m - k (a restriction); without it each part is capped at m (a relaxation).
    """
    m = session.policy.max_per_institution
    empty = np.zeros(0, np.int64)
    none = np.full(len(paper), -1, dtype=np.int64)
    if m is None or len(paper) == 0:
        return GroupParts(none, empty, empty, (), empty, ())
    inst, names = reviewer_institutions(session)
    n_inst = max(len(names), 1)
    g_inst = inst[reviewer]
    member = g_inst >= 0
    gkey = np.where(member, paper * n_inst + g_inst, -1)
    uniq, inverse, counts = np.unique(gkey, return_inverse=True, return_counts=True)
    big = (uniq >= 0) & (counts > m)
    in_big = big[inverse]
    senior = pair_senior >= 0
    # Mixed: the group's paper has a senior node and the group holds both seniors and juniors.
    any_senior = np.bincount(inverse, weights=senior, minlength=len(uniq)) > 0
    any_junior = np.bincount(inverse, weights=~senior, minlength=len(uniq)) > 0
    mixed = big & any_senior & any_junior & has_senior_node[np.maximum(uniq, 0) // n_inst]
    part = np.where(mixed[inverse], senior.astype(np.int64), -1)
    sub_key = np.where(in_big, inverse * 3 + (part + 1), -1)
    sub_uniq, sub_inverse = np.unique(sub_key, return_inverse=True)
    valid = sub_uniq >= 0
    node_of_sub = np.cumsum(valid) - 1
    pair_group = np.where(in_big, node_of_sub[sub_inverse], -1).astype(np.int64)
    groups = sub_uniq[valid]
    g_part = groups % 3 - 1
    g_parent = uniq[groups // 3]
    g_paper = (g_parent // n_inst).astype(np.int64)
    g_name = tuple(names[int(x)] for x in g_parent % n_inst)
    caps = np.full(len(groups), m, dtype=np.int64)
    relaxed: list[int] = []
    for k in np.flatnonzero(g_part >= 0).tolist():
        chosen = None if split is None else split.get((int(g_paper[k]), g_name[k]))
        if chosen is None:
            relaxed.append(k)
        else:
            caps[k] = chosen if g_part[k] == 1 else m - chosen
    return GroupParts(
        pair_part=pair_group,
        paper=g_paper,
        senior=g_part.astype(np.int64),
        institution=g_name,
        cap=caps,
        relaxed=tuple(relaxed),
    )


def fitting_weights(
    top_score: float,
    balance: float,
    cycle_arcs: int,
    senior_nodes: int,
    max_cap: int,
    total_demand: int,
    n_nodes: int,
    *,
    overload: bool,
    keep: bool,
) -> tuple[int, TierWeights]:
    """The finest score resolution (at most SCORE_RESOLUTION) whose tier weights fit int64.

    Every cost sum and potential the engine forms stays below 2**62 when the heaviest path
    cost times the total demand does. Large venues with a senior rule or a re-plan's keep tier
    can pass that at 10,000 steps per unit; the score steps are then made coarser (ties finer
    than a step count as equal) while every count tier stays exact, and the plan's method says
    so. A session that does not fit even at one step per unit is refused.
    """

    def weights(steps: int) -> TierWeights:
        step = int(round(balance * steps))
        return constraint_weights(
            cycle_arcs,
            int(np.rint(top_score * steps)),
            senior_nodes,
            2 * step * max(max_cap - 1, 0),
            overload=overload,
            keep=keep,
        )

    per_arc = _COST_LIMIT // (4 * n_nodes + 8)  # the engine's bound, so potentials cannot overflow

    def fits(steps: int) -> bool:
        w = weights(steps)
        heaviest = w.required + w.coverage + int(np.rint(top_score * steps)) + w.keep
        return heaviest <= per_arc and heaviest * max(total_demand, 1) * 4 < _COST_LIMIT

    if fits(SCORE_RESOLUTION):
        return SCORE_RESOLUTION, weights(SCORE_RESOLUTION)
    if not fits(1):
        raise PlanInputError(
            [
                "scores: the objective's weights are too large to plan exactly (a wide score "
                "range, or very many papers with a senior rule); rescale scores to 0..1"
            ]
        )
    low, high = 1, SCORE_RESOLUTION  # fits(low), not fits(high): the weights grow with steps
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return low, weights(low)


def build_network(
    session: Session,
    *,
    institution_split: Mapping[tuple[int, str], int] | None = None,
    threshold: float | None = None,
    conflicts: ConflictSet | None = None,
    earlier: Plan | None = None,
) -> PlanNetwork:
    """Build the network: source → reviewer [floor, cap] → (institution group) → (senior node)
    → paper → sink [min, reviews].

    `threshold` leaves out unpinned pairs scoring below it (the bottleneck search);
    `institution_split` fixes how mixed institution groups share their cap (see
    `_institution_groups`); `conflicts` reuses the session's conflict set when already known.
    """
    n_r, n_p = len(session.reviewers), len(session.papers)
    if conflicts is None:
        conflicts = conflict_pairs(session)
    rules = PairRules(session, conflicts)
    reviewer, paper, score, keys, pinned = rules.eligible_pairs(
        threshold, slack=0.5 / SCORE_RESOLUTION
    )
    reviews, minimum, cap, floor = active_demands(session)
    rules.check_pins()

    sink = 1 + n_r + n_p
    senior_papers, senior_need, pair_senior = _senior_nodes(session, reviewer, paper)
    has_senior_node = np.zeros(n_p, dtype=bool)
    has_senior_node[senior_papers] = True
    parts = _institution_groups(
        session, reviewer, paper, pair_senior, has_senior_node, institution_split
    )
    part_size = np.bincount(parts.pair_part[parts.pair_part >= 0], minlength=len(parts.paper))
    with_node = np.flatnonzero(part_size > parts.cap)
    node_of_part = np.full(len(parts.paper) + 1, -1, dtype=np.int64)
    node_of_part[with_node] = np.arange(len(with_node))
    # Index -1 (outside any group) reads the extra last entry, which stays -1.
    pair_group = node_of_part[parts.pair_part]
    g_paper, g_part, g_cap = parts.paper[with_node], parts.senior[with_node], parts.cap[with_node]
    g_name = tuple(parts.institution[k] for k in with_node.tolist())
    n_sen, n_grp = len(senior_papers), len(g_paper)
    first_sen, first_grp = sink + 1, sink + 1 + n_sen

    kept = earlier_pair_mask(session, earlier, reviewer, paper) if earlier is not None else None
    total = int(reviews.sum())
    max_cap = int(cap.max()) if len(cap) else 0
    top = float(score.max()) if len(score) else 0.0
    resolution, tiers = fitting_weights(
        top,
        session.policy.balance,
        2 * max(min(n_r, n_p + n_sen + n_grp), 1),
        n_sen,
        max_cap,
        total,
        first_grp + n_grp,
        overload=bool(overload_allowances(session).any()),
        keep=kept is not None,
    )
    score_int = np.rint(score * resolution).astype(np.int64)
    max_score = int(score_int.max()) if len(score_int) else 0
    step = int(round(session.policy.balance * resolution))
    bonus = tiers.keep * kept.astype(np.int64) if kept is not None else 0

    blocks = _ArcBlocks()
    floor_arcs, rest_arcs, floor_owner, rest_owner = _source_arcs(
        blocks, cap, floor, tiers.floors, step
    )

    senior_node_of_paper = np.full(n_p, -1, dtype=np.int64)
    senior_node_of_paper[senior_papers] = first_sen + np.arange(n_sen)
    p_node = 1 + n_r + paper
    head = np.where(pair_senior >= 0, first_sen + pair_senior, p_node)
    head = np.where(pair_group >= 0, first_grp + pair_group, head)
    pair_arcs = blocks.add(
        1 + reviewer,
        head,
        np.ones(len(keys)),
        max_score - score_int - bonus,
        pinned.astype(np.int64),
    )

    p_nodes = 1 + n_r + np.arange(n_p, dtype=np.int64)
    required_arcs = blocks.add(
        p_nodes,
        np.full(n_p, sink),
        minimum,
        np.full(n_p, -(tiers.required + tiers.coverage + max_score)),
    )
    extra_arcs = blocks.add(
        p_nodes, np.full(n_p, sink), reviews - minimum, np.full(n_p, -(tiers.coverage + max_score))
    )
    return_arc = blocks.add(np.array([sink]), np.array([0]), np.array([total]), np.zeros(1)).start

    senior_required_arcs, senior_rest_arcs = _senior_arcs(
        blocks,
        senior_papers,
        senior_need,
        reviews,
        first_sen,
        1 + n_r,
        tiers.seniors,
        session.policy.senior_hard,
    )
    group_head = np.where(
        (g_part == 1)
        | (
            (g_part == -1)
            & (senior_node_of_paper[g_paper] >= 0)
            & _all_senior(pair_group, pair_senior, n_grp)
        ),
        senior_node_of_paper[g_paper],
        1 + n_r + g_paper,
    )
    group_arcs = blocks.add(first_grp + np.arange(n_grp), group_head, g_cap, np.zeros(n_grp))

    tails, heads, capacities, lower, costs = blocks.arrays()
    net = PlanNetwork(
        n_nodes=first_grp + n_grp,
        source=0,
        sink=sink,
        tails=tails,
        heads=heads,
        capacities=capacities,
        lower=lower,
        costs=costs,
        pair_reviewer=reviewer.astype(np.int64),
        pair_paper=paper.astype(np.int64),
        pair_score=score,
        floor_arcs=floor_arcs,
        rest_arcs=rest_arcs,
        pair_arcs=pair_arcs,
        required_arcs=required_arcs,
        extra_arcs=extra_arcs,
        return_arc=return_arc,
        weights=(tiers.required, tiers.coverage, tiers.floors),
        max_score=max_score,
        conflicts=conflicts,
        n_reviewers=n_r,
        n_papers=n_p,
        floor_arc_reviewer=floor_owner,
        rest_arc_reviewer=rest_owner,
        pair_pinned=pinned,
        senior_weight=tiers.seniors,
        senior_paper=senior_papers,
        senior_need=senior_need,
        senior_hard=session.policy.senior_hard,
        senior_required_arcs=senior_required_arcs,
        senior_rest_arcs=senior_rest_arcs,
        pair_senior=pair_senior,
        group_paper=g_paper,
        group_institution=g_name,
        group_senior=g_part,
        group_arcs=group_arcs,
        pair_group=pair_group,
        relaxed_groups=parts.relaxed,
        pair_part=parts.pair_part,
        part_paper=parts.paper,
        part_senior=parts.senior,
        part_institution=parts.institution,
        balance_step=step,
        kept=kept,
        keep_weight=tiers.keep,
        resolution=resolution,
    )
    return add_overload_arcs(session, net, tiers.overload)


def _all_senior(pair_group: np.ndarray, pair_senior: np.ndarray, n_groups: int) -> np.ndarray:
    """Per group node: are all its member pairs routed through a senior node?"""
    inside = pair_group >= 0
    members = np.bincount(pair_group[inside], minlength=n_groups)
    seniors = np.bincount(pair_group[inside & (pair_senior >= 0)], minlength=n_groups)
    return (members > 0) & (members == seniors)


def _senior_arcs(
    blocks: _ArcBlocks,
    senior_papers: np.ndarray,
    need: np.ndarray,
    reviews: np.ndarray,
    first_node: int,
    first_paper_node: int,
    w_seniors: int,
    hard: bool,
) -> tuple[slice, slice]:
    """Senior node → paper: [0, need] at -w_seniors (lower bound `need` when the rule is hard),
    and [0, reviews] at 0 for seniors beyond the need."""
    n = len(senior_papers)
    nodes = first_node + np.arange(n, dtype=np.int64)
    targets = first_paper_node + senior_papers
    required = blocks.add(nodes, targets, need, np.full(n, -w_seniors), need if hard else None)
    rest = blocks.add(nodes, targets, reviews[senior_papers], np.zeros(n))
    return required, rest
