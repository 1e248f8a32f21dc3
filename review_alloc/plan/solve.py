"""Make an optimal plan: build the network, solve it, decode it, and have it checked.

The objective, lexicographic, highest first: required coverage; seniors (sum over papers of
min(seniors, senior_min), unless the policy makes seniors hard); coverage; with `bottleneck`,
the lowest score of an assigned unpinned pair; reviewer floors; total score minus the balance
penalty `balance * sum over reviewers of load * (load - 1) / 2`.

The institution rule and the senior rule together are not a network flow where a (paper,
institution) group mixes seniors and juniors (the two families of reviewer sets cross). There
each part of the group is first capped at m, a relaxation: if its optimum keeps the real rule,
it is optimal. Otherwise a greedy dive fixes how violated groups share their cap, and a branch
and bound over those shares (see `_solve_rules`) proves the result optimal or, when its budget
runs out on a large network, leaves the best open relaxation as a reported upper bound
(`Plan.bound`).

Seniors are a tier just below required coverage by default, not a hard rule: a venue with too
few seniors still gets its best plan, and the papers short of seniors are listed with a reason.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np

from review_alloc.flow import CostFlowResult, InfeasibleError, min_cost_flow
from review_alloc.model import Plan, Session
from review_alloc.model.plans import trusted_assignments, trusted_plan
from review_alloc.plan.checker import check_plan
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.fairness import coverage_flows, highest_threshold, score_thresholds
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.leads import LeadChoice, LeadState, lead_choice, lead_mask_warm
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.warmstart import same_cost_scale, warm_start_for
from review_alloc.plan.weights import SCORE_RESOLUTION

METHOD = "lexicographic min-cost flow (cost scaling; re-plans warm-started by primal-dual)"

OBJECTIVE_TIERS = ("required", "seniors", "coverage", "floors", "score")
"""Names of the values `tier_values` returns, highest tier first."""


@dataclass(frozen=True)
class PlanOutcome:
    """A checked plan with the network it came from and its dual certificate."""

    plan: Plan
    network: PlanNetwork
    potentials: np.ndarray
    leads: LeadChoice | None = None
    flow: np.ndarray | None = None
    """The optimal flow on `network`'s arcs, kept so that the next plan can start from it."""
    bottleneck: float | None = None
    """The bottleneck threshold (lowest allowed unpinned score) when the option is on."""
    relaxed_bound: dict[str, float] = field(default_factory=dict)
    """Tier values of the best open relaxation when the split search ran out of budget before
    proving the plan optimal, else {}."""
    loads_before_balance: np.ndarray | None = None
    """Per-reviewer loads of the same session planned with balance off (only when balancing)."""
    tiers: dict[str, float] = field(default_factory=dict)
    """The plan's tier values (see `tier_values`)."""
    lead_state: LeadState | None = None
    """The lead choice's solved state on a large venue, so that the next plan's starts warm."""

    @property
    def proven_optimal(self) -> bool:
        """True unless the relaxation bound is above the plan on some tier."""
        return not self.relaxed_bound or self.relaxed_bound == self.tiers


def tier_values(net: PlanNetwork, used: np.ndarray) -> dict[str, float]:
    """The objective's tier values of the pairs `used` (boolean per pair arc) in `net`."""
    loads = np.bincount(net.pair_reviewer[used], minlength=net.n_reviewers)
    counts = np.bincount(net.pair_paper[used], minlength=net.n_papers)
    minimum = net.capacities[net.required_arcs]
    reviews = minimum + net.capacities[net.extra_arcs]
    floor = np.bincount(
        net.floor_arc_reviewer, weights=net.capacities[net.floor_arcs], minlength=net.n_reviewers
    )
    in_senior = used & (net.pair_senior >= 0)
    seniors = np.bincount(net.pair_senior[in_senior], minlength=len(net.senior_paper))
    penalty = net.balance_step * float(np.sum(loads * (loads - 1) // 2)) / net.resolution
    return {
        "required": float(np.minimum(counts, minimum).sum()),
        "seniors": float(np.minimum(seniors, net.senior_need).sum()),
        "coverage": float(np.minimum(counts, reviews).sum()),
        "floors": float(np.minimum(loads, floor).sum()),
        "score": round(float(net.pair_score[used].sum()) - penalty, 6),
    }


def _run(session: Session, net: PlanNetwork, warm: PlanOutcome | None = None) -> CostFlowResult:
    """Solve one network; a hard rule that cannot be met becomes a PlanInputError."""
    start = None
    if warm is not None and warm.flow is not None and same_cost_scale(warm.network, net):
        start = warm_start_for(warm.network, warm.flow, warm.potentials, net)
    try:
        return min_cost_flow(
            net.n_nodes,
            net.tails,
            net.heads,
            net.capacities,
            net.costs,
            lower=net.lower,
            warm=start,
        )
    except InfeasibleError as error:
        if not net.senior_hard:
            raise PlanInputError(
                ["pins: the pinned pairs cannot all be kept together with the caps and limits"]
            ) from None
        side = np.asarray(error.source_side, dtype=bool)
        on_cut = [
            session.papers[int(i)].id
            for k, i in enumerate(net.senior_paper.tolist())
            if side[net.sink + 1 + k]
        ][:10]
        offered = np.bincount(
            net.pair_senior[net.pair_senior >= 0], minlength=len(net.senior_paper)
        )
        too_few = [
            f"{session.papers[int(i)].id} has {offered[k]} eligible seniors, needs "
            f"{net.senior_need[k]}"
            for k, i in enumerate(net.senior_paper.tolist())
            if offered[k] < net.senior_need[k]
        ][:10]
        if too_few:
            where = f" ({'; '.join(too_few)})"
        else:
            where = f" (papers on the failing cut: {', '.join(on_cut)})" if on_cut else ""
        raise PlanInputError(
            [
                "policy.senior_hard: the hard senior rule cannot be met with the eligible "
                f"seniors, their caps and the pins{where}; lower senior_min or make the rule a "
                "tier (senior_hard: false)"
            ]
        ) from None


def _violated_splits(
    session: Session, net: PlanNetwork, used: np.ndarray
) -> dict[tuple[int, str], tuple[int, int, int]]:
    """For relaxed mixed groups whose two parts together exceed the cap: (suggested senior
    share, least and most senior share the group's pins allow).

    The suggestion keeps the seniors, unless the paper keeps its senior need without them and
    the juniors' pairs score higher on average.
    """
    m = session.policy.max_per_institution
    if m is None or not net.relaxed_groups:
        return {}
    n_g = len(net.part_paper)
    inside = used & (net.pair_part >= 0)
    flow = np.bincount(net.pair_part[inside], minlength=n_g)
    gain = np.bincount(net.pair_part[inside], weights=net.pair_score[inside], minlength=n_g)
    pinned_in = np.bincount(net.pair_part[net.pair_pinned & (net.pair_part >= 0)], minlength=n_g)
    in_senior = used & (net.pair_senior >= 0)
    seniors = np.bincount(net.pair_senior[in_senior], minlength=len(net.senior_paper))
    senior_of_paper = {int(i): k for k, i in enumerate(net.senior_paper.tolist())}
    parts: dict[tuple[int, str], dict[int, int]] = {}
    for g in net.relaxed_groups:
        key = (int(net.part_paper[g]), net.part_institution[g])
        parts.setdefault(key, {})[int(net.part_senior[g])] = g
    chosen: dict[tuple[int, str], tuple[int, int, int]] = {}
    for key, by_part in parts.items():
        s, j = by_part.get(1), by_part.get(0)
        used_s = int(flow[s]) if s is not None else 0
        used_j = int(flow[j]) if j is not None else 0
        if used_s + used_j <= m:
            continue
        pinned_s = int(pinned_in[s]) if s is not None else 0
        pinned_j = int(pinned_in[j]) if j is not None else 0
        k = min(used_s, m - pinned_j)
        node = senior_of_paper.get(key[0])
        others = int(seniors[node]) - used_s if node is not None else 0
        if (
            node is not None
            and others >= int(net.senior_need[node])
            and used_j
            and used_s
            and gain[j] / used_j > gain[s] / used_s
        ):
            k = max(pinned_s, m - min(used_j, m))
        chosen[key] = (k, pinned_s, m - pinned_j)
    return chosen


SEARCH_BUDGET = 150_000
"""Arcs times solves the institution split search may spend beyond its first, greedy plan
(a network larger than this gets the greedy plan and the bound, without a search)."""


@dataclass
class _Node:
    """A solved network of the split search."""

    net: PlanNetwork
    result: CostFlowResult
    split: dict[tuple[int, str], int]
    violated: dict[tuple[int, str], tuple[int, int, int]]


def _solve_split(
    session: Session,
    threshold: float | None,
    split: dict[tuple[int, str], int],
    conflicts: ConflictSet,
    earlier: Plan | None,
    warm: PlanOutcome | None = None,
) -> _Node:
    net = build_network(
        session,
        institution_split=split,
        threshold=threshold,
        conflicts=conflicts,
        earlier=earlier,
    )
    result = _run(session, net, warm)
    used = result.flow[net.pair_arcs] > 0
    return _Node(net, result, split, _violated_splits(session, net, used))


def _solve_rules(
    session: Session,
    threshold: float | None,
    split: dict[tuple[int, str], int],
    conflicts: ConflictSet,
    earlier: Plan | None = None,
    warm: PlanOutcome | None = None,
) -> tuple[PlanNetwork, CostFlowResult, dict[tuple[int, str], int], dict[str, float]]:
    """Solve, with mixed institution groups split exactly by branch and bound where needed.

    A relaxed network (mixed groups' parts capped at m each) is solved first; if its optimum
    keeps the institution rule it is optimal. Otherwise a greedy dive (splitting every violated
    group at once) gives a plan, and a depth-first branch and bound over one group's senior
    share k = 0..m at a time, pruned by the min cost (the whole lexicographic objective in one
    integer; every split network has the same weights), proves it optimal or improves it within
    `SEARCH_BUDGET`. Returns the network, its result, its split, and the tier values of the best
    remaining bound ({} when the plan is proven optimal).
    """
    root = _solve_split(session, threshold, dict(split), conflicts, earlier, warm)
    if not root.violated:
        return root.net, root.result, root.split, {}
    best = root
    while best.violated:
        merged = {**best.split, **{key: k for key, (k, _, _) in best.violated.items()}}
        best = _solve_split(session, threshold, merged, conflicts, earlier)
    work = 0
    stack: list[tuple[int, dict[str, float], dict[tuple[int, str], int], _Node | None]] = []

    def push_children(node: _Node) -> None:
        key, (guess, low, high) = next(iter(node.violated.items()))
        bound = tier_values(node.net, node.result.flow[node.net.pair_arcs] > 0)
        order = [k for k in range(high, low - 1, -1) if k != guess] + [guess]
        for k in order:
            stack.append((node.result.cost, bound, {**node.split, key: k}, None))

    push_children(root)
    while stack:
        parent_cost, _, child_split, _ = stack[-1]
        if parent_cost >= best.result.cost:
            stack.pop()
            continue
        if work + len(root.net.tails) > SEARCH_BUDGET:
            break
        stack.pop()
        node = _solve_split(session, threshold, child_split, conflicts, earlier)
        work += len(node.net.tails)
        if node.result.cost >= best.result.cost:
            continue
        if not node.violated:
            best = node
        else:
            push_children(node)
    open_nodes = [(cost, tiers) for cost, tiers, _, _ in stack if cost < best.result.cost]
    bound = min(open_nodes, key=lambda x: x[0])[1] if open_nodes else {}
    return best.net, best.result, best.split, bound


def _bottleneck(
    session: Session,
    net: PlanNetwork,
    base: dict[str, float],
    split: dict[tuple[int, str], int],
    earlier: Plan | None = None,
) -> tuple[float | None, PlanNetwork, CostFlowResult, dict[tuple[int, str], int], dict]:
    """The highest score threshold keeping required coverage, seniors and coverage optimal."""
    thresholds = score_thresholds(net)
    if len(thresholds) == 0:
        result = _run(session, net)
        return None, net, result, split, {}
    # The max-flow pruning runs on the relaxed network, so it never rejects a reachable threshold.
    relaxed = build_network(session, conflicts=net.conflicts) if split else net
    target = coverage_flows(relaxed, None)
    top = highest_threshold(thresholds, lambda t: coverage_flows(relaxed, t) == target)

    def solved(t: float) -> tuple:
        return _solve_rules(session, t, {}, net.conflicts, earlier)

    def keeps(values: dict[str, float]) -> bool:
        return all(values[k] >= base[k] for k in ("required", "seniors", "coverage"))

    attempt = solved(float(thresholds[top]))
    if not keeps(tier_values(attempt[0], attempt[1].flow[attempt[0].pair_arcs] > 0)):
        cache: dict[int, tuple] = {}

        def reaches(t: float) -> bool:
            k = int(np.searchsorted(thresholds, t))
            cache[k] = solved(t)
            net_k, res_k = cache[k][0], cache[k][1]
            return keeps(tier_values(net_k, res_k.flow[net_k.pair_arcs] > 0))

        top = highest_threshold(thresholds[:top], reaches)
        attempt = cache.get(top) or solved(float(thresholds[top]))
    net_t, result_t, split_t, bound_t = attempt
    return float(thresholds[top]), net_t, result_t, split_t, bound_t


def _decode(
    session: Session,
    net: PlanNetwork,
    result: CostFlowResult,
    now: datetime,
    warm_leads: LeadState | None = None,
) -> tuple[Plan, LeadChoice | None, LeadState | None]:
    """The plan of an optimal flow, its leads chosen when the policy asks for them."""
    chosen = np.flatnonzero(result.flow[net.pair_arcs] > 0)
    reviewer = net.pair_reviewer[chosen]
    paper = net.pair_paper[chosen]
    score = net.pair_score[chosen]
    order = np.lexsort((reviewer, paper))
    reviewer, paper, score = reviewer[order], paper[order], score[order]
    leads = None
    state = None
    lead = np.zeros(len(paper), dtype=bool)
    if session.policy.max_leads > 0:
        lead, state = lead_mask_warm(session, reviewer, paper, score, warm_leads)
        leads = lead_choice(session, reviewer, paper, lead)
    paper_ids = [p.id for p in session.papers]
    reviewer_ids = [r.id for r in session.reviewers]
    assignments = trusted_assignments(
        [paper_ids[i] for i in paper.tolist()],
        [reviewer_ids[j] for j in reviewer.tolist()],
        score.tolist(),
        lead.tolist(),
    )
    plan = trusted_plan(assignments, plan_figures(session, reviewer, paper, score), now, METHOD)
    return plan, leads, state


def make_plan(
    session: Session,
    *,
    fresh: bool = False,
    earlier: Plan | None = None,
    now: datetime | None = None,
    warm: PlanOutcome | None = None,
) -> PlanOutcome:
    """Solve the session's lexicographic objective exactly and return the checked plan.

    A re-plan keeps the pairs of `earlier` (default: the session's current plan) as a tier just
    above score, so it moves as few reviews as coverage and floors allow; `fresh` ignores it.
    With `warm` (the outcome of an earlier plan, before a small change such as a withdrawal, a
    cap change or a new conflict) the solver restarts from that plan's flow and potentials; the
    result is just as optimal and checked.
    """
    keep_from = None if fresh else (earlier if earlier is not None else session.plan)
    net, result, split, bound = _solve_rules(
        session, None, {}, conflict_pairs(session), keep_from, warm
    )
    bottleneck = None
    if session.policy.bottleneck:
        base = tier_values(net, result.flow[net.pair_arcs] > 0)
        bottleneck, net, result, split, bound = _bottleneck(session, net, base, split, keep_from)
    used = result.flow[net.pair_arcs] > 0
    final = tier_values(net, used)
    relaxed = bound if bound != final else {}
    plan, leads, lead_state = _decode(
        session, net, result, now or datetime.now(UTC), warm.lead_state if warm else None
    )
    if net.kept is not None or net.resolution != SCORE_RESOLUTION:
        plan = plan.model_copy(
            update={
                "method": plan.method
                + (", keeping earlier pairs" if net.kept is not None else "")
                + (
                    f", scores in steps of 1/{net.resolution} to fit the tier weights"
                    if net.resolution != SCORE_RESOLUTION
                    else ""
                )
            }
        )
    check_plan(session, plan, result.potentials, network=net)
    before = None
    if session.policy.balance > 0:
        plain = session.model_copy(
            update={"policy": session.policy.model_copy(update={"balance": 0.0, "max_leads": 0})}
        )
        other = make_plan(plain, fresh=fresh, earlier=earlier, now=now)
        before = np.bincount(
            [session.reviewer_index()[a.reviewer] for a in other.plan.assignments],
            minlength=len(session.reviewers),
        )
    extra = {
        "checked": True,
        "bottleneck": bottleneck,
        "loads_before_balance": None if before is None else [int(x) for x in before],
        "bound": relaxed or None,
    }
    return PlanOutcome(
        plan=plan.model_copy(update=extra),
        network=net,
        potentials=result.potentials,
        flow=result.flow,
        leads=leads,
        bottleneck=bottleneck,
        relaxed_bound=relaxed,
        loads_before_balance=before,
        tiers=final,
        lead_state=lead_state,
    )
