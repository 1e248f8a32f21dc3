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
from review_alloc.plan.eligibility import rule_failures
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.figures import active_demands
from review_alloc.plan.institutions import institution_groups, reviewer_institutions
from review_alloc.plan.keep import earlier_pair_mask
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import contains, key_order, pair_keys
from review_alloc.plan.seniors import paper_senior_need, senior_arcs, senior_nodes
from review_alloc.plan.weights import SCORE_RESOLUTION, fitting_weights

MAX_CANDIDATE_PAIRS = 60_000_000
"""Above this many candidate pairs the network would not fit the memory budget."""


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

    def paper_node(self, i: np.ndarray | int) -> np.ndarray | int:
        """Node id of paper index i (reviewer j is node 1 + j)."""
        return 1 + self.n_reviewers + i


def _rule_pairs(session: Session, rows: list) -> tuple[np.ndarray, np.ndarray]:
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    reviewer = np.array([reviewer_at[r.reviewer] for r in rows], dtype=np.int64)
    paper = np.array([paper_at[r.paper] for r in rows], dtype=np.int64)
    return reviewer, paper


def candidate_pairs(session: Session) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Eligible (reviewer, paper, score) arrays before conflicts and blocks are removed.

    Under `unscored = "zero"` every pair of active reviewer and active paper is a candidate and
    missing scores count as 0; under `"exclude"` only scored pairs are. Pins are always candidates.
    """
    n_p = len(session.papers)
    active_r = np.flatnonzero(~np.array([r.withdrawn for r in session.reviewers], dtype=bool))
    active_p = np.flatnonzero(~np.array([p.withdrawn for p in session.papers], dtype=bool))
    table = session.scores
    s_keys, s_values = key_order(pair_keys(table.reviewer, table.paper, n_p), table.value)

    if session.policy.unscored == "zero":
        count = len(active_r) * len(active_p)
        if count > MAX_CANDIDATE_PAIRS:
            raise PlanInputError(
                [
                    f"policy.unscored: 'zero' makes every pair a candidate ({count:,} pairs, more "
                    f"than the {MAX_CANDIDATE_PAIRS:,} this machine can plan); import with "
                    "--unscored exclude so that only scored pairs are candidates"
                ]
            )
        keys = (active_r[:, None].astype(np.int64) * n_p + active_p[None, :]).ravel()
    else:
        active_r_mask = np.zeros(len(session.reviewers), dtype=bool)
        active_r_mask[active_r] = True
        active_p_mask = np.zeros(n_p, dtype=bool)
        active_p_mask[active_p] = True
        keep = active_r_mask[s_keys // max(n_p, 1)] & active_p_mask[s_keys % max(n_p, 1)]
        keys = s_keys[keep]

    if session.pins:
        pr, pp = _rule_pairs(session, session.pins)
        keys = np.union1d(keys, pair_keys(pr, pp, n_p))

    pos = np.searchsorted(s_keys, keys)
    pos_clip = np.minimum(pos, max(len(s_keys) - 1, 0))
    found = (
        (pos < len(s_keys)) & (s_keys[pos_clip] == keys)
        if len(s_keys)
        else np.zeros(len(keys), dtype=bool)
    )
    scores = np.where(found, s_values[pos_clip] if len(s_keys) else 0.0, 0.0)
    n = max(n_p, 1)
    return keys // n, keys % n, scores


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


def _eligible_pairs(
    session: Session, conflicts: ConflictSet, threshold: float | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(reviewer, paper, score, keys, pinned) of the pairs the plan may use."""
    n_p = len(session.papers)
    reviewer, paper, score = candidate_pairs(session)
    keys = pair_keys(reviewer, paper, n_p)
    banned = conflicts.keys(n_p)
    if session.blocks:
        br, bp = _rule_pairs(session, session.blocks)
        banned = np.union1d(banned, pair_keys(br, bp, n_p))
    keep = ~contains(keys, banned)
    reviewer, paper, score, keys = reviewer[keep], paper[keep], score[keep], keys[keep]
    pinned = np.zeros(len(keys), dtype=bool)
    if session.pins:
        pr, pp = _rule_pairs(session, session.pins)
        pinned = contains(keys, pair_keys(pr, pp, n_p))
    low, no_topic = rule_failures(session, reviewer, paper, score)
    keep = ~(low | no_topic) | pinned
    if threshold is not None:
        keep &= (score >= threshold - 0.5 / SCORE_RESOLUTION) | pinned
    return reviewer[keep], paper[keep], score[keep], keys[keep], pinned[keep]


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
    reviewer, paper, score, keys, pinned = _eligible_pairs(session, conflicts, threshold)
    reviews, minimum, cap, floor = active_demands(session)
    if session.pins:
        _check_pins(session, conflicts, keys, cap, reviews)

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
    top = float(score.max()) if len(score) else 0.0
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
    )


def _all_senior(pair_group: np.ndarray, pair_senior: np.ndarray, n_groups: int) -> np.ndarray:
    """Per group node: are all its member pairs routed through a senior node?"""
    inside = pair_group >= 0
    members = np.bincount(pair_group[inside], minlength=n_groups)
    seniors = np.bincount(pair_group[inside & (pair_senior >= 0)], minlength=n_groups)
    return (members > 0) & (members == seniors)


def _check_pins(
    session: Session,
    conflicts: ConflictSet,
    eligible_keys: np.ndarray,
    cap: np.ndarray,
    reviews: np.ndarray,
) -> None:
    """Refuse pins that a hard rule forbids, each with its reason."""
    n_p = len(session.papers)
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    reasons = conflicts.reason_of()
    problems: list[str] = []
    per_reviewer: dict[int, int] = {}
    per_paper: dict[int, int] = {}
    pin_r, pin_p = _rule_pairs(session, session.pins)
    pin_score = _pin_scores(session, pin_r, pin_p)
    low, no_topic = rule_failures(session, pin_r, pin_p, pin_score)
    for k, pin in enumerate(session.pins):
        j, i = reviewer_at[pin.reviewer], paper_at[pin.paper]
        where = f"pins.{k}: pin ({pin.reviewer}, {pin.paper})"
        if (j, i) in reasons:
            problems.append(f"{where} is a conflict of interest ({reasons[(j, i)]}); refused")
        elif session.reviewers[j].withdrawn:
            problems.append(f"{where}: reviewer {pin.reviewer} has withdrawn")
        elif session.papers[i].withdrawn:
            problems.append(f"{where}: paper {pin.paper} has been withdrawn")
        elif not np.isin(j * n_p + i, eligible_keys):
            problems.append(f"{where} is blocked")
        elif low[k]:
            problems.append(
                f"{where} scores {pin_score[k]:g}, below the policy's min_score "
                f"{session.policy.min_score:g}; refused"
            )
        elif no_topic[k]:
            problems.append(
                f"{where}: reviewer and paper share no topic and the policy requires one; refused"
            )
        per_reviewer[j] = per_reviewer.get(j, 0) + 1
        per_paper[i] = per_paper.get(i, 0) + 1
    for j, count in per_reviewer.items():
        if count > cap[j]:
            problems.append(
                f"pins: reviewer {session.reviewers[j].id} has {count} pins but a cap of {cap[j]}"
            )
    for i, count in per_paper.items():
        if count > reviews[i]:
            problems.append(
                f"pins: paper {session.papers[i].id} has {count} pins but needs only "
                f"{reviews[i]} reviews"
            )
    problems += _pin_institution_problems(session, pin_r, pin_p)
    problems += _pin_senior_problems(session, pin_r, pin_p, reviews)
    if problems:
        raise PlanInputError(problems)


def _pin_scores(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    n_p = max(len(session.papers), 1)
    t = session.scores
    lookup = dict(
        zip(
            (t.reviewer.astype(np.int64) * n_p + t.paper).tolist(),
            t.value.tolist(),
            strict=True,
        )
    )
    return np.array(
        [lookup.get(int(j) * n_p + int(i), 0.0) for j, i in zip(reviewer, paper, strict=True)],
        dtype=np.float64,
    )


def _pin_institution_problems(
    session: Session, reviewer: np.ndarray, paper: np.ndarray
) -> list[str]:
    """Pins that put more reviewers of one institution on a paper than the policy allows."""
    m = session.policy.max_per_institution
    if m is None:
        return []
    inst, names = reviewer_institutions(session)
    counts: dict[tuple[int, int], int] = {}
    for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
        if inst[j] >= 0:
            counts[(i, int(inst[j]))] = counts.get((i, int(inst[j])), 0) + 1
    return [
        f"pins: paper {session.papers[i].id} has {c} pinned reviewers from {names[g]!r}, more "
        f"than max_per_institution {m}; refused"
        for (i, g), c in sorted(counts.items())
        if c > m
    ]


def _pin_senior_problems(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, reviews: np.ndarray
) -> list[str]:
    """Under a hard senior rule: pins of non-seniors that leave too few seats for seniors."""
    if not session.policy.senior_hard:
        return []
    need = paper_senior_need(session)
    juniors: dict[int, int] = {}
    for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
        if not session.reviewers[j].senior:
            juniors[i] = juniors.get(i, 0) + 1
    return [
        f"pins: paper {session.papers[i].id} has {c} pinned non-senior reviewers, leaving "
        f"{reviews[i] - c} of {reviews[i]} seats for the {need[i]} seniors it must have; refused"
        for i, c in sorted(juniors.items())
        if reviews[i] - c < need[i]
    ]
