"""The independent plan checker: every hard rule, the figures, and the optimality certificate.

It trusts nothing the engine returned except the dual potentials, and those it verifies: it
rebuilds the arc flows from the plan's assignments alone and checks the reduced-cost conditions.
"""

from __future__ import annotations

import numpy as np

from review_alloc.flow import FlowCheckError, check_cost_certificate
from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import conflict_pairs, normalise_institution
from review_alloc.plan.eligibility import rule_failures
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.figures import (
    active_demands,
    assignment_indices,
    loads_and_counts,
    plan_figures,
)
from review_alloc.plan.network import PlanNetwork, build_network, paper_senior_need
from review_alloc.plan.overload import overload_allowances

_MAX_LISTED = 20


def check_plan(
    session: Session,
    plan: Plan,
    potentials: np.ndarray | None,
    *,
    network: PlanNetwork | None = None,
    earlier: Plan | None = None,
) -> None:
    """Raise PlanCheckError unless the plan keeps every rule and, given potentials, is optimal.

    A re-plan's certificate is checked against the network with `earlier`'s keep tier.
    """
    problems = _hard_rule_problems(session, plan)
    if not problems and potentials is not None:
        if network is None:
            network = build_network(session, earlier=earlier)
        problems = _certificate_problems(session, plan, potentials, network)
    if problems:
        raise PlanCheckError(problems[:_MAX_LISTED])


def _hard_rule_problems(session: Session, plan: Plan) -> list[str]:
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    problems: list[str] = []
    for k, a in enumerate(plan.assignments):
        if a.paper not in paper_at:
            problems.append(f"assignment {k}: unknown paper {a.paper!r}")
        if a.reviewer not in reviewer_at:
            problems.append(f"assignment {k}: unknown reviewer {a.reviewer!r}")
    if problems:
        return problems

    reviewer, paper, score = assignment_indices(session, plan.assignments)
    n_p = max(len(session.papers), 1)
    keys = reviewer * n_p + paper
    unique, seen = np.unique(keys, return_counts=True)
    for key in unique[seen > 1]:
        problems.append(
            f"pair ({_rid(session, key, n_p)}, {_pid(session, key, n_p)}) is assigned twice"
        )

    conflicts = conflict_pairs(session)
    reasons = conflicts.reason_of()
    for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
        if (j, i) in reasons:
            problems.append(
                f"conflicted pair ({session.reviewers[j].id}, {session.papers[i].id}) is "
                f"assigned: {reasons[(j, i)]}"
            )
        if session.reviewers[j].withdrawn:
            problems.append(f"withdrawn reviewer {session.reviewers[j].id} is assigned")
        if session.papers[i].withdrawn:
            problems.append(f"withdrawn paper {session.papers[i].id} is assigned")
    blocked = {(b.reviewer, b.paper) for b in session.blocks}
    assigned = {(a.reviewer, a.paper) for a in plan.assignments}
    for a in plan.assignments:
        if (a.reviewer, a.paper) in blocked:
            problems.append(f"blocked pair ({a.reviewer}, {a.paper}) is assigned")
    for pin in session.pins:
        if (pin.reviewer, pin.paper) not in assigned:
            problems.append(f"pinned pair ({pin.reviewer}, {pin.paper}) is missing")

    table = session.scores
    s_keys = table.reviewer.astype(np.int64) * n_p + table.paper
    order = np.argsort(s_keys)
    s_keys, s_values = s_keys[order], table.value[order]
    pos = np.clip(np.searchsorted(s_keys, keys), 0, max(len(s_keys) - 1, 0))
    has_score = (s_keys[pos] == keys) if len(s_keys) else np.zeros(len(keys), dtype=bool)
    expected = np.where(has_score, s_values[pos] if len(s_keys) else 0.0, 0.0)
    pinned = {(p.reviewer, p.paper) for p in session.pins}
    for k in np.flatnonzero(~np.isclose(expected, score, rtol=0, atol=1e-9)):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) has score {a.score}, session says {expected[k]}"
        )
    if session.policy.unscored == "exclude":
        for k in np.flatnonzero(~has_score):
            a = plan.assignments[k]
            if (a.reviewer, a.paper) not in pinned:
                problems.append(f"unscored pair ({a.reviewer}, {a.paper}) is assigned")

    loads, counts = loads_and_counts(session, reviewer, paper)
    reviews, _, cap, _ = active_demands(session)
    allowed = cap + overload_allowances(session)
    for j in np.flatnonzero(loads > allowed):
        problems.append(
            f"reviewer {session.reviewers[j].id} has load {loads[j]} above cap {cap[j]}"
            + (f" and allowed overload {allowed[j] - cap[j]}" if allowed[j] > cap[j] else "")
        )
    for i in np.flatnonzero(counts > reviews):
        problems.append(f"paper {session.papers[i].id} has {counts[i]} reviews, above {reviews[i]}")

    problems += _constraint_problems(session, plan, reviewer, paper, score)
    figures = plan_figures(session, reviewer, paper, score)
    if figures != plan.figures:
        problems.append(f"plan figures {plan.figures} differ from recomputed {figures}")
    return problems


def _constraint_problems(
    session: Session, plan: Plan, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray
) -> list[str]:
    """The policy's optional rules, read from the session's rows, not from the network."""
    policy = session.policy
    problems: list[str] = []
    pinned = {(p.reviewer, p.paper) for p in session.pins}
    unpinned = np.array([(a.reviewer, a.paper) not in pinned for a in plan.assignments], dtype=bool)
    low, no_topic = rule_failures(session, reviewer, paper, score)
    for k in np.flatnonzero(low & unpinned):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) scores {a.score:g}, below min_score "
            f"{policy.min_score:g}"
        )
    for k in np.flatnonzero(no_topic & unpinned):
        a = plan.assignments[k]
        problems.append(f"pair ({a.reviewer}, {a.paper}) shares no topic")
    if policy.max_per_institution is not None:
        names = [normalise_institution(r.institution) for r in session.reviewers]
        per: dict[tuple[int, str], int] = {}
        for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
            if names[j]:
                per[(i, names[j])] = per.get((i, names[j]), 0) + 1
        for (i, name), c in sorted(per.items()):
            if c > policy.max_per_institution:
                problems.append(
                    f"paper {session.papers[i].id} has {c} reviewers from {name!r}, above "
                    f"max_per_institution {policy.max_per_institution}"
                )
    if policy.senior_hard:
        need = paper_senior_need(session)
        senior = session.reviewer_senior_array()
        have = np.bincount(paper[senior[reviewer]], minlength=len(session.papers))
        for i in np.flatnonzero(have < need):
            problems.append(
                f"paper {session.papers[i].id} has {have[i]} senior reviewers, the hard rule "
                f"needs {need[i]}"
            )
    leads = np.array([a.lead for a in plan.assignments], dtype=bool)
    if leads.any():
        per_lead = np.bincount(reviewer[leads], minlength=len(session.reviewers))
        for j in np.flatnonzero(per_lead > policy.max_leads):
            problems.append(
                f"reviewer {session.reviewers[j].id} leads {per_lead[j]} papers, above "
                f"max_leads {policy.max_leads}"
            )
        per_paper = np.bincount(paper[leads], minlength=len(session.papers))
        for i in np.flatnonzero(per_paper > 1):
            problems.append(f"paper {session.papers[i].id} has {per_paper[i]} leads")
    return problems


def _certificate_problems(
    session: Session, plan: Plan, potentials: np.ndarray, network: PlanNetwork | None
) -> list[str]:
    net = network if network is not None else build_network(session)
    reviewer, paper, _ = assignment_indices(session, plan.assignments)
    n_p = max(net.n_papers, 1)
    net_keys = net.pair_reviewer * n_p + net.pair_paper
    order = np.argsort(net_keys)
    keys = reviewer * n_p + paper
    pos = np.clip(np.searchsorted(net_keys[order], keys), 0, max(len(net_keys) - 1, 0))
    if len(keys) and (len(net_keys) == 0 or np.any(net_keys[order][pos] != keys)):
        return ["the plan uses a pair that is not eligible in the session's network"]

    pair_flow = np.zeros(len(net_keys), dtype=np.int64)
    pair_flow[order[pos]] = 1
    flow = arc_flows(net, pair_flow)
    try:
        check_cost_certificate(
            net.n_nodes,
            net.tails,
            net.heads,
            net.capacities,
            net.costs,
            flow,
            potentials,
            lower=net.lower,
        )
    except FlowCheckError as error:
        return [f"optimality certificate rejected: {error}"]
    return []


def _fill_units(
    owner: np.ndarray, caps: np.ndarray, remaining: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Fill a block of source arcs in order, per reviewer, up to what each still has to carry."""
    if len(owner) == 0:
        return np.zeros(0, np.int64), remaining
    cum = np.cumsum(caps)
    owner_start = np.zeros(len(remaining) + 1, np.int64)
    np.add.at(owner_start, owner + 1, caps)
    before = cum - caps - np.cumsum(owner_start)[owner]
    flow = np.clip(remaining[owner] - before, 0, caps)
    left = remaining - np.bincount(owner, weights=flow, minlength=len(remaining)).astype(np.int64)
    return flow.astype(np.int64), left


def arc_flows(net: PlanNetwork, pair_flow: np.ndarray) -> np.ndarray:
    """Every arc's flow implied by the pair arcs' flows alone (each tiered block filled in its
    cost order), so the certificate is checked on a flow the engine did not produce."""
    flow = np.zeros(len(net.tails), dtype=np.int64)
    flow[net.pair_arcs] = pair_flow
    used = pair_flow > 0
    loads = np.bincount(net.pair_reviewer[used], minlength=net.n_reviewers).astype(np.int64)
    counts = np.bincount(net.pair_paper[used], minlength=net.n_papers).astype(np.int64)
    floor_flow, left = _fill_units(net.floor_arc_reviewer, net.capacities[net.floor_arcs], loads)
    flow[net.floor_arcs] = floor_flow
    flow[net.rest_arcs], over = _fill_units(
        net.rest_arc_reviewer, net.capacities[net.rest_arcs], left
    )
    flow[net.overload_arcs] = over[net.overload_reviewers]
    required_cap = net.capacities[net.required_arcs]
    flow[net.required_arcs] = np.minimum(counts, required_cap)
    flow[net.extra_arcs] = counts - flow[net.required_arcs]
    flow[net.return_arc] = int(counts.sum())
    in_senior = used & (net.pair_senior >= 0)
    seniors = np.bincount(net.pair_senior[in_senior], minlength=len(net.senior_paper)).astype(
        np.int64
    )
    flow[net.senior_required_arcs] = np.minimum(seniors, net.senior_need)
    flow[net.senior_rest_arcs] = seniors - flow[net.senior_required_arcs]
    in_group = used & (net.pair_group >= 0)
    flow[net.group_arcs] = np.bincount(
        net.pair_group[in_group], minlength=len(net.group_paper)
    ).astype(np.int64)
    return flow


def _rid(session: Session, key: int, n_p: int) -> str:
    return session.reviewers[int(key) // n_p].id


def _pid(session: Session, key: int, n_p: int) -> str:
    return session.papers[int(key) % n_p].id
