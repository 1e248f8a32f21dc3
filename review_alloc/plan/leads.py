"""One lead reviewer per paper, chosen among its assigned reviewers, at most `max_leads` each.

Each paper takes exactly one lead, so giving every reviewer `max_leads` copies ("slots") turns
the choice into a one-to-one assignment of papers to slots, which the Hungarian method solves
exactly (scipy's `linear_sum_assignment`). The slot matrix is dense, so above
`DENSE_LIMIT` entries (a large venue), or where its combined float64 costs would not be exact
(huge scores), the same choice is solved on the equivalent sparse network (source → reviewer,
capacity `max_leads` → paper along assigned pairs → sink), one tier at a time, which is just as
exact; its score steps are made coarser only where huge scores would not fit int64, as the
plan's own are. The order is lexicographic: first as many papers as possible get a lead, then as
many of them as possible get a senior lead, then the total score of the lead pairs is highest.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.figures import assignment_indices
from review_alloc.plan.pairkeys import positions_in, sorted_keys
from review_alloc.plan.weights import COST_LIMIT, SCORE_RESOLUTION

if TYPE_CHECKING:
    from review_alloc.flow import WarmStart

DENSE_LIMIT = 4_000_000
"""Most entries of the dense slot matrix; larger choices go through the sparse flow."""

WARM_NEW_SHARE = 0.01
"""Most share of the flow's pairs that may be new to a warm state for the solve to restart
from it. The pairs left open by `settled_leads` shift with a re-plan: after 1 % of the reviewers
withdraw on the loose L benchmark some 6 % of them are new, and the restart then spends its
whole work budget before the cold solve (3x a cold solve); from an unchanged set it takes half
the time of a cold solve."""

EXACT_FLOAT = 2**53
"""Integers below this are exact in float64, the cost type of scipy's assignment solver."""


@dataclass(frozen=True)
class LeadChoice:
    """Lead reviewer by paper id, and the papers without a lead or without a senior lead."""

    lead_of: dict[str, str]
    no_lead: tuple[str, ...]
    no_senior_lead: tuple[str, ...]


def lead_costs(score_int: np.ndarray, n_papers: int) -> tuple[int, int]:
    """Weights (per lead, per senior lead) that make the assignment costs lexicographic: a lead
    outweighs any senior and score difference over all papers, a senior any score difference."""
    return _lead_weights(int(score_int.max(initial=0)), n_papers)


def _lead_weights(top: int, n_papers: int) -> tuple[int, int]:
    """`lead_costs` for score steps up to `top` (Python integers: they never overflow)."""
    per_senior = n_papers * (top + 1) + 1
    per_lead = n_papers * (per_senior + top) + 1
    return per_lead, per_senior


def _dense_fits(top: int, n_papers: int) -> bool:
    """Whether the dense choice stays exact in float64 with score steps up to `top`."""
    per_lead, per_senior = _lead_weights(top, n_papers)
    # The assignment solver's duals are sums of up to n_papers costs; 4 is headroom.
    return 4 * n_papers * (per_lead + per_senior + top) < EXACT_FLOAT


def _flow_fits(top: int, n_papers: int, n_nodes: int) -> bool:
    """Whether the sparse choice's costs (minus the score steps, up to `top`) fit the engine's
    int64 bounds, as `plan.weights.fitting_weights` checks for the plan's own network."""
    return top <= COST_LIMIT // (4 * n_nodes + 8) and 4 * top * max(n_papers, 1) < COST_LIMIT


def score_steps(score: np.ndarray, fits: Callable[[int], bool]) -> np.ndarray:
    """Scores as integer steps for the sparse lead choice: SCORE_RESOLUTION steps per unit, or
    the finest coarser step at which `fits(largest step count)` holds (`fits(0)` must hold).

    Like the plan's tier weights (`plan.weights.fitting_weights`), the count tiers (papers
    led, senior leads) stay exact and only ties between scores finer than a step are lost, so
    huge scores never overflow the costs.
    """
    top = float(score.max(initial=0.0))
    finest = int(np.rint(top * SCORE_RESOLUTION))
    if fits(finest):
        return np.rint(score * SCORE_RESOLUTION).astype(np.int64)
    low, high = 0, finest  # fits(low), not fits(high): the costs grow with the steps
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return np.minimum(np.rint(score * (low / top)), low).astype(np.int64)


def settled_leads(
    reviewer: np.ndarray,
    paper: np.ndarray,
    senior: np.ndarray,
    score_int: np.ndarray,
    limit: int,
    n_reviewers: int,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The leads some optimal choice surely makes, by vectorised rounds: (pairs chosen, pairs of
    the papers still open, leads each reviewer may still take).

    A reviewer whose open papers number no more than the leads they may still take is never
    held back by their cap. A paper whose best pair (senior first, then score steps) has such
    a reviewer takes them: in any optimal choice, moving that paper's lead to them keeps every
    cap (they lead at most their open papers) and loses no tier (led, senior, score), so some
    optimal choice leads it so. Fixing it closes the paper, which frees other reviewers in
    turn; the rounds stop when no paper is fixed, and the papers left are chosen by the flow
    with the leads left. On the loose L benchmark this settles about 9 papers in 10.
    """
    n = len(paper)
    fixed = np.zeros(n, dtype=bool)
    left = np.full(n_reviewers, limit, dtype=np.int64)
    # Each paper's pairs together, best first; ties keep the rows' order.
    order = _best_first(paper, senior, score_int)
    if not len(order):
        return np.flatnonzero(fixed), order, left
    # A paper's pairs stay together until it closes, so its best pairs, its group and the
    # reviewers' open loads are worked out once and then only updated: the later rounds settle
    # a few papers each, and a pass over every open pair per round cost most of the time.
    p = paper[order]
    first = np.ones(len(order), dtype=bool)
    first[1:] = p[1:] != p[:-1]
    starts = np.flatnonzero(first)
    sizes = np.diff(np.append(starts, len(order)))
    group = np.cumsum(first) - 1
    head = order[starts][group]
    best = np.flatnonzero(
        (senior[order] == senior[head]) & (score_int[order] == score_int[head])
    )
    loads = np.bincount(reviewer, minlength=n_reviewers)
    open_group = np.ones(len(starts), dtype=bool)
    while len(best):
        free = loads <= left
        candidate = best[free[reviewer[order[best]]]]
        if not len(candidate):
            break
        # One pair per paper: the first free one among its best.
        g = group[candidate]
        once = np.ones(len(candidate), dtype=bool)
        once[1:] = g[1:] != g[:-1]
        pick = order[candidate[once]]
        closing = g[once]
        fixed[pick] = True
        np.subtract.at(left, reviewer[pick], 1)
        # The closed papers' pairs leave the open loads.
        size = sizes[closing]
        offsets = np.arange(int(size.sum())) - np.repeat(np.cumsum(size) - size, size)
        rows = order[np.repeat(starts[closing], size) + offsets]
        loads -= np.bincount(reviewer[rows], minlength=n_reviewers)
        open_group[closing] = False
        best = best[open_group[group[best]]]
    return np.flatnonzero(fixed), np.sort(order[open_group[group]]), left


def _best_first(paper: np.ndarray, senior: np.ndarray, score_int: np.ndarray) -> np.ndarray:
    """Row order by paper, then seniors first, then higher score steps; ties keep the rows'
    order (`np.lexsort((-score_int, ~senior, paper))`).

    Where the three fit one int64 key, one stable sort of it: a plan's rows already go by
    paper, which a stable sort of one key finds in a fraction of the lexsort's time.
    """
    if not len(paper):
        return np.zeros(0, dtype=np.int64)
    low, high = int(score_int.min()), int(score_int.max())
    steps = high - low + 1
    if (int(paper.max()) + 1) * 2 * steps >= 2**62:
        return np.lexsort((-score_int, ~senior, paper))
    key = (paper.astype(np.int64) * 2 + ~senior) * steps + (high - score_int)
    return np.argsort(key, kind="stable")


@dataclass(frozen=True, eq=False)
class LeadState:
    """The solved score tier of a sparse lead choice, kept so that the next choice (after a
    re-plan moved a few reviews) can restart from it instead of solving cold.

    Its network has a node for every paper of the session (one without reviews has only its
    sink arc, which carries nothing), so the nodes of the next choice's network are the same:
    source, senior hub, junior hub, reviewers, papers, sink.
    """

    pair_keys: np.ndarray
    """reviewer * papers + paper of each assigned pair, in the network's pair order."""
    lead: np.ndarray
    """Per pair: chosen as its paper's lead."""
    pair_costs: np.ndarray
    """Per pair: its cost in the score tier (minus its score steps)."""
    potentials: np.ndarray
    """Potentials of every node that certify the score tier's optimum."""
    senior: np.ndarray
    """Per reviewer: fed through the senior hub."""
    slots: np.ndarray
    """Per reviewer: the leads they may take (their lead cap, at most their reviews)."""
    n_papers: int



def pick_leads(session: Session, plan: Plan) -> LeadChoice:
    """Choose the leads of a plan: most papers led, then most senior leads, then best score."""
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    return lead_choice(session, reviewer, paper, lead_mask(session, reviewer, paper, score))


def lead_mask(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray
) -> np.ndarray:
    """Which of the assigned pairs (index arrays) lead their paper, chosen as `pick_leads` does."""
    return lead_mask_warm(session, reviewer, paper, score)[0]


def lead_mask_warm(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    warm: LeadState | None = None,
) -> tuple[np.ndarray, LeadState | None]:
    """`lead_mask`, restarting a large venue's choice from `warm`; also returns the new state
    (None when the choice did not go through the sparse flow)."""
    limit = session.policy.max_leads
    mask = np.zeros(len(paper), dtype=bool)
    if limit == 0 or len(paper) == 0:
        return mask, None
    # The papers with reviews, counted without a sort (the dense path below lists them).
    n_led = int(np.count_nonzero(np.bincount(paper, minlength=len(session.papers))))
    senior = session.reviewer_senior_array()[reviewer]
    loads = np.bincount(reviewer, minlength=len(session.reviewers))
    slots = np.minimum(loads, limit)
    top = int(np.rint(float(score.max(initial=0.0)) * SCORE_RESOLUTION))
    if n_led * int(slots.sum()) > DENSE_LIMIT or not _dense_fits(top, n_led):
        # The flow solves the tiers one by one, so its costs are the score steps alone: full
        # steps unless the scores are huge. The flow's nodes: source, two hubs, reviewers,
        # papers, sink.
        n_nodes = 4 + len(session.reviewers) + len(session.papers)
        score_int = score_steps(score, lambda top: _flow_fits(top, n_led, n_nodes))
        fixed, core, left = settled_leads(
            reviewer, paper, senior, score_int, limit, len(session.reviewers)
        )
        mask[fixed] = True
        if not len(core):
            return mask, None
        chosen, state = _leads_by_flow(
            reviewer[core],
            paper[core],
            senior[core],
            score_int[core],
            left,
            len(session.reviewers),
            len(session.papers),
            warm,
        )
        mask[core[chosen]] = True
        return mask, state
    score_int = np.rint(score * SCORE_RESOLUTION).astype(np.int64)
    per_lead, per_senior = lead_costs(score_int, n_led)
    gain = per_lead + per_senior * senior.astype(np.int64) + score_int
    papers_with = np.unique(paper)
    people = np.flatnonzero(slots > 0)
    first_slot = np.zeros(len(session.reviewers), dtype=np.int64)
    first_slot[people] = np.cumsum(slots[people]) - slots[people]
    row_of = np.full(len(session.papers), -1, dtype=np.int64)
    row_of[papers_with] = np.arange(len(papers_with))
    # Not assigned = cost 0, assigned = a large negative cost: minimising takes as many
    # assigned pairs as possible, which is why entries outside the plan never win.
    cost = np.zeros((len(papers_with), int(slots.sum())), dtype=np.float64)
    pair_at = np.full(cost.shape, -1, dtype=np.int64)
    for k in range(limit):
        has = np.flatnonzero(slots[reviewer] > k)
        cell = (row_of[paper[has]], first_slot[reviewer[has]] + k)
        cost[cell] = -gain[has].astype(np.float64)
        pair_at[cell] = has
    # Imported here: scipy.optimize takes almost half a second to import, and every command
    # that never picks leads by the Hungarian method would pay it.
    from scipy.optimize import linear_sum_assignment

    rows, cols = linear_sum_assignment(cost)
    picked = cost[rows, cols] < 0
    mask[pair_at[rows[picked], cols[picked]]] = True
    return mask, None


def lead_choice(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, mask: np.ndarray
) -> LeadChoice:
    """The LeadChoice of the pairs marked in `mask`, with the papers left without (senior) lead."""
    paper_ids = [p.id for p in session.papers]
    reviewer_ids = [r.id for r in session.reviewers]
    # Item getters over whole lists and per-paper counts: no Python loop over the rows and no
    # sort (a large venue has tens of thousands of papers).
    lead_of = dict(
        zip(
            map(paper_ids.__getitem__, paper[mask].tolist()),
            map(reviewer_ids.__getitem__, reviewer[mask].tolist()),
            strict=True,
        )
    )
    n_p = len(session.papers)
    has = np.bincount(paper, minlength=n_p) > 0
    led = np.zeros(n_p, dtype=bool)
    led[paper[mask]] = True
    senior_led = np.zeros(n_p, dtype=bool)
    senior_led[paper[mask & session.reviewer_senior_array()[reviewer]]] = True
    no_lead = tuple(map(paper_ids.__getitem__, np.flatnonzero(has & ~led).tolist()))
    no_senior = tuple(map(paper_ids.__getitem__, np.flatnonzero(has & ~senior_led).tolist()))
    return LeadChoice(lead_of=lead_of, no_lead=no_lead, no_senior_lead=no_senior)


def _lead_arcs(
    reviewer: np.ndarray, paper: np.ndarray, is_senior: np.ndarray, n_papers: int
) -> tuple[np.ndarray, np.ndarray]:
    """Tails and heads of the lead network: source → hubs, hub → reviewer, the pairs (reviewer
    → paper), paper → sink; nodes as `LeadState` lays them out."""
    n_reviewers = len(is_senior)
    first_paper = 3 + n_reviewers
    sink = first_paper + n_papers
    hub = np.where(is_senior, 1, 2)
    tails = np.concatenate([
        [0, 0], hub, 3 + reviewer, first_paper + np.arange(n_papers),
    ]).astype(np.int64)
    heads = np.concatenate([
        [1, 2], 3 + np.arange(n_reviewers), first_paper + paper, np.full(n_papers, sink),
    ]).astype(np.int64)
    return tails, heads


def _leads_by_flow(
    reviewer: np.ndarray,
    paper: np.ndarray,
    senior: np.ndarray,
    score_int: np.ndarray,
    limit: int | np.ndarray,
    n_reviewers: int,
    n_papers: int = 0,
    warm: LeadState | None = None,
) -> tuple[np.ndarray, LeadState]:
    """Indices of the assigned pairs chosen as leads, by three small exact flow solves, and the
    state of the last one (`warm` restarts it; the choice stays exact either way). `limit`
    is the leads each reviewer may take (one for all, or one per reviewer).

    One combined cost would need weights of about papers**2 times the score range, beyond what
    cost scaling can price in int64 on a large venue (the slow fallback took seconds). Fixing
    each tier before the next keeps every cost tiny: the most papers led (a maximum flow), then
    the most senior leads with that many papers led, then the best score with both fixed. The
    source feeds senior and junior reviewers through two hubs, so the senior count is the flow
    on one arc.

    The lead choice is a global optimisation (a reviewer's lead cap couples all of their
    papers), so it does not decompose by paper; `settled_leads` first fixes the papers whose
    choice is forced and this solves the rest. With `warm` the score tier restarts from the
    earlier optimum when the pairs barely changed (see `WARM_NEW_SHARE`). Keeping its residual
    state instead (`flow.KeptFlow`, as the plan's re-solve does) was measured and is slower:
    after 1 % of the reviewers withdraw on the loose L benchmark, some 600 papers lose their
    lead and each is routed by a search of its own, 28 M work units (60 times the lead network),
    where the primal-dual warm start routes them together in a few phases.
    """
    n_papers = max(n_papers, int(paper.max(initial=-1)) + 1)
    is_senior = np.zeros(n_reviewers, dtype=bool)
    is_senior[reviewer[senior]] = True
    keys = reviewer.astype(np.int64) * n_papers + paper
    if warm is not None and _fits(warm, is_senior, n_papers):
        found = positions_in(keys, sorted_keys(warm.pair_keys))[0]
        if np.count_nonzero(~found) <= WARM_NEW_SHARE * len(keys):
            start = _warm_leads(warm, keys, reviewer, paper, is_senior)
            return _solve_leads(
                reviewer, paper, senior, score_int, limit, is_senior, n_papers, start
            )
    # A cold solve on the reviewers and papers of these pairs only: the settled leads leave a
    # core of a few thousand papers, and nodes without arcs still cost cost scaling work in
    # every phase (a third of the solve on the loose L benchmark). The state is laid out on
    # every reviewer and paper again, so that the next choice can restart from it.
    people, r_at = _dense_ranks(reviewer, n_reviewers)
    papers, p_at = _dense_ranks(paper, n_papers)
    own_limit = limit if np.ndim(limit) == 0 else np.asarray(limit)[people]
    chosen, small = _solve_leads(
        r_at, p_at, senior, score_int, own_limit, is_senior[people], len(papers), None
    )
    n_r, n_small = len(people), len(papers)
    pot = np.zeros(4 + n_reviewers + n_papers, dtype=np.int64)
    pot[:3] = small.potentials[:3]
    # Reviewers and papers without pairs sit level with their hub and the sink (a warm start
    # from this state moves them there anyway).
    pot[3 : 3 + n_reviewers] = np.where(is_senior, pot[1], pot[2])
    pot[3 + people] = small.potentials[3 : 3 + n_r]
    pot[3 + n_reviewers : 3 + n_reviewers + n_papers] = small.potentials[-1]
    pot[3 + n_reviewers + papers] = small.potentials[3 + n_r : 3 + n_r + n_small]
    pot[-1] = small.potentials[-1]
    slots = np.zeros(n_reviewers, dtype=np.int64)
    slots[people] = small.slots
    state = LeadState(
        pair_keys=keys,
        lead=small.lead,
        pair_costs=small.pair_costs,
        potentials=pot,
        senior=is_senior,
        slots=slots,
        n_papers=n_papers,
    )
    return chosen, state


def _dense_ranks(index: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """`np.unique(index, return_inverse=True)` for indices below `size`, by counting (no sort)."""
    present = np.bincount(index, minlength=size) > 0
    rank = np.cumsum(present) - 1
    return np.flatnonzero(present), rank[index]


def _solve_leads(
    reviewer: np.ndarray,
    paper: np.ndarray,
    senior: np.ndarray,
    score_int: np.ndarray,
    limit: int | np.ndarray,
    is_senior: np.ndarray,
    n_papers: int,
    start: WarmStart | None,
) -> tuple[np.ndarray, LeadState]:
    """The three tiers' solves of `_leads_by_flow` on the network of these reviewers
    (`is_senior` has one entry each) and `n_papers` papers, the last from `start`."""
    from review_alloc.flow import max_flow, min_cost_flow

    n_reviewers = len(is_senior)
    first_paper = 3 + n_reviewers
    sink = first_paper + n_papers
    n = sink + 1

    tails, heads = _lead_arcs(reviewer, paper, is_senior, n_papers)
    # A reviewer can lead at most the papers they review: capping their arc there changes no
    # choice, and a reviewer who lost reviews then hands the leads they lost back to the hub at
    # once, so that a re-solve from `warm` finds them there (not behind the hub's many arcs).
    slots = np.minimum(np.bincount(reviewer, minlength=n_reviewers), limit)
    upper = np.concatenate([
        [n_papers, n_papers], slots, np.ones(len(paper)), np.ones(n_papers),
    ]).astype(np.int64)
    pairs = slice(2 + n_reviewers, 2 + n_reviewers + len(paper))
    led = max_flow(n, tails, heads, upper, 0, sink).value

    # The return arc sink -> source carries exactly `led` units in both weighted solves.
    tails = np.append(tails, sink)
    heads = np.append(heads, 0)
    upper = np.append(upper, led)
    lower = np.zeros(len(tails), dtype=np.int64)
    lower[-1] = led
    costs = np.zeros(len(tails), dtype=np.int64)
    costs[0] = -1
    if senior.all() or not senior.any():
        # Every lead is senior, or none can be: the count needs no solve.
        seniors = led if senior.all() else 0
    else:
        seniors = min_cost_flow(n, tails, heads, upper, costs, lower=lower).flow[0]

    lower[0] = upper[0] = seniors
    costs[0] = 0
    costs[pairs] = -score_int
    keys = reviewer.astype(np.int64) * n_papers + paper
    result = min_cost_flow(n, tails, heads, upper, costs, lower=lower, warm=start)
    chosen = result.flow[pairs] > 0
    state = LeadState(
        pair_keys=keys,
        lead=chosen,
        pair_costs=costs[pairs].copy(),
        potentials=np.asarray(result.potentials, dtype=np.int64).copy(),
        senior=is_senior,
        slots=slots,
        n_papers=n_papers,
    )
    return np.flatnonzero(chosen), state


def _fits(warm: LeadState, is_senior: np.ndarray, n_papers: int) -> bool:
    """Whether `warm` was solved on a network with these nodes and hubs."""
    return (
        warm.n_papers == n_papers
        and len(warm.senior) == len(is_senior)
        and bool(np.array_equal(warm.senior, is_senior))
    )


def _warm_leads(
    warm: LeadState,
    keys: np.ndarray,
    reviewer: np.ndarray,
    paper: np.ndarray,
    is_senior: np.ndarray,
) -> WarmStart:
    """The earlier choice's leads and potentials on this network's nodes and arcs.

    Pairs still assigned keep their lead flag; the arcs above and below them carry what those
    leads imply. Whatever no longer fits is repaired by the warm solve.
    """
    from review_alloc.flow import WarmStart

    n_r, n_p = len(is_senior), warm.n_papers
    found, at = positions_in(keys, sorted_keys(warm.pair_keys))
    order = np.argsort(warm.pair_keys, kind="stable")
    led_pair = found & warm.lead[order[at]] if len(warm.pair_keys) else found
    per_reviewer = np.bincount(reviewer[led_pair], minlength=n_r)
    per_paper = np.minimum(np.bincount(paper[led_pair], minlength=n_p), 1)
    flow = np.concatenate(
        [
            [np.sum(per_reviewer[is_senior]), np.sum(per_reviewer[~is_senior])],
            per_reviewer,
            led_pair.astype(np.int64),
            per_paper,
            [int(per_paper.sum())],
        ]
    ).astype(np.int64)
    # Nodes the earlier choice had no pairs at (their potentials certify nothing) start level
    # with their hub or the sink, so that their arcs there price at zero.
    pot = warm.potentials.copy()
    old_r = np.bincount(warm.pair_keys // n_p, minlength=n_r) > 0
    old_p = np.bincount(warm.pair_keys % n_p, minlength=n_p) > 0
    hub_pot = np.where(is_senior, pot[1], pot[2])
    pot[3 : 3 + n_r] = np.where(old_r, pot[3 : 3 + n_r], hub_pot)
    pot[3 + n_r : 3 + n_r + n_p] = np.where(old_p, pot[3 + n_r : 3 + n_r + n_p], pot[-1])
    return WarmStart(flow=flow, potentials=pot)


def with_leads(plan: Plan, choice: LeadChoice) -> Plan:
    """The plan with `lead` set on the chosen assignments and cleared on the others."""
    assignments = [
        a.model_copy(update={"lead": choice.lead_of.get(a.paper) == a.reviewer})
        for a in plan.assignments
    ]
    return plan.model_copy(update={"assignments": assignments})
