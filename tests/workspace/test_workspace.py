"""Workspace changes: refusals with reasons, events recorded, forbidden pairs leave the plan."""

from __future__ import annotations

from pathlib import Path

import pytest

from review_alloc.model import load_session
from review_alloc.plan import check_plan, conflict_pairs
from review_alloc.samples import workshop
from review_alloc.workspace import ChangeRefused, Workspace


@pytest.fixture
def planned() -> Workspace:
    ws = Workspace(workshop())
    ws.solve()
    return ws


def _pairs(ws: Workspace) -> set[tuple[str, str]]:
    return {(a.reviewer, a.paper) for a in ws.session.plan.assignments}


def test_withdrawal_removes_the_reviewer_from_the_plan_at_once(planned: Workspace) -> None:
    who = planned.session.plan.assignments[0].reviewer
    planned.withdraw_reviewer(who, "illness")
    assert all(r != who for r, _ in _pairs(planned))
    assert planned.session.events[-1].action == "withdraw-reviewer"
    assert planned.session.events[-1].reason == "illness"
    assert planned.data_changed_since_plan() and planned.dirty
    # The pruned plan still keeps every hard rule (no certificate: it is no longer optimal).
    check_plan(planned.session, planned.session.plan, None)
    planned.solve()
    assert planned.session.plan.checked and not planned.data_changed_since_plan()


def test_declared_conflict_leaves_the_plan_and_cannot_be_pinned(planned: Workspace) -> None:
    a = planned.session.plan.assignments[0]
    planned.declare_conflict(a.reviewer, a.paper, "recent co-author")
    assert (a.reviewer, a.paper) not in _pairs(planned)
    with pytest.raises(ChangeRefused, match="conflict of interest"):
        planned.pin(a.reviewer, a.paper)
    planned.solve()
    assert (a.reviewer, a.paper) not in _pairs(planned)


def test_inferred_conflict_cannot_be_pinned() -> None:
    ws = Workspace(workshop())
    found = conflict_pairs(ws.session)
    inferred = [k for k, why in enumerate(found.reasons) if not why.startswith("declared")]
    assert inferred, "the demo workshop has authors among its reviewers"
    k = inferred[0]
    r = ws.session.reviewers[int(found.reviewer[k])].id
    p = ws.session.papers[int(found.paper[k])].id
    with pytest.raises(ChangeRefused, match="conflict of interest"):
        ws.pin(r, p)


def test_unknown_ids_and_bad_limits_are_refused(planned: Workspace) -> None:
    with pytest.raises(ChangeRefused, match="unknown reviewer 'R9999'"):
        planned.withdraw_reviewer("R9999")
    with pytest.raises(ChangeRefused, match="unknown paper 'X1'"):
        planned.withdraw_paper("X1")
    with pytest.raises(ChangeRefused, match="cap must be >= 0"):
        planned.set_reviewer("R0001", cap=-1)
    with pytest.raises(ChangeRefused, match="floor 2 exceeds cap 1"):
        planned.set_reviewer("R0001", cap=1)


def test_lowered_cap_keeps_the_strongest_reviews(planned: Workspace) -> None:
    who = planned.session.plan.assignments[0].reviewer
    before = sorted(
        (a.score for a in planned.session.plan.assignments if a.reviewer == who), reverse=True
    )
    planned.set_reviewer(who, cap=2, floor=0)
    after = sorted(
        (a.score for a in planned.session.plan.assignments if a.reviewer == who), reverse=True
    )
    assert after == before[:2]


def test_pin_then_plan_keeps_the_pair_and_block_removes_it(planned: Workspace) -> None:
    s = planned.session
    used = _pairs(planned)
    reasons = conflict_pairs(s).reason_of()
    rid, pid = s.reviewer_index(), s.paper_index()
    free = next(
        (r.id, p.id)
        for r in s.reviewers
        for p in s.papers
        if (r.id, p.id) not in used and (rid[r.id], pid[p.id]) not in reasons
    )
    planned.pin(*free, reason="chair's choice")
    planned.solve()
    assert free in _pairs(planned)
    with pytest.raises(ChangeRefused, match="unpin it"):
        planned.block(*free)
    planned.unpin(*free)
    planned.block(*free, reason="asked not to")
    assert free not in _pairs(planned)
    planned.solve()
    assert free not in _pairs(planned)


def test_save_is_atomic_and_clears_the_mark(planned: Workspace, tmp_path: Path) -> None:
    target = tmp_path / "w.json"
    planned.withdraw_paper(planned.session.papers[0].id, "withdrawn by authors")
    planned.save(target)
    assert not planned.dirty
    again = load_session(target)
    assert again.events == planned.session.events
    assert again.papers[0].withdrawn


def test_a_conflict_on_a_pinned_pair_releases_the_pin_and_says_so(planned: Workspace) -> None:
    a = planned.session.plan.assignments[0]
    planned.pin(a.reviewer, a.paper, "agreed")
    planned.declare_conflict(a.reviewer, a.paper, "recent co-author")
    event = planned.session.events[-1]
    assert event.action == "declare-conflict" and "pin released" in event.describe()
    assert (a.reviewer, a.paper) not in {(p.reviewer, p.paper) for p in planned.session.pins}
    assert (a.reviewer, a.paper) not in _pairs(planned)


def test_a_change_can_never_save_a_file_that_would_not_load(planned: Workspace) -> None:
    # Every changed entity is validated like a loaded one (bounds of model/limits.py).
    who = planned.session.reviewers[0].id
    with pytest.raises(ChangeRefused, match="less than or equal to 10000"):
        planned.set_reviewer(who, cap=10**20)
    paper = planned.session.papers[0].id
    with pytest.raises(ChangeRefused, match="less than or equal to 10000"):
        planned.set_paper(paper, reviews=20_000)
    assert planned.session.events[-1].action == "plan"
