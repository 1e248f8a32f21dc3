"""Session → bounded flow network: the arrays the engine solves, and the maps back to papers."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.keep import earlier_pair_mask, fitting_resolution, keep_weight

SCORE_RESOLUTION = 10_000
"""Integer cost steps per score unit: a score of 0.8532 becomes 8532 (ties closer than 1e-4 are
treated as equal)."""

MAX_CANDIDATE_PAIRS = 60_000_000
"""Above this many candidate pairs the network would not fit the memory budget."""

_COST_LIMIT = 2**62


def tier_weights(
    max_pair_arcs_in_cycle: int, max_score: int, keep_weight: int = 0
) -> tuple[int, int, int]:
    """Weights (required, coverage, floors) that make one min-cost flow lexicographic.

    An optimal flow has no negative residual cycle, and every flow difference splits into simple
    residual cycles. A simple cycle passes the sink and the source at most once each, so it changes
    each tier count by at most one, and it holds at most `max_pair_arcs_in_cycle` pair arcs, so it
    changes the total score by at most that many times `max_score`. With each weight larger than
    everything below it can move in one cycle, no cycle can trade a higher tier for lower ones.

    A re-plan adds the kept-earlier-pairs tier between floors and score (`plan.keep`): each kept
    pair is worth `keep_weight` (more than a cycle's score change), and a cycle changes the kept
    count by at most its pair arcs, so the floors weight must exceed that many times
    (`keep_weight` + `max_score`). With `keep_weight` 0 the weights are those of a fresh plan.
    """
    floors = max_pair_arcs_in_cycle * (max_score + keep_weight) + 1
    coverage = 2 * floors
    required = 2 * coverage
    return required, coverage, floors


@dataclass(frozen=True)
class PlanNetwork:
    """The planner's flow network; arc blocks are contiguous and named by the slices below."""

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
    kept: np.ndarray | None = None
    """Per pair arc: True where the earlier plan of a re-plan assigned it (None: fresh plan)."""
    keep_weight: int = 0
    resolution: int = SCORE_RESOLUTION
    """Score steps per unit actually used (coarser only when the keep tier needs the room)."""

    def paper_node(self, i: np.ndarray | int) -> np.ndarray | int:
        """Node id of paper index i (reviewer j is node 1 + j)."""
        return 1 + self.n_reviewers + i


def _pair_keys(reviewer: np.ndarray, paper: np.ndarray, n_papers: int) -> np.ndarray:
    return reviewer.astype(np.int64) * n_papers + paper.astype(np.int64)


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
    s_keys = _pair_keys(table.reviewer, table.paper, n_p)
    order = np.argsort(s_keys, kind="stable")
    s_keys, s_values = s_keys[order], table.value[order]

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
        keys = np.union1d(keys, _pair_keys(pr, pp, n_p))

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


def build_network(session: Session, *, earlier: Plan | None = None) -> PlanNetwork:
    """Build the network: source → reviewer [floor, cap] → paper [0, 1] → sink [min, reviews].

    With an `earlier` plan the pairs it assigned earn the keep-tier bonus (`plan.keep`).
    """
    n_r, n_p = len(session.reviewers), len(session.papers)
    conflicts = conflict_pairs(session)
    reviewer, paper, score = candidate_pairs(session)
    keys = _pair_keys(reviewer, paper, n_p)

    banned = conflicts.keys(n_p)
    if session.blocks:
        br, bp = _rule_pairs(session, session.blocks)
        banned = np.union1d(banned, _pair_keys(br, bp, n_p))
    keep = ~np.isin(keys, banned)
    reviewer, paper, score, keys = reviewer[keep], paper[keep], score[keep], keys[keep]

    cap = session.reviewer_cap_array().astype(np.int64)
    floor = session.reviewer_floor_array().astype(np.int64)
    reviews = session.paper_reviews_array().astype(np.int64)
    minimum = session.paper_min_reviews_array().astype(np.int64)
    withdrawn_r = np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    withdrawn_p = np.array([p.withdrawn for p in session.papers], dtype=bool)
    cap[withdrawn_r] = 0
    floor[withdrawn_r] = 0
    reviews[withdrawn_p] = 0
    minimum[withdrawn_p] = 0

    pinned = np.zeros(len(keys), dtype=np.int64)
    if session.pins:
        _check_pins(session, conflicts, keys, cap, reviews)
        pr, pp = _rule_pairs(session, session.pins)
        pinned[np.isin(keys, _pair_keys(pr, pp, n_p))] = 1

    cycle_arcs = 2 * max(min(n_r, n_p), 1)
    kept = earlier_pair_mask(session, earlier, reviewer, paper) if earlier is not None else None
    resolution = SCORE_RESOLUTION
    if kept is not None:
        top = float(score.max()) if len(score) else 0.0
        resolution = fitting_resolution(SCORE_RESOLUTION, top, cycle_arcs, int(reviews.sum())) or 1
    score_int = np.rint(score * resolution).astype(np.int64)
    max_score = int(score_int.max()) if len(score_int) else 0
    w_keep = keep_weight(cycle_arcs, max_score) if kept is not None else 0
    weights = tier_weights(cycle_arcs, max_score, w_keep)
    w_required, w_coverage, w_floor = weights

    source, sink = 0, 1 + n_r + n_p
    r_nodes = 1 + np.arange(n_r, dtype=np.int64)
    p_nodes = 1 + n_r + np.arange(n_p, dtype=np.int64)
    n_pairs = len(keys)
    total = int(reviews.sum())

    tails = np.concatenate(
        [np.zeros(2 * n_r, np.int64), 1 + reviewer, p_nodes, p_nodes, [sink]]
    ).astype(np.int64)
    heads = np.concatenate(
        [r_nodes, r_nodes, 1 + n_r + paper, np.full(2 * n_p, sink, np.int64), [source]]
    ).astype(np.int64)
    capacities = np.concatenate(
        [floor, cap - floor, np.ones(n_pairs, np.int64), minimum, reviews - minimum, [total]]
    ).astype(np.int64)
    lower = np.zeros(len(capacities), dtype=np.int64)
    lower[2 * n_r : 2 * n_r + n_pairs] = pinned
    costs = np.concatenate(
        [
            np.full(n_r, -w_floor, np.int64),
            np.zeros(n_r, np.int64),
            max_score - score_int - (w_keep * kept if kept is not None else 0),
            np.full(n_p, -(w_required + w_coverage + max_score), np.int64),
            np.full(n_p, -(w_coverage + max_score), np.int64),
            [0],
        ]
    ).astype(np.int64)
    if (w_required + w_coverage + max_score) * max(total, 1) * 4 >= _COST_LIMIT:
        raise PlanInputError(
            ["scores: the score range is too wide to plan exactly; rescale scores to 0..1000"]
        )

    a = 2 * n_r
    b = a + n_pairs
    return PlanNetwork(
        n_nodes=n_r + n_p + 2,
        source=source,
        sink=sink,
        tails=tails,
        heads=heads,
        capacities=capacities,
        lower=lower,
        costs=costs,
        pair_reviewer=reviewer.astype(np.int64),
        pair_paper=paper.astype(np.int64),
        pair_score=score,
        floor_arcs=slice(0, n_r),
        rest_arcs=slice(n_r, a),
        pair_arcs=slice(a, b),
        required_arcs=slice(b, b + n_p),
        extra_arcs=slice(b + n_p, b + 2 * n_p),
        return_arc=b + 2 * n_p,
        weights=weights,
        max_score=max_score,
        conflicts=conflicts,
        n_reviewers=n_r,
        n_papers=n_p,
        kept=kept,
        keep_weight=w_keep,
        resolution=resolution,
    )


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
    if problems:
        raise PlanInputError(problems)
