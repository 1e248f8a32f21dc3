"""The independent plan checker: every hard rule, the figures, and the optimality certificate.

It trusts nothing the engine returned except the dual potentials, and those it verifies: it
rebuilds the arc flows from the plan's assignments alone and checks the reduced-cost conditions.
It reads the chair's rules from the session's rows itself, never through `plan.rules`, so that
a mistake there cannot pass unseen (the tests compare the two derivations).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.flow import FlowCheckError, check_cost_certificate
from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs, normalise_institution
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.figures import (
    active_demands,
    assignment_arrays,
    loads_and_counts,
    plan_figures,
)
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import contains, key_order, pair_keys, positions_in
from review_alloc.plan.seniors import paper_senior_need

_MAX_LISTED = 20


def check_plan(
    session: Session,
    plan: Plan,
    potentials: np.ndarray | None,
    *,
    network: PlanNetwork | None = None,
    earlier: Plan | None = None,
    conflicts: ConflictSet | None = None,
) -> ConflictSet:
    """Raise PlanCheckError unless the plan keeps every rule and, given potentials, is optimal.

    A re-plan's certificate is checked against the network with `earlier`'s keep tier.
    `conflicts` is the set an earlier check derived for a session whose declared conflicts and
    the attributes conflicts are inferred from are the same (the caller knows: a re-plan on a
    patched network); the set this check used is returned for the next one.
    """
    arrays = assignment_arrays(session, plan.assignments)
    if conflicts is None:
        conflicts = conflict_pairs(session)
    problems = _hard_rule_problems(session, plan, *arrays, conflicts=conflicts)
    if not problems and potentials is not None:
        if network is None:
            network = build_network(session, earlier=earlier)
        problems = _certificate_problems(arrays[0], arrays[1], potentials, network)
    if problems:
        raise PlanCheckError(problems[:_MAX_LISTED])
    return conflicts


def _positions(keys: np.ndarray, table: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """`positions_in` for keys in any order: a plan's rows go by paper, the tables by reviewer,
    and a binary search of millions of keys is several times faster with its needles sorted
    (each search starts where the last one ended, in cache)."""
    order = np.argsort(keys, kind="stable")
    found, at = positions_in(keys[order], table)
    out_found = np.empty_like(found)
    out_at = np.empty_like(at)
    out_found[order] = found
    out_at[order] = at
    return out_found, out_at


def _rule_keys(session: Session, rows: list, n_p: int) -> np.ndarray:
    """Pair keys of pin or block rows whose ids the session knows (others cannot match)."""
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    known = [
        (reviewer_at[r.reviewer], paper_at[r.paper])
        for r in rows
        if r.reviewer in reviewer_at and r.paper in paper_at
    ]
    if not known:
        return np.zeros(0, dtype=np.int64)
    j, i = np.array(known, dtype=np.int64).T
    return pair_keys(j, i, n_p)


@dataclass(frozen=True)
class PairFlags:
    """Per assignment, each pair rule it breaks, as the checker reads the session's rows.

    `unscored`, `below_min_score` and `no_shared_topic` already spare pinned pairs.
    """

    conflicted: np.ndarray
    gone_reviewer: np.ndarray
    gone_paper: np.ndarray
    blocked: np.ndarray
    unscored: np.ndarray
    below_min_score: np.ndarray
    no_shared_topic: np.ndarray
    pinned: np.ndarray
    expected_score: np.ndarray
    """The session's score of each pair (0 where unscored)."""
    conflicts: ConflictSet

    def any(self) -> np.ndarray:
        """Per pair: does it break any pair rule?"""
        return (
            self.conflicted
            | self.gone_reviewer
            | self.gone_paper
            | self.blocked
            | self.unscored
            | self.below_min_score
            | self.no_shared_topic
        )


def pair_flags(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    conflicts: ConflictSet | None = None,
) -> PairFlags:
    """The pair rules each (reviewer, paper, score) breaks, derived by the checker alone
    (`conflicts`: the session's conflict set when already derived)."""
    reviewer = np.asarray(reviewer, dtype=np.int64)
    paper = np.asarray(paper, dtype=np.int64)
    score = np.asarray(score, dtype=np.float64)
    n_p = max(len(session.papers), 1)
    keys = pair_keys(reviewer, paper, n_p)
    if conflicts is None:
        conflicts = conflict_pairs(session)
    gone_r = np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    gone_p = np.array([p.withdrawn for p in session.papers], dtype=bool)
    table = session.scores
    s_keys, s_values = key_order(pair_keys(table.reviewer, table.paper, n_p), table.value)
    has_score, pos = _positions(keys, s_keys)
    expected = np.where(has_score, s_values[pos] if len(s_keys) else 0.0, 0.0)
    pinned = contains(keys, _rule_keys(session, session.pins, n_p))
    policy = session.policy
    low = np.zeros(len(keys), dtype=bool)
    if policy.min_score is not None:
        low = score < policy.min_score - 1e-12
    no_topic = np.zeros(len(keys), dtype=bool)
    if policy.require_shared_topic:
        no_topic = ~_shares_topic(session, reviewer, paper)
    return PairFlags(
        conflicted=contains(keys, conflicts.keys(n_p)),
        gone_reviewer=gone_r[reviewer],
        gone_paper=gone_p[paper],
        blocked=contains(keys, _rule_keys(session, session.blocks, n_p)),
        unscored=~has_score & ~pinned & (policy.unscored == "exclude"),
        below_min_score=low & ~pinned,
        no_shared_topic=no_topic & ~pinned,
        pinned=pinned,
        expected_score=expected,
        conflicts=conflicts,
    )


def _shares_topic(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """Per pair: does the paper have a topic the reviewer has (case and spaces folded)?

    Whole-array work: one (reviewer, topic) key per reviewer topic, sorted; each pair is
    repeated once per topic of its paper and looked up among those keys.
    """
    code: dict[str, int] = {}

    def codes(topics: list[str]) -> list[int]:
        return sorted({code.setdefault(" ".join(t.split()).casefold(), len(code)) for t in topics})

    paper_codes = [codes(p.topics) for p in session.papers]
    reviewer_codes = [codes(r.topics) for r in session.reviewers]
    width = max(len(code), 1)
    known = np.sort(
        np.array(
            [j * width + t for j, ts in enumerate(reviewer_codes) for t in ts], dtype=np.int64
        )
    )
    sizes = np.array([len(ts) for ts in paper_codes], dtype=np.int64)
    flat = np.array([t for ts in paper_codes for t in ts], dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(sizes)])
    per_pair = sizes[paper] if len(paper) else np.zeros(0, dtype=np.int64)
    owner = np.repeat(np.arange(len(paper)), per_pair)
    offset = np.arange(len(owner)) - np.repeat(np.cumsum(per_pair) - per_pair, per_pair)
    topic = flat[starts[paper[owner]] + offset] if len(owner) else owner
    hit = contains(reviewer[owner] * width + topic, known)
    return np.bincount(owner[hit], minlength=len(paper)) > 0


def _hard_rule_problems(
    session: Session,
    plan: Plan,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    *,
    conflicts: ConflictSet | None = None,
) -> list[str]:
    problems: list[str] = []
    # Every test below is on whole arrays: a large plan has tens of thousands of assignments.
    for k in np.flatnonzero((paper < 0) | (reviewer < 0)).tolist():
        a = plan.assignments[k]
        if paper[k] < 0:
            problems.append(f"assignment {k}: unknown paper {a.paper!r}")
        if reviewer[k] < 0:
            problems.append(f"assignment {k}: unknown reviewer {a.reviewer!r}")
    if problems:
        return problems

    n_p = max(len(session.papers), 1)
    keys = pair_keys(reviewer, paper, n_p)
    unique, seen = np.unique(keys, return_counts=True)
    for key in unique[seen > 1]:
        problems.append(
            f"pair ({_rid(session, key, n_p)}, {_pid(session, key, n_p)}) is assigned twice"
        )

    flags = pair_flags(session, reviewer, paper, score, conflicts)
    if (flags.conflicted | flags.gone_reviewer | flags.gone_paper).any():
        reasons = flags.conflicts.reason_of()
        for k in np.flatnonzero(
            flags.conflicted | flags.gone_reviewer | flags.gone_paper
        ).tolist():
            j, i = int(reviewer[k]), int(paper[k])
            if flags.conflicted[k]:
                problems.append(
                    f"conflicted pair ({session.reviewers[j].id}, {session.papers[i].id}) is "
                    f"assigned: {reasons[(j, i)]}"
                )
            if flags.gone_reviewer[k]:
                problems.append(f"withdrawn reviewer {session.reviewers[j].id} is assigned")
            if flags.gone_paper[k]:
                problems.append(f"withdrawn paper {session.papers[i].id} is assigned")
    for k in np.flatnonzero(flags.blocked).tolist():
        a = plan.assignments[k]
        problems.append(f"blocked pair ({a.reviewer}, {a.paper}) is assigned")
    if session.pins:
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        pin_keys = np.array(
            [
                reviewer_at[p.reviewer] * n_p + paper_at[p.paper]
                if p.reviewer in reviewer_at and p.paper in paper_at
                else -1
                for p in session.pins
            ],
            dtype=np.int64,
        )
        for k in np.flatnonzero(~contains(pin_keys, keys)).tolist():
            pin = session.pins[k]
            problems.append(f"pinned pair ({pin.reviewer}, {pin.paper}) is missing")

    expected = flags.expected_score
    for k in np.flatnonzero(~np.isclose(expected, score, rtol=0, atol=1e-9)):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) has score {a.score}, session says {expected[k]}"
        )
    for k in np.flatnonzero(flags.unscored):
        a = plan.assignments[k]
        problems.append(f"unscored pair ({a.reviewer}, {a.paper}) is assigned")

    loads, counts = loads_and_counts(session, reviewer, paper)
    demands = active_demands(session)
    reviews, _, cap, _ = demands
    allowed = cap + overload_allowances(session)
    for j in np.flatnonzero(loads > allowed):
        problems.append(
            f"reviewer {session.reviewers[j].id} has load {loads[j]} above cap {cap[j]}"
            + (f" and allowed overload {allowed[j] - cap[j]}" if allowed[j] > cap[j] else "")
        )
    for i in np.flatnonzero(counts > reviews):
        problems.append(f"paper {session.papers[i].id} has {counts[i]} reviews, above {reviews[i]}")

    problems += _constraint_problems(session, plan, reviewer, paper, flags)
    figures = plan_figures(session, reviewer, paper, score, demands=demands)
    if figures != plan.figures:
        problems.append(f"plan figures {plan.figures} differ from recomputed {figures}")
    return problems


def _constraint_problems(
    session: Session,
    plan: Plan,
    reviewer: np.ndarray,
    paper: np.ndarray,
    flags: PairFlags,
) -> list[str]:
    """The policy's optional rules, read from the session's rows, not from the network."""
    policy = session.policy
    problems: list[str] = []
    for k in np.flatnonzero(flags.below_min_score):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) scores {a.score:g}, below min_score "
            f"{policy.min_score:g}"
        )
    for k in np.flatnonzero(flags.no_shared_topic):
        a = plan.assignments[k]
        problems.append(f"pair ({a.reviewer}, {a.paper}) shares no topic")
    if policy.max_per_institution is not None:
        names = [normalise_institution(r.institution) for r in session.reviewers]
        known = sorted(set(names) - {""})
        code_of = {name: k for k, name in enumerate(known)}
        code = np.array([code_of.get(name, -1) for name in names], dtype=np.int64)
        mine = code[reviewer] >= 0
        groups, per = np.unique(
            paper[mine] * max(len(known), 1) + code[reviewer[mine]], return_counts=True
        )
        # Sorted by (paper, institution name), as the codes follow the names' order.
        for group, c in zip(groups.tolist(), per.tolist(), strict=True):
            if c > policy.max_per_institution:
                i, name = divmod(group, max(len(known), 1))
                problems.append(
                    f"paper {session.papers[i].id} has {c} reviewers from {known[name]!r}, "
                    f"above max_per_institution {policy.max_per_institution}"
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
    leads = np.fromiter((a.lead for a in plan.assignments), dtype=bool, count=len(paper))
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
    reviewer: np.ndarray, paper: np.ndarray, potentials: np.ndarray, net: PlanNetwork
) -> list[str]:
    n_p = max(net.n_papers, 1)
    net_keys = pair_keys(net.pair_reviewer, net.pair_paper, n_p)
    # The builder emits pairs in key order; sort only a network that was built otherwise.
    increasing = len(net_keys) < 2 or bool(np.all(net_keys[1:] > net_keys[:-1]))
    order = np.arange(len(net_keys)) if increasing else np.argsort(net_keys)
    found, pos = _positions(pair_keys(reviewer, paper, n_p), net_keys[order])
    if not found.all():
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
