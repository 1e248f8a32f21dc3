"""Randomised plans under a probability cap: the best fractional plan, then one fair draw from it.

Why: a reviewer who can predict their papers can bid their way to a friend's paper; capping
the chance that any one reviewer gets any one paper limits that (Jecmen, Zhang, Liu, Shah,
Conitzer and Fang, "Mitigating Manipulation in Peer Review via Randomized Reviewer
Assignments", NeurIPS 2020).

1. The fractional plan: the planner's own network (`plan.network.build_network`, every rule
   and tier included) with every capacity and lower bound multiplied by `PROBABILITY_SCALE`
   and each unpinned pair's capacity cut to floor(Q * scale), solved by the engine's min-cost
   flow. Flow / scale is each pair's probability; the same tier weights make it the
   lexicographic optimum of the linear relaxation (required coverage, seniors, coverage,
   floors, then expected score), certified by the engine's dual potentials. Pinned pairs keep
   probability 1.
2. The draw: dependent rounding (`plan.rounding`) on a network that carries every rule's
   counting node (reviewer, the (paper, institution) parts, the paper's senior node, paper),
   so every pair is drawn with exactly its probability, and every reviewer's load, paper's
   count, institution part and senior count lands on the floor or ceiling of its fractional
   value, which keeps every cap, limit and hard senior rule. The independent checker then
   verifies the drawn plan's hard rules; the drawn plan is not optimal and no certificate is
   claimed for it: its *expected* score is the fractional optimum's.

Audit: the plan stores the cap, the seed and every pair's probability (`model.PlanDraw`);
`redraw(session, draw)` repeats the rounding from those alone and gives the same pairs.

Re-plans keep the randomisation: a plan made when the current plan is a draw is drawn again
with the same cap and seed; the earlier draw's pairs that the rules still allow are exempt
from the cap and kept by the keep tier (below coverage and floors, as in a plain re-plan), so
after a withdrawal only the openings are redrawn, each new pair at most Q. The new record
shows the kept pairs at probability 1 and redraws the same plan.
"""

from __future__ import annotations

import secrets
from dataclasses import dataclass, replace
from datetime import UTC, datetime

import numpy as np

from review_alloc.flow import InfeasibleError, check_cost_certificate, min_cost_flow
from review_alloc.model import Plan, ScoreTable, Session
from review_alloc.model.plans import PlanDraw, comparable_figures
from review_alloc.plan.assemble import assemble_plan
from review_alloc.plan.cautions import RANDOM_CAUTION
from review_alloc.plan.checker import check_plan
from review_alloc.plan.conflicts import conflict_pairs
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.institutions import institution_groups
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.rounding import dependent_round
from review_alloc.plan.seniors import senior_nodes
from review_alloc.plan.solve import PlanOutcome, make_plan
from review_alloc.plan.weights import COST_LIMIT

PROBABILITY_SCALE = 1000
"""Probabilities are whole multiples of 1/1000: the fractional plan is an integer flow at this
scale (the engine takes integers only), so a cap Q allows floor(1000 Q) thousandths."""

ROUNDING_METHOD = (
    "dependent rounding (Gandhi, Khuller, Parthasarathy and Srinivasan, J. ACM 2006), "
    "flow form of Jecmen et al., NeurIPS 2020"
)

SEED_LIMIT = 2**63
"""Seeds are whole numbers in [0, 2**63)."""


@dataclass(frozen=True)
class FractionalPlan:
    """The best plan with every pair's probability at most the cap, as integer flows."""

    network: PlanNetwork
    pair_flow: np.ndarray
    """Per pair arc of `network`: probability times `scale`."""
    scale: int
    tiers: dict[str, float]
    """Tier values of the fractional plan (expected counts; `score` the expected total)."""
    potentials: np.ndarray
    """Dual potentials certifying the scaled flow optimal (checked before returning)."""
    split_fixed: bool = False
    """Mixed institution groups were split as in the plain plan (optimal for that split)."""


@dataclass(frozen=True)
class RandomOutcome(PlanOutcome):
    """A drawn plan with the fractional plan it was drawn from and the plain plan beside it."""

    fractional: FractionalPlan | None = None
    plain: PlanOutcome | None = None


def fractional_tiers(net: PlanNetwork, pair_flow: np.ndarray, scale: int) -> dict[str, float]:
    """Tier values of a fractional plan (flows in units of 1/scale): expected counts and score."""
    x = pair_flow.astype(np.float64) / scale
    counts = np.bincount(net.pair_paper, weights=x, minlength=net.n_papers)
    loads = np.bincount(net.pair_reviewer, weights=x, minlength=net.n_reviewers)
    minimum = net.capacities[net.required_arcs]
    reviews = minimum + net.capacities[net.extra_arcs]
    floor = np.bincount(
        net.floor_arc_reviewer, weights=net.capacities[net.floor_arcs], minlength=net.n_reviewers
    )
    in_senior = net.pair_senior >= 0
    seniors = np.bincount(
        net.pair_senior[in_senior], weights=x[in_senior], minlength=len(net.senior_paper)
    )
    return {
        "required": round(float(np.minimum(counts, minimum).sum()), 6),
        "seniors": round(float(np.minimum(seniors, net.senior_need).sum()), 6),
        "coverage": round(float(np.minimum(counts, reviews).sum()), 6),
        "floors": round(float(np.minimum(loads, floor).sum()), 6),
        "score": round(float(x @ net.pair_score), 6),
    }


def _scaled_arrays(
    net: PlanNetwork, cap_units: int, scale: int
) -> tuple[np.ndarray, np.ndarray]:
    """(capacities, lower) of `net` at the scale, unpinned pairs not kept earlier capped."""
    capacities = net.capacities * scale
    lower = net.lower * scale
    pair_caps = capacities[net.pair_arcs]
    capped = ~net.pair_pinned if len(net.pair_pinned) else np.ones(len(pair_caps), bool)
    if net.kept is not None:
        capped &= ~net.kept
    pair_caps[capped] = min(cap_units, scale)
    capacities[net.pair_arcs] = pair_caps
    return capacities, lower


def _solve_fractional(net: PlanNetwork, cap_units: int, scale: int) -> FractionalPlan:
    """Solve one scaled network; refuse when its costs could overflow or the pins do not fit."""
    capacities, lower = _scaled_arrays(net, cap_units, scale)
    heaviest = int(np.abs(net.costs).max()) if len(net.costs) else 0
    if heaviest * int(capacities[net.return_arc]) * 4 >= COST_LIMIT:
        raise PlanInputError(
            [
                "max_probability: the session is too large to plan at a probability scale of "
                f"1/{scale} within the engine's integer range"
            ]
        )
    try:
        result = min_cost_flow(
            net.n_nodes, net.tails, net.heads, capacities, net.costs, lower=lower
        )
    except InfeasibleError:
        # The plain plan met the pins, so only the hard senior rule can fail under the cap.
        raise PlanInputError(
            [
                "max_probability: the hard senior rule cannot be met with each pair at most "
                f"{cap_units / scale:g} (some paper has too few eligible seniors to share its "
                "senior seats); raise the cap or make the senior rule a tier (senior_hard: false)"
            ]
        ) from None
    # The dual potentials prove the fractional plan optimal; checked here, not trusted.
    check_cost_certificate(
        net.n_nodes,
        net.tails,
        net.heads,
        capacities,
        net.costs,
        result.flow,
        result.potentials,
        lower=lower,
    )
    pair_flow = result.flow[net.pair_arcs].astype(np.int64)
    return FractionalPlan(
        network=net,
        pair_flow=pair_flow,
        scale=scale,
        tiers=fractional_tiers(net, pair_flow, scale),
        potentials=result.potentials,
    )


def _crowded_split(
    session: Session, net: PlanNetwork, pair_flow: np.ndarray, scale: int, plain: Plan
) -> dict[tuple[int, str], int] | None:
    """A split for the mixed institution groups whose two parts could be drawn above the limit
    together (their ceilings sum past it): the plain plan's senior share of every mixed group
    (None when every group is safe)."""
    m = session.policy.max_per_institution
    if m is None or not net.relaxed_groups:
        return None
    n_g = len(net.part_paper)
    inside = net.pair_part >= 0
    part_flow = np.bincount(net.pair_part[inside], weights=pair_flow[inside], minlength=n_g)
    # The draw keeps each part at the floor or ceiling of its own flow, not their sum, so the
    # relaxed plan is safe only where the two parts' ceilings together stay within the limit.
    group_most: dict[tuple[int, str], int] = {}
    for g in net.relaxed_groups:
        key = (int(net.part_paper[g]), net.part_institution[g])
        group_most[key] = group_most.get(key, 0) + -(-int(round(part_flow[g])) // scale)
    if all(v <= m for v in group_most.values()):
        return None
    rid = session.reviewer_index()
    pid = session.paper_index()
    n_p = max(net.n_papers, 1)
    plain_keys = np.array(
        [rid[a.reviewer] * n_p + pid[a.paper] for a in plain.assignments], dtype=np.int64
    )
    used = np.isin(net.pair_reviewer * n_p + net.pair_paper, plain_keys)
    in_part = used & inside
    share = np.bincount(net.pair_part[in_part], minlength=n_g)
    split: dict[tuple[int, str], int] = {}
    for g in net.relaxed_groups:
        key = (int(net.part_paper[g]), net.part_institution[g])
        taken = int(share[g]) if int(net.part_senior[g]) == 1 else 0
        split[key] = max(split.get(key, 0), taken)
    return split


def fractional_plan(
    session: Session,
    max_probability: float,
    *,
    plain: Plan,
    earlier: Plan | None = None,
    threshold: float | None = None,
    scale: int = PROBABILITY_SCALE,
) -> FractionalPlan:
    """The lexicographically best fractional plan with each unpinned pair's probability at most
    `max_probability` (pairs of `earlier`, a previous draw, are kept by the keep tier uncapped).

    Where the institution and senior rules cross (mixed groups), the relaxed network is tried
    first; if a draw from it could pass a group's limit (the two parts' ceilings sum past it),
    the plain plan's senior share of those groups is fixed and the plan is optimal for that
    split (stated in the method).
    """
    if not 0 < max_probability <= 1:
        raise PlanInputError([f"max_probability: {max_probability} must be above 0 and at most 1"])
    cap_units = int(np.floor(max_probability * scale + 1e-9))
    if cap_units < 1:
        raise PlanInputError(
            [f"max_probability: {max_probability} is below the probability step 1/{scale}"]
        )
    conflicts = conflict_pairs(session)
    net = build_network(session, threshold=threshold, conflicts=conflicts, earlier=earlier)
    frac = _solve_fractional(net, cap_units, scale)
    split = _crowded_split(session, net, frac.pair_flow, scale, plain)
    if split is not None:
        net = build_network(
            session,
            institution_split=split,
            threshold=threshold,
            conflicts=conflicts,
            earlier=earlier,
        )
        frac = replace(_solve_fractional(net, cap_units, scale), split_fixed=True)
    return frac


@dataclass(frozen=True)
class RoundingGraph:
    """The network the draw rounds on: one arc per pair of nodes every rule counts through."""

    n_nodes: int
    tails: np.ndarray
    heads: np.ndarray
    pair_arc: np.ndarray
    """Arc of each pair."""
    pair_path: np.ndarray
    """Per pair, the arcs its unit of flow passes (rows padded with -1)."""


def rounding_graph(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> RoundingGraph:
    """source -> reviewer -> (paper, institution) part -> paper's senior node -> paper -> sink
    -> source, with a part node for every pair in a group above the institution limit (split
    by seniority where the group is mixed) and a senior node where the paper has a senior rule.

    It depends on the session and the pairs only, so a stored draw can be redrawn.
    """
    n_r, n_p = len(session.reviewers), len(session.papers)
    reviewer = reviewer.astype(np.int64)
    paper = paper.astype(np.int64)
    senior_papers, _, pair_senior = senior_nodes(session, reviewer, paper)
    has_senior = np.zeros(n_p, dtype=bool)
    has_senior[senior_papers] = True
    parts = institution_groups(session, reviewer, paper, pair_senior, has_senior, None)
    sink = 1 + n_r + n_p
    first_sen = sink + 1
    first_part = first_sen + len(senior_papers)
    n_nodes = first_part + len(parts.paper)
    r_node = 1 + reviewer
    p_node = 1 + n_r + paper
    s_node = np.where(pair_senior >= 0, first_sen + pair_senior, -1)
    g_node = np.where(parts.pair_part >= 0, first_part + parts.pair_part, -1)
    hops = [np.zeros(len(paper), np.int64), r_node]
    hops += [g_node, s_node, p_node, np.full(len(paper), sink), np.zeros(len(paper), np.int64)]
    steps = np.stack(hops, axis=1)
    # Pack each row's present hops to the left (a stable sort on "missing"), then read the
    # pair's arcs as consecutive (tail, head) nodes.
    valid = steps >= 0
    packed = np.take_along_axis(steps, np.argsort(~valid, axis=1, kind="stable"), axis=1)
    arcs_in_row = valid.sum(axis=1) - 1
    present = np.arange(steps.shape[1] - 1)[None, :] < arcs_in_row[:, None]
    keys = np.where(present, packed[:, :-1] * n_nodes + packed[:, 1:], -1)
    uniq, inverse = np.unique(keys[present], return_inverse=True)
    path = np.full(keys.shape, -1, dtype=np.int64)
    path[present] = inverse
    tails, heads = uniq // n_nodes, uniq % n_nodes
    # The pair's own arc is the one leaving its reviewer (second hop).
    pair_arc = path[:, 1].copy()
    return RoundingGraph(n_nodes, tails, heads, pair_arc, path)


def draw_pairs(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    units: np.ndarray,
    scale: int,
    seed: int,
) -> np.ndarray:
    """Which of the given pairs (probability = units / scale) the seeded draw assigns."""
    graph = rounding_graph(session, reviewer, paper)
    flow = np.zeros(len(graph.tails), dtype=np.int64)
    for k in range(graph.pair_path.shape[1]):
        arcs = graph.pair_path[:, k]
        inside = arcs >= 0
        np.add.at(flow, arcs[inside], units[inside])
    rounded = dependent_round(graph.n_nodes, graph.tails, graph.heads, flow, scale, seed)
    return rounded[graph.pair_arc] == scale


def redraw(session: Session, draw: PlanDraw) -> list[tuple[str, str]]:
    """The (reviewer, paper) ids a stored draw assigns, from its probabilities and seed alone.

    `session` must hold the data the plan was made from (for a revision, its own data).
    """
    table = draw.probabilities
    units = np.rint(table.value * draw.scale).astype(np.int64)
    chosen = draw_pairs(
        session, table.reviewer.astype(np.int64), table.paper.astype(np.int64), units,
        draw.scale, draw.seed,
    )
    return [
        (session.reviewers[int(j)].id, session.papers[int(i)].id)
        for j, i in zip(table.reviewer[chosen].tolist(), table.paper[chosen].tolist(), strict=True)
    ]


def new_seed() -> int:
    """A fresh seed from the operating system's randomness (stored with the plan)."""
    return secrets.randbelow(SEED_LIMIT)


def random_plan(
    session: Session,
    max_probability: float,
    *,
    seed: int | None = None,
    earlier: Plan | None = None,
    now: datetime | None = None,
    plain: PlanOutcome | None = None,
) -> RandomOutcome:
    """Draw a checked plan in which each unpinned pair has probability at most `max_probability`.

    `earlier` is a previous draw whose allowed pairs a re-plan keeps (see the module doc);
    `plain` the plain optimal plan of the same session when already made (for the comparison).
    """
    if seed is None:
        seed = new_seed()
    if not 0 <= seed < SEED_LIMIT:
        raise PlanInputError([f"seed: {seed} must be between 0 and {SEED_LIMIT - 1}"])
    now = now or datetime.now(UTC)
    if plain is None:
        plain = make_plan(session, fresh=True, now=now)
    frac = fractional_plan(
        session, max_probability, plain=plain.plan, earlier=earlier, threshold=plain.bottleneck
    )
    net = frac.network
    positive = frac.pair_flow > 0
    reviewer = net.pair_reviewer[positive]
    paper = net.pair_paper[positive]
    units = frac.pair_flow[positive]
    chosen = draw_pairs(session, reviewer, paper, units, frac.scale, seed)
    method = (
        f"randomised: fractional optimum (min-cost flow, each pair at most {max_probability:g}, "
        f"probabilities in steps of 1/{frac.scale}), then {ROUNDING_METHOD}, seed {seed}"
        + (", keeping the earlier draw's pairs" if earlier is not None else "")
        + (", institution split of the plain plan fixed" if frac.split_fixed else "")
    )
    score = net.pair_score[positive][chosen]
    plan, leads = assemble_plan(session, reviewer[chosen], paper[chosen], score, now, method)
    # The checker verifies the hard rules of the drawn plan; it is not optimal, so no
    # certificate is checked for it (the fractional plan's was checked above).
    check_plan(session, plan, None)
    record = PlanDraw(
        max_probability=max_probability,
        seed=seed,
        scale=frac.scale,
        method=ROUNDING_METHOD,
        probabilities=ScoreTable.from_arrays(
            reviewer.astype(np.int32), paper.astype(np.int32), units / frac.scale
        ),
        expected={
            "required_coverage": frac.tiers["required"],
            "coverage": frac.tiers["coverage"],
            "floors_met": frac.tiers["floors"],
            "total_score": frac.tiers["score"],
        },
        plain=comparable_figures(plain.plan.figures),
        kept_earlier=earlier is not None,
    )
    return RandomOutcome(
        plan=plan.model_copy(update={"checked": True, "draw": record}),
        network=net,
        potentials=frac.potentials,
        leads=leads,
        flow=None,
        tiers=frac.tiers,
        fractional=frac,
        plain=plain,
    )


def draw_report(session: Session, plan: Plan) -> dict[str, object]:
    """The JSON of a randomised plan's draw: cap, seed, every pair's probability and the score
    given up against the plain plan (positions beyond the session's lists are left out)."""
    draw = plan.draw
    if draw is None:
        raise ValueError("the plan was not drawn at random")
    table = draw.probabilities
    n_r, n_p = len(session.reviewers), len(session.papers)
    rows = [
        {
            "paper": session.papers[i].id,
            "reviewer": session.reviewers[j].id,
            "probability": round(v, 6),
        }
        for j, i, v in zip(
            table.reviewer.tolist(), table.paper.tolist(), table.value.tolist(), strict=True
        )
        if j < n_r and i < n_p
    ]
    rows.sort(key=lambda r: (str(r["paper"]), str(r["reviewer"])))
    expected = draw.expected["total_score"]
    plain = draw.plain["total_score"] if draw.plain is not None else None
    return {
        "max_probability": draw.max_probability,
        "seed": draw.seed,
        "scale": draw.scale,
        "method": draw.method,
        "expected": draw.expected,
        "drawn": comparable_figures(plan.figures),
        "plain": draw.plain,
        "expected_score_given_up": None if plain is None else round(plain - expected, 6),
        "kept_earlier": draw.kept_earlier,
        "certified": "the fractional plan is the optimum of its linear program (dual potentials "
        "checked); the drawn plan keeps every hard rule (independent checker) and is not "
        "claimed optimal",
        "probabilities": rows,
        "caution": RANDOM_CAUTION,
    }
