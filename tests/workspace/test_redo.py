"""Redo: forward again to the revision an undo left, with the plan and data it had."""

from __future__ import annotations

from pathlib import Path

import pytest

from review_alloc.samples import workshop
from review_alloc.workspace import ChangeRefused, Workspace
from tests.workspace.test_history import _data, _history_run


@pytest.mark.parametrize("seed", range(6))
def test_redo_retraces_the_undos_byte_for_byte(seed: int) -> None:
    # The plans and data recorded when each revision was made are the reference.
    ws, plans, datas = _history_run(seed)
    for k in (3, 2, 1):
        assert ws.undo() == k
    for k in (2, 3, 4):
        assert ws.redo_target() == k
        assert ws.redo("after all") == k
        assert ws.session.revision == k
        assert ws.session.plan.model_dump_json() == plans[k - 1]
        assert _data(ws) == datas[k - 1]
        event = ws.session.events[-1]
        assert (event.action, event.subject, event.reason) == ("redo", str(k), "after all")
        assert not ws.data_changed_since_plan() and ws.plan_is_current()
    assert ws.redo_target() is None
    with pytest.raises(ChangeRefused, match="nothing to redo"):
        ws.redo()


def test_undo_and_redo_pair_off_like_a_stack() -> None:
    ws, plans, _ = _history_run(3)
    ws.undo()  # 4 -> 3
    ws.undo()  # 3 -> 2
    assert ws.redo() == 3
    assert ws.undo() == 2
    assert ws.redo() == 3
    assert ws.redo() == 4
    assert ws.session.plan.model_dump_json() == plans[3]
    assert ws.redo_target() is None


def test_a_change_or_a_plan_after_the_undo_ends_redo() -> None:
    ws = Workspace(workshop())
    ws.solve()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer)
    ws.solve()
    ws.undo()
    assert ws.redo_target() == 2
    ws.set_reviewer(ws.session.reviewers[1].id, cap=3, floor=0)
    with pytest.raises(ChangeRefused, match="nothing to redo"):
        ws.redo()
    ws.solve()
    assert ws.redo_target() is None


def test_an_undo_that_only_dropped_changes_has_nothing_to_redo() -> None:
    ws = Workspace(workshop())
    ws.solve()
    ws.withdraw_paper(ws.session.papers[0].id)
    assert ws.undo() == 1
    with pytest.raises(ChangeRefused, match="dropped the changes made since revision 1"):
        ws.redo()
    # The dropped change stays in the record.
    assert any(e.action == "withdraw-paper" for e in ws.session.events)


def test_redo_survives_a_save_and_is_a_step_made_again_on_reload(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    ws = Workspace(workshop(), path)
    ws.solve()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer)
    ws.solve()
    plan_2 = ws.session.plan.model_dump_json()
    ws.undo()
    ws.save()
    again = Workspace.open(path)
    assert again.redo() == 2
    assert again.session.plan.model_dump_json() == plan_2
    assert [s.name for s in again.unsaved] == ["redo"]
    again.save()
    assert Workspace.open(path).session.events[-1].action == "redo"
