"""History: revisions restore their plan and data exactly, diffs add up, undo, atomic saves."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest

from review_alloc.model import Paper, Reviewer, load_session, save_session, session_bytes
from review_alloc.model.history import DataDelta, ListDelta, SessionData, restore_data
from review_alloc.samples import workshop
from review_alloc.workspace import ChangeRefused, Workspace
from tests.plan.test_planner import random_session
from tests.plan.test_replan_random import _random_change


def _data(ws: Workspace) -> dict[str, str]:
    s = ws.session
    return {
        name: json.dumps(s.model_dump(mode="json")[name])
        for name in ("policy", "papers", "reviewers", "conflicts", "pins", "blocks", "scores")
    }


def _history_run(seed: int) -> tuple[Workspace, list[str], list[dict[str, str]]]:
    """Plan, change, re-plan a few times; return the plans and data as each revision had them."""
    rng = np.random.default_rng(seed)
    ws = Workspace(random_session(500 + seed, unscored="exclude" if seed % 2 else "zero"))
    plans, datas = [], []
    for round_ in range(4):
        if round_:
            for k in range(int(rng.integers(1, 4))):
                _random_change(ws, rng, 10 * round_ + k)
        datas.append(_data(ws))
        ws.solve(fresh=bool(round_ == 2))
        plans.append(ws.session.plan.model_dump_json())
    return ws, plans, datas


@pytest.mark.parametrize("seed", range(12))
def test_undo_restores_each_earlier_plan_byte_for_byte_and_its_data(seed: int) -> None:
    ws, plans, datas = _history_run(seed)
    assert [r.number for r in ws.revisions] == [1, 2, 3, 4]
    for k in (3, 2, 1):
        assert ws.undo("changed my mind") == k
        assert ws.session.plan.model_dump_json() == plans[k - 1]
        assert _data(ws) == datas[k - 1]
        assert ws.session.events[-1].action == "undo"
        assert not ws.data_changed_since_plan()
    with pytest.raises(ChangeRefused, match="is the first"):
        ws.undo()


@pytest.mark.parametrize("seed", range(12))
def test_revisions_survive_a_save_and_rebuild_from_the_file(seed: int, tmp_path: Path) -> None:
    ws, plans, _ = _history_run(seed)
    ws.save(tmp_path / "h.json")
    again = Workspace.open(tmp_path / "h.json")
    for number, text in enumerate(plans, start=1):
        assert again.plan_of(number).model_dump_json() == text
    assert session_bytes(again.session) == session_bytes(ws.session)


@pytest.mark.parametrize("seed", range(12))
def test_diffs_add_up(seed: int) -> None:
    ws, _, _ = _history_run(seed)
    for a in range(1, 5):
        for b in range(1, 5):
            change = ws.diff(a, b)
            old = {(x.reviewer, x.paper) for x in ws.plan_of(a).assignments}
            new = {(x.reviewer, x.paper) for x in ws.plan_of(b).assignments}
            # old + added - removed = new, and the same per reviewer and per paper
            assert (old | set(change.added)) - set(change.removed) == new
            assert change.old_pairs + len(change.added) - len(change.removed) == change.new_pairs
            assert change.kept == len(old & new)
            for who, c in change.by_reviewer.items():
                mine_old = {p for r, p in old if r == who}
                assert (mine_old | set(c.added)) - set(c.removed) == {p for r, p in new if r == who}
            for what, c in change.by_paper.items():
                its_old = {r for r, p in old if p == what}
                assert (its_old | set(c.added)) - set(c.removed) == {r for r, p in new if p == what}
            untouched = {r for r, _ in old | new} - change.by_reviewer.keys()
            for who in untouched:
                assert {p for r, p in old if r == who} == {p for r, p in new if r == who}
    assert ws.diff().old == 3 and ws.diff().new == 4


def test_history_lists_the_changes_between_revisions() -> None:
    ws = Workspace(workshop())
    ws.solve()
    first = ws.session.plan.assignments[0]
    ws.withdraw_reviewer(first.reviewer, "illness")
    ws.add_paper(Paper(id="LATE1", title="A late invented paper"))
    ws.solve()
    entries = ws.history()
    assert [e.number for e in entries] == [1, 2]
    assert entries[0].changes == ()
    assert entries[1].changes == (
        f"withdraw-reviewer {first.reviewer}: illness",
        "add-paper LATE1 (A late invented paper)",
    )
    assert entries[1].current and entries[1].parent == 1
    assert entries[1].kept == ws.diff().kept


def test_notify_rows_name_exactly_the_reviewers_whose_list_changed() -> None:
    ws = Workspace(workshop())
    ws.solve()
    who = ws.session.plan.assignments[0].reviewer
    ws.withdraw_reviewer(who, "illness")
    ws.solve()
    rows = ws.notify_rows(1)
    change = ws.diff(1, 2)
    assert [r.reviewer for r in rows] == list(change.by_reviewer)
    gone = next(r for r in rows if r.reviewer == who)
    assert gone.status == "withdrawn" and not gone.added and gone.load_after == 0
    titles = {p.id: p.title for p in ws.session.papers}
    for row in rows:
        assert row.added_titles == tuple(titles[p] for p in row.added)
        assert row.load_after - row.load_before == len(row.added) - len(row.removed)


def test_undo_brings_back_an_added_reviewer_set_and_their_scores_go() -> None:
    ws = Workspace(workshop())
    ws.solve()
    table = ws.session.scores
    paper = ws.session.papers[0].id
    ws.add_reviewer(Reviewer(id="LATE-R", name="Ivo Brenner", cap=2), scores={paper: 0.99})
    ws.solve()
    assert ("LATE-R", paper) in {(a.reviewer, a.paper) for a in ws.session.plan.assignments}
    ws.undo()
    assert "LATE-R" not in ws.session.reviewer_index()
    assert ws.session.scores == table


def test_list_and_data_deltas_round_trip() -> None:
    a = [Paper(id=f"p{k}") for k in range(5)]
    b = [*a[:2], Paper(id="p2", title="changed"), *a[3:], Paper(id="p5")]
    delta = ListDelta[Paper].between(a, b)
    assert delta is not None and [k for k, _ in delta.changed] == [2, 5]
    assert delta.apply(a) == b
    assert ListDelta[Paper].between(b, a).apply(b) == a
    assert ListDelta[Paper].between(a, list(a)) is None
    s = workshop()
    data = SessionData(s.policy, s.papers, s.reviewers, s.conflicts, s.pins, s.blocks, s.scores)
    assert DataDelta.between(None, data, s.scores).apply(None, s.scores) == data
    assert DataDelta.between(None, data, s.scores).scores is None
    assert DataDelta.between(data, data, s.scores) == DataDelta()


def test_revisions_are_compact() -> None:
    ws = Workspace(workshop())
    ws.solve()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer)
    ws.solve()
    second = ws.revisions[1]
    # The second revision stores only the one reviewer that changed, not the whole list.
    assert second.data.reviewers is not None and len(second.data.reviewers.changed) == 1
    assert second.data.papers is None and second.data.scores is None
    assert len(second.model_dump_json()) < len(ws.session.plan.model_dump_json()) / 3
    assert restore_data(ws.revisions, 2, ws.session.scores).reviewers == ws.session.reviewers
    # The first revision holds no copy of the score table: it equals the session's.
    assert ws.revisions[0].data.scores is None


def test_an_older_file_without_history_loads_and_plans(tmp_path: Path) -> None:
    s = workshop()
    doc = json.loads(s.model_dump_json())
    doc.pop("revisions")
    doc.pop("revision")
    path = tmp_path / "old.json"
    path.write_text(json.dumps(doc))
    ws = Workspace.open(path)
    assert ws.revisions == [] and ws.session.revision is None
    ws.solve()
    assert ws.session.revision == 1


def test_an_interrupted_save_leaves_the_previous_file_intact(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    ws = Workspace.open(path)
    ws.solve()
    ws.save()
    before = path.read_bytes()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer)
    ws.solve()

    def broken(src: str, dst: str) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken)
    with pytest.raises(Exception, match="cannot save"):
        ws.save()
    monkeypatch.undo()
    assert path.read_bytes() == before
    # No temporary file is left; the session's lock file (a dot file) may stay beside it.
    assert [p.name for p in tmp_path.iterdir() if not p.name.endswith(".lock")] == ["s.json"]
    assert load_session(path).revision == 1


def test_undo_with_unplanned_changes_drops_them_first() -> None:
    ws = Workspace(workshop())
    ws.solve()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer)
    ws.solve()
    plan_2 = ws.session.plan.model_dump_json()
    reviewers_2 = ws.session.reviewers
    ws.withdraw_paper(ws.session.papers[0].id)
    ws.set_reviewer(ws.session.reviewers[1].id, cap=1, floor=0)
    assert ws.data_changed_since_plan()
    assert ws.undo() == 2
    assert ws.session.plan.model_dump_json() == plan_2
    assert ws.session.reviewers == reviewers_2 and not ws.session.papers[0].withdrawn
    assert ws.session.events[-1].detail == "back to revision 2, changes dropped"
    assert ws.undo() == 1
    ws.solve()
    assert ws.history()[-1].changes == ("undo 1 (back to revision 1 from 2)",)
    assert ws.history()[-1].parent == 1


def test_score_changes_rebase_the_first_revision_and_survive_reopening(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    ws = Workspace(workshop(), path)
    ws.solve()
    original = ws.session.scores
    plan_1 = ws.session.plan.model_dump_json()
    paper, reviewer = ws.session.papers[0].id, ws.session.reviewers[0].id
    ws.add_reviewer(Reviewer(id="LATE-R", cap=2), scores={paper: 0.99})
    ws.add_paper(Paper(id="LATE-P"), scores={reviewer: 0.5, "LATE-R": 0.75})
    ws.solve()
    plan_2 = ws.session.plan.model_dump_json()
    ws.save()
    again = Workspace.open(path)
    # The first revision's scores are stored against today's table, which has 3 more rows.
    assert len(again.revisions[0].data.scores.removed) == 3
    assert again.data_of(1).scores == original
    assert again.plan_of(1).model_dump_json() == plan_1
    assert again.plan_of(2).model_dump_json() == plan_2
    assert again.undo() == 1
    assert again.session.scores == original and again.revisions[0].data.scores is None
    again.save()
    third = Workspace.open(path)
    assert third.plan_of(2).model_dump_json() == plan_2
    assert len(third.data_of(2).scores) == len(original) + 3


def test_scores_changed_behind_the_workspace_are_detected_not_misread() -> None:
    ws = Workspace(workshop())
    ws.solve()
    table = ws.session.scores
    shifted = type(table).from_arrays(table.reviewer, table.paper, table.value * 0.5)
    edited = Workspace(ws.session.model_copy(update={"scores": shifted}))
    with pytest.raises(ChangeRefused, match="changed outside the workspace"):
        edited.plan_of(1)
