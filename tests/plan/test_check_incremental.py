"""The checker's re-plan path (a check built on the previous check's state) must reach the
full check's verdict on every plan, with the same messages: accept what it accepts, reject what
it rejects.

The full check itself is compared with OR-Tools and HiGHS in tests/plan/test_patch.py and
tests/plan/test_replan_random.py; here each re-plan check is compared with the full one on the
same inputs, on real re-plans and on re-plans corrupted on purpose. A re-plan's certificate on
a large network goes through the fused pass (`plan.check_pass`); `FUSED_PAIRS` is lowered to 0
here so that it runs on these small networks, against `check_cost_certificate` on the full
path. The certificate conditions broken on purpose are the reduced-cost optimality conditions
of min-cost flow (an arc with room and negative reduced cost, or flow above its lower bound and
positive reduced cost, shows a cheaper flow).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

import review_alloc.plan.checker as checker
from review_alloc.model import Conflict, Plan, Session
from review_alloc.plan import make_plan
from review_alloc.plan.checker import CheckState, check_plan, pair_flags
from review_alloc.plan.errors import PlanCheckError, PlanInputError
from review_alloc.plan.figures import active_demands, assignment_arrays, plan_figures
from review_alloc.plan.solve import PlanOutcome
from review_alloc.workspace import Workspace
from tests.plan.test_patch import _change, _rules_session
from tests.plan.test_planner import random_session


@pytest.fixture(autouse=True)
def _fused_everywhere(monkeypatch: pytest.MonkeyPatch) -> None:
    """Every re-plan check takes the fused pass, however small its network."""
    monkeypatch.setattr(checker, "FUSED_PAIRS", 0)


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
    """Assert both paths reach the same verdict and message; True when they reject."""
    full = _verdict(session, plan, potentials, out, None)
    quick = _verdict(session, plan, potentials, out, base)
    assert full == quick
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


def test_the_fused_pass_runs_on_patched_replans(monkeypatch: pytest.MonkeyPatch) -> None:
    """The fused pass is not a path that never runs: every patched re-plan's check takes it."""
    calls = []
    original = checker._check_fused

    def spy(*args: object) -> None:
        calls.append(True)
        original(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(checker, "_check_fused", spy)
    count = sum(len(_replans(seed)) for seed in range(10))
    assert count >= 10 and len(calls) >= count


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
                assert full == quick
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
                assert full is not None and quick == full
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
                assert full is not None and quick == full
                assert "optimality certificate" in quick
                checked += 1
    assert checked > 0


# --- The hard rules on the incremental path -------------------------------------------------
# Reference: the full check (`base=None`), which reads every rule input anew; each check below
# must give exactly its messages on a plan whose rows stayed while a rule input changed.


def _messages(session: Session, plan: Plan, base: CheckState | None) -> list[str] | None:
    """None when the rules pass (no certificate), else the check's messages."""
    try:
        check_plan(session, plan, None, base=base)
    except PlanCheckError as error:
        return list(error.problems)
    return None


def _inferring(session: Session) -> Session:
    """The session with every conflict rule inferred, e-mails and institutions to infer from."""
    rules = session.policy.conflict_rules.model_copy(
        update={"author_email": True, "institution": True, "email_domain": True}
    )
    reviewers = [
        r.model_copy(update={"email": f"{r.id}@lab{k % 3}.example.org"})
        for k, r in enumerate(session.reviewers)
    ]
    papers = [
        p.model_copy(update={"authors": [f"author{k}@press{k % 4}.example.net"],
                             "institutions": [f"Press {k % 4}"]})
        for k, p in enumerate(session.papers)
    ]
    policy = session.policy.model_copy(update={"conflict_rules": rules})
    return session.model_copy(update={"reviewers": reviewers, "papers": papers, "policy": policy})


def _with_reviewer(session: Session, j: int, **update: object) -> Session:
    reviewers = list(session.reviewers)
    reviewers[j] = reviewers[j].model_copy(update=update)
    return session.model_copy(update={"reviewers": reviewers})


def _with_paper(session: Session, i: int, **update: object) -> Session:
    papers = list(session.papers)
    papers[i] = papers[i].model_copy(update=update)
    return session.model_copy(update={"papers": papers})


def _rule_changes(session: Session, plan: Plan, rng: np.random.Generator) -> list[Session]:
    """Sessions that each differ from `session` in one rule input of a pair `plan` uses."""
    from review_alloc.model import PairRule, ScoreTable

    a = plan.assignments[int(rng.integers(len(plan.assignments)))]
    j, i = session.reviewer_index()[a.reviewer], session.paper_index()[a.paper]
    r, p = session.reviewers[j], session.papers[i]
    table = session.scores
    values = np.asarray(table.value, dtype=np.float64).copy()
    at = np.flatnonzero((table.reviewer == j) & (table.paper == i))
    rescored = None
    if len(at):
        values[at] = np.round(1.0 - values[at], 2) if values[at[0]] != 0.5 else 0.25
        rescored = session.model_copy(update={"scores": ScoreTable.from_arrays(
            np.asarray(table.reviewer), np.asarray(table.paper), values)})
    unscored = None
    if len(at):
        keep = np.ones(len(table.value), dtype=bool)
        keep[at] = False
        unscored = session.model_copy(update={"scores": ScoreTable.from_arrays(
            np.asarray(table.reviewer)[keep], np.asarray(table.paper)[keep],
            np.asarray(table.value)[keep])})
    changes = [
        _with_reviewer(session, j, withdrawn=True),
        _with_reviewer(session, j, cap=0, floor=0, overload=0),
        _with_reviewer(session, j, senior=not r.senior),
        _with_reviewer(session, j, topics=[]),
        _with_reviewer(session, j, institution=(p.institutions or ["Nowhere Lab"])[0]),
        _with_reviewer(session, j, email=(p.authors or ["x@y.example.com"])[0]),
        _with_reviewer(session, j, email="someone@" + (p.authors or ["x@y.example.com"])[0]
                       .rpartition("@")[2]),
        _with_paper(session, i, withdrawn=True),
        _with_paper(session, i, reviews=1, min_reviews=1),
        _with_paper(session, i, senior_min=3),
        _with_paper(session, i, topics=["nothing shared"]),
        _with_paper(session, i, institutions=[r.institution or "Nowhere Lab"]),
        _with_paper(session, i, authors=[r.email or "x@y.example.com"]),
        session.model_copy(update={"conflicts": [
            *session.conflicts, Conflict(reviewer=a.reviewer, paper=a.paper, reason="late")]}),
        session.model_copy(update={"blocks": [
            *session.blocks, PairRule(reviewer=a.reviewer, paper=a.paper)]}),
        session.model_copy(update={"pins": []}),
        session.model_copy(update={"policy": session.policy.model_copy(
            update={"min_score": 0.5})}),
        session.model_copy(update={"policy": session.policy.model_copy(
            update={"require_shared_topic": not session.policy.require_shared_topic})}),
        session.model_copy(update={"policy": session.policy.model_copy(
            update={"senior_hard": not session.policy.senior_hard})}),
    ]
    changes += [s for s in (rescored, unscored) if s is not None]
    return changes


def _rule_sessions(seed: int) -> list[Session]:
    """A few sessions with every rule the checker reads: seniors, institutions, topics, pins."""
    policies: list[dict[str, object]] = [
        {"senior_min": 1, "max_per_institution": 1, "senior_hard": False},
        {"senior_min": 1, "senior_hard": True, "require_shared_topic": True},
        {"max_per_institution": 2, "min_score": 0.1, "unscored": "exclude"},
        {"unscored": "zero", "overload_allowance": 1},
    ]
    from tests.plan.test_constraints_reference import rules_session

    base = rules_session(9100 + seed, **policies[seed % len(policies)])
    return [base, _inferring(base)]


@pytest.mark.parametrize("seed", range(16))
def test_a_rule_input_changed_under_unchanged_rows_is_checked_again(seed: int) -> None:
    rng = np.random.default_rng(9300 + seed)
    rejected = 0
    for session in _rule_sessions(seed):
        try:
            outcome = make_plan(session)
        except PlanInputError:
            continue
        if not outcome.plan.assignments:
            continue
        # The check of the plan on its own session passed, and left its state.
        base = check_plan(session, outcome.plan, None)
        assert base.rows is not None
        for changed in _rule_changes(session, outcome.plan, rng):
            full = _messages(changed, outcome.plan, None)
            quick = _messages(changed, outcome.plan, base)
            assert quick == full, (full, quick)
            rejected += full is not None
        # Unchanged, the plan passes both ways.
        assert _messages(session, outcome.plan, base) is None
    if seed < 4:
        assert rejected > 0


@pytest.mark.parametrize("seed", range(20))
def test_replans_checked_in_a_chain_agree_with_the_full_check(seed: int) -> None:
    # A chain of workspace changes (withdrawals, caps, conflicts, blocks, pins) re-planned warm:
    # each plan's check on the earlier check's state gives the full check's messages, and the
    # plan itself, and the earlier plan under the new rules, get the same verdict both ways.
    rng = np.random.default_rng(9500 + seed)
    session = _rule_sessions(seed)[seed % 2]
    ws = Workspace(session)
    try:
        prev = ws.solve()
    except PlanInputError:
        return
    for _ in range(5):
        before = prev.plan
        _change(ws, rng)
        try:
            out = ws.solve()
        except PlanInputError:
            return
        assert out.check_state is not None and out.check_state.rows is not None
        assert prev.check_state is not None
        base = prev.check_state
        for plan in (out.plan, before):
            full = _messages(ws.session, plan, None)
            quick = _messages(ws.session, plan, base)
            assert quick == full, (full, quick)
        prev = out


def test_the_checked_rows_are_read_only() -> None:
    session = _rule_sessions(1)[0]
    outcome = make_plan(session)
    state = outcome.check_state
    assert state is not None and state.rows is not None
    rows = state.rows
    for array in (rows.keys, rows.score, rows.has_score, rows.score_keys, rows.conflict_keys,
                  rows.entities.cap, rows.entities.reviews, rows.entities.allowance):
        assert not array.flags.writeable
    with pytest.raises(ValueError):
        rows.entities.cap[0] = 99


def test_rows_looked_up_in_the_earlier_rows_are_confirmed_by_their_own_pair() -> None:
    """The certificate finds a plan's rows among the certified plan's rows (both in paper
    order); each pair so found is confirmed against the network's own key, so a state whose
    row positions are wrong costs only the search of all pairs, never a wrong verdict."""
    checked = 0
    for seed in range(10):
        for session, prev, out in _replans(seed):
            certified = prev.check_state.certified
            if certified is None or certified.row_pairs is None or len(certified.row_pairs) < 2:
                continue
            # Every row's pair position moved to its neighbour's.
            shifted = replace(certified, row_pairs=np.roll(certified.row_pairs, 1))
            base = replace(prev.check_state, certified=shifted)
            # Reference: the full check (base=None), which reads the network's pairs anew.
            full = _verdict(session, out.plan, out.potentials, out, None)
            assert _verdict(session, out.plan, out.potentials, out, base) == full
            checked += 1
    assert checked > 0


def test_a_corrupted_network_gets_the_full_checks_message() -> None:
    """Arcs moved on purpose, on the pair block and beside it: an end outside the nodes, and an
    end moved to another node, which leaves the plan's flow unbalanced there (conservation is
    checked as the full check checks it, not assumed from how the flow was built)."""
    checked = unbalanced = 0
    for seed in range(6):
        for session, prev, out in _replans(seed):
            net = out.network
            block = net.pair_arcs
            if block.stop == block.start:
                continue
            n = net.n_nodes
            changes = []
            for arc in (block.start, block.stop - 1, net.return_arc, 0):
                for field in ("tails", "heads"):
                    for node in (n, -1, (int(getattr(net, field)[arc]) + 1) % n):
                        ends = getattr(net, field).copy()
                        ends[arc] = node
                        changes.append(replace(net, **{field: ends}))
            for other in changes:
                moved = replace(out, network=other)
                full = _verdict(session, out.plan, out.potentials, moved, None)
                quick = _verdict(session, out.plan, out.potentials, moved, prev.check_state)
                # Reference: the full check (`check_cost_certificate` on every arc).
                assert quick == full
                checked += full is not None
                unbalanced += full is not None and "out - in" in full
    assert checked > 0 and unbalanced > 0
