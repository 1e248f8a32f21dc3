"""The checker's incremental path (a re-plan's check built on the previous check's state) must
reach the full check's verdict on every plan: accept what it accepts, reject what it rejects.

The full check itself is compared with OR-Tools and HiGHS in tests/plan/test_patch.py and
tests/plan/test_replan_random.py; here each incremental verdict is compared with the full one
on the same inputs, on real re-plans and on re-plans corrupted on purpose. The certificate
conditions broken on purpose are the reduced-cost optimality conditions of min-cost flow
(an arc with room and negative reduced cost, or flow above its lower bound and positive
reduced cost, shows a cheaper flow).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from review_alloc.model import Conflict, Plan, Session
from review_alloc.plan import make_plan
from review_alloc.plan.checker import CheckState, _same_arcs, check_plan, pair_flags
from review_alloc.plan.errors import PlanCheckError, PlanInputError
from review_alloc.plan.figures import active_demands, assignment_arrays, plan_figures
from review_alloc.plan.solve import PlanOutcome
from review_alloc.workspace import Workspace
from tests.plan.test_patch import _change, _rules_session
from tests.plan.test_planner import random_session


def _with_rows(session: Session, plan: Plan, rows: list) -> Plan:
    """The plan holding `rows`, with its figures recomputed so that only the rows are wrong."""
    j, i, s = assignment_arrays(session, rows)
    figures = plan_figures(session, j, i, s, demands=active_demands(session))
    return plan.model_copy(update={"assignments": rows, "figures": figures})


def _verdict(
    session: Session,
    plan: Plan,
    potentials: np.ndarray,
    out: PlanOutcome,
    base: CheckState | None,
) -> str | None:
    """None when the check passes, else its message."""
    try:
        check_plan(session, plan, potentials, network=out.network, base=base)
    except PlanCheckError as error:
        return str(error)
    return None


def _agree(
    session: Session, plan: Plan, potentials: np.ndarray, out: PlanOutcome, base: CheckState
) -> bool:
    """Assert both paths reach the same verdict; True when they reject."""
    full = _verdict(session, plan, potentials, out, None)
    quick = _verdict(session, plan, potentials, out, base)
    assert (full is None) == (quick is None), (full, quick)
    return full is not None


def _replans(seed: int) -> list[tuple[Session, PlanOutcome, PlanOutcome]]:
    """(session, earlier outcome, patched re-plan) after random changes a patch follows."""
    rng = np.random.default_rng(4400 + seed)
    if seed < 25:
        session = random_session(4500 + seed, unscored="exclude" if seed % 2 else "zero")
    else:
        session = _rules_session(seed)
    ws = Workspace(session)
    prev = ws.solve(fresh=seed % 3 == 0)
    found = []
    for _ in range(4):
        _change(ws, rng)
        try:
            out = make_plan(ws.session, earlier=ws.earlier_plan(), warm=prev)
        except PlanInputError:
            return found
        if out.patched:
            found.append((ws.session, prev, out))
        prev = ws.solve()
    return found


@pytest.mark.parametrize("seed", range(40))
def test_the_incremental_check_agrees_with_the_full_check(seed: int) -> None:
    rng = np.random.default_rng(4600 + seed)
    for session, prev, out in _replans(seed):
        base = prev.check_state
        assert base is not None and base.certified is not None
        assert _same_arcs(out.network, base.certified.network)
        # The re-plan itself: both accept.
        assert not _agree(session, out.plan, out.potentials, out, base)
        # Potentials moved on one node, by one step or by many.
        for step in (1, -1, 1000):
            pot = out.potentials.copy()
            pot[int(rng.integers(len(pot)))] += step
            _agree(session, out.plan, pot, out, base)
        # The earlier plan under the new potentials, and the new plan under the earlier ones.
        _agree(session, prev.plan, out.potentials, out, base)
        _agree(session, out.plan, prev.potentials, out, base)
        rows = list(out.plan.assignments)
        if rows:
            # One row dropped, and one row's paper moved to another paper.
            k = int(rng.integers(len(rows)))
            _agree(session, _with_rows(session, out.plan, rows[:k] + rows[k + 1 :]),
                   out.potentials, out, base)
            _agree(session, _with_rows(session, out.plan, rows + [_moved(session, rows[k], rng)]),
                   out.potentials, out, base)


def _moved(session: Session, row, rng: np.random.Generator):  # noqa: ANN001, ANN202
    """The row for another paper, with the session's score of that pair."""
    i = int(rng.integers(len(session.papers)))
    j = session.reviewer_index()[row.reviewer]
    flags = pair_flags(session, np.array([j]), np.array([i]), np.zeros(1))
    return row.model_copy(
        update={"paper": session.papers[i].id, "score": float(flags.expected_score[0]),
                "lead": False}
    )


def test_the_incremental_path_runs_on_most_patched_replans() -> None:
    """The state is not a path that never runs: every patched re-plan above has the same arcs."""
    count = sum(len(_replans(seed)) for seed in range(10))
    assert count >= 10


def _one_patched(seed: int = 3) -> tuple[Session, PlanOutcome, PlanOutcome]:
    for k in range(seed, seed + 40):
        found = _replans(k)
        for session, prev, out in found:
            if out.plan.assignments:
                return session, prev, out
    raise AssertionError("no patched re-plan among the seeds")


def test_hard_rule_breaks_are_rejected_on_the_incremental_path() -> None:
    session, prev, out = _one_patched()
    base = prev.check_state
    rows = list(out.plan.assignments)
    a = rows[0]
    # A conflicted pair: the row's pair declared a conflict.
    conflicted = session.model_copy(
        update={"conflicts": [*session.conflicts,
                              Conflict(reviewer=a.reviewer, paper=a.paper, reason="late")]}
    )
    with pytest.raises(PlanCheckError, match="conflicted pair"):
        check_plan(conflicted, out.plan, out.potentials, network=out.network, base=base)
    # A withdrawn reviewer's pair.
    reviewers = list(session.reviewers)
    j = session.reviewer_index()[a.reviewer]
    reviewers[j] = reviewers[j].model_copy(update={"withdrawn": True})
    gone = session.model_copy(update={"reviewers": reviewers})
    with pytest.raises(PlanCheckError, match="withdrawn reviewer"):
        check_plan(gone, out.plan, out.potentials, network=out.network, base=base)
    # Over cap: the reviewer's cap below the plan's load.
    reviewers = list(session.reviewers)
    reviewers[j] = reviewers[j].model_copy(update={"cap": 0, "floor": 0, "overload": 0})
    capped = session.model_copy(update={"reviewers": reviewers})
    with pytest.raises(PlanCheckError, match="above cap"):
        check_plan(capped, out.plan, out.potentials, network=out.network, base=base)


def test_a_pair_off_the_network_is_rejected_on_the_incremental_path() -> None:
    session, prev, out = _one_patched()
    net = out.network
    n_p = max(net.n_papers, 1)
    have = set((net.pair_reviewer * n_p + net.pair_paper).tolist())
    rng = np.random.default_rng(5)
    for _ in range(200):
        j, i = int(rng.integers(net.n_reviewers)), int(rng.integers(net.n_papers))
        if j * n_p + i in have:
            continue
        row = out.plan.assignments[0].model_copy(
            update={"reviewer": session.reviewers[j].id, "paper": session.papers[i].id}
        )
        plan = _with_rows(session, out.plan, [*out.plan.assignments, row])
        with pytest.raises(PlanCheckError):
            check_plan(session, plan, out.potentials, network=out.network,
                       base=prev.check_state)
        return
    pytest.skip("every pair has an arc in this session")


def test_wrong_potentials_on_one_node_are_rejected_on_the_incremental_path() -> None:
    rejected = 0
    for seed in range(12):
        for session, prev, out in _replans(seed):
            for v in range(out.network.n_nodes):
                pot = out.potentials.copy()
                pot[v] += 10**6
                full = _verdict(session, out.plan, pot, out, None)
                quick = _verdict(session, out.plan, pot, out, prev.check_state)
                assert (full is None) == (quick is None)
                if full is not None:
                    rejected += 1
                    assert "optimality certificate" in quick
    assert rejected > 0


def test_a_flow_change_where_potentials_stayed_is_rejected() -> None:
    """A row added or dropped on a pair arc whose end potentials did not move since the certified
    check, where its reduced cost forbids the change: the incremental check must look at it
    because its flow changed."""
    caught = 0
    for seed in range(30):
        for session, prev, out in _replans(seed):
            net = out.network
            block = net.pair_arcs
            pot = out.potentials
            still = pot == prev.potentials
            t, h = net.tails[block], net.heads[block]
            reduced = net.costs[block] + pot[t] - pot[h]
            j, i, _ = assignment_arrays(session, out.plan.assignments)
            n_p = max(net.n_papers, 1)
            keys = net.pair_reviewer * n_p + net.pair_paper
            used = np.isin(keys, j * n_p + i)
            # Dropping a used pair with negative reduced cost (room below its capacity).
            free = net.lower[block] == 0
            drop = np.flatnonzero(used & still[t] & still[h] & (reduced < 0) & free)
            for arc in drop[:2].tolist():
                r = session.reviewers[int(net.pair_reviewer[arc])].id
                p = session.papers[int(net.pair_paper[arc])].id
                rows = [a for a in out.plan.assignments if (a.reviewer, a.paper) != (r, p)]
                plan = _with_rows(session, out.plan, rows)
                full = _verdict(session, plan, pot, out, None)
                quick = _verdict(session, plan, pot, out, prev.check_state)
                assert full is not None and quick is not None
                caught += "optimality certificate" in quick
    assert caught > 0


def test_a_bound_or_cost_change_where_flow_and_potentials_stayed_is_rejected() -> None:
    """A network whose pair arc changed capacity or cost, where the plan's flow and the end
    potentials did not: the incremental check must look at it because its bounds changed."""
    checked = 0
    for seed in range(12):
        for session, prev, out in _replans(seed):
            net = out.network
            block = net.pair_arcs
            pot = out.potentials
            still = pot == prev.potentials
            t, h = net.tails[block], net.heads[block]
            j, i, _ = assignment_arrays(session, out.plan.assignments)
            n_p = max(net.n_papers, 1)
            used = np.isin(net.pair_reviewer * n_p + net.pair_paper, j * n_p + i)
            stay = still[t] & still[h]
            idle = np.flatnonzero(stay & ~used & (net.capacities[block] > 0))
            busy = np.flatnonzero(stay & used & (net.lower[block] == 0))
            changed = []
            if len(idle):
                # A cost that makes the idle arc worth using: reduced cost -1 with room.
                a = int(idle[0])
                costs = net.costs.copy()
                costs[block.start + a] = int(pot[h[a]] - pot[t[a]]) - 1
                changed.append(replace(net, costs=costs))
            if len(busy):
                # A used arc closed: its flow is above its capacity.
                capacities = net.capacities.copy()
                capacities[block.start + int(busy[0])] = 0
                changed.append(replace(net, capacities=capacities))
            for other in changed:
                moved = replace(out, network=other)
                full = _verdict(session, out.plan, pot, moved, None)
                quick = _verdict(session, out.plan, pot, moved, prev.check_state)
                assert full is not None and quick is not None
                assert "optimality certificate" in quick
                checked += 1
    assert checked > 0
