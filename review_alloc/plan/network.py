"""Session → bounded flow network: the arrays the engine solves, and the maps back to papers.

The builder collects the network block by block (`_ArcBlocks`); the rules that add nodes have
their own modules: `plan.seniors` (senior nodes), `plan.institutions` (institution groups),
`plan.overload` (allowances above cap); the tier weights come from `plan.weights`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.figures import active_demands
from review_alloc.plan.institutions import institution_groups
from review_alloc.plan.keep import earlier_pair_mask
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.rules import PairRules
from review_alloc.plan.seniors import senior_arcs, senior_nodes
from review_alloc.plan.weights import SCORE_RESOLUTION, fitting_weights


@dataclass(frozen=True)
class PlanNetwork:
    """The planner's flow network; arc blocks are contiguous and named by the slices below.

    Nodes: source 0, reviewer j at 1 + j, paper i at 1 + R + i, the sink at 1 + R + P, then one
    senior node per paper with a senior rule, then one node per (paper, institution) group.
    Arc blocks in order: floor, rest (source → reviewer; unit arcs when balancing), pair, required,
    extra (paper → sink), the return arc, senior required, senior rest (senior node → paper),
    group (group node → senior node or paper), overload (source → reviewer above cap; last, and
    only when some reviewer may go above cap).
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
    top_pair: int = -1
    """Position in the pair block of the first best-scored pair (-1: no pairs, or not worked
    out): a patch keeps the pairs and their scores, so it keeps this too (`plan.patch`)."""
    rules: PairRules | None = field(default=None, compare=False, repr=False)
    """The rules the network was built or patched with (the next patch keeps what they read
    from unchanged tables; see `PairRules.following`)."""

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
    `plan.institutions.institution_groups`); `conflicts` reuses the session's conflict set when
    already known. Overload arcs, when a reviewer may go above cap, are the last block.
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
    senior_papers, senior_need, pair_senior = senior_nodes(session, reviewer, paper)
    has_senior_node = np.zeros(n_p, dtype=bool)
    has_senior_node[senior_papers] = True
    parts = institution_groups(
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
    allowance = overload_allowances(session)
    total = int(reviews.sum())
    max_cap = int(cap.max()) if len(cap) else 0
    top_pair = int(np.argmax(score)) if len(score) else -1
    top = float(score[top_pair]) if len(score) else 0.0
    resolution, tiers = fitting_weights(
        top,
        session.policy.balance,
        2 * max(min(n_r, n_p + n_sen + n_grp), 1),
        n_sen,
        max_cap,
        total,
        first_grp + n_grp,
        overload=bool(allowance.any()),
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

    senior_required, senior_rest = senior_arcs(
        senior_papers,
        senior_need,
        reviews,
        first_sen,
        1 + n_r,
        tiers.seniors,
        session.policy.senior_hard,
    )
    senior_required_arcs = blocks.add(*senior_required)
    senior_rest_arcs = blocks.add(*senior_rest)
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
    # Overload arcs come last, so that every other block keeps its place whether or not a
    # reviewer may go above cap; each costs the overload tier's weight per paper above cap.
    over_reviewers = np.flatnonzero(allowance > 0).astype(np.int64)
    n_over = len(over_reviewers)
    overload_arcs = (
        blocks.add(
            np.zeros(n_over),
            1 + over_reviewers,
            allowance[over_reviewers],
            np.full(n_over, tiers.overload),
        )
        if n_over
        else slice(0, 0)
    )

    tails, heads, capacities, lower, costs = blocks.arrays()
    return PlanNetwork(
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
        rules=rules,
        n_reviewers=n_r,
        n_papers=n_p,
        overload_arcs=overload_arcs,
        overload_reviewers=over_reviewers,
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
        top_pair=top_pair,
    )


def _all_senior(pair_group: np.ndarray, pair_senior: np.ndarray, n_groups: int) -> np.ndarray:
    """Per group node: are all its member pairs routed through a senior node?"""
    inside = pair_group >= 0
    members = np.bincount(pair_group[inside], minlength=n_groups)
    seniors = np.bincount(pair_group[inside & (pair_senior >= 0)], minlength=n_groups)
    return (members > 0) & (members == seniors)


