"""Re-scoring through the Workspace: one event, the plan stale, undo and the file round trip."""

from __future__ import annotations

from pathlib import Path

import pytest

from review_alloc.model import load_session
from review_alloc.samples import workshop
from review_alloc.workspace import ChangeRefused, Workspace


def test_rescore_is_one_change_that_undo_takes_back(tmp_path: Path) -> None:
    ws = Workspace(workshop(), None)
    ws.solve()
    before = ws.session
    rows = ws.rescore({"bid": 3.0}, top=4, reason="trust the bids")
    s = ws.session
    assert rows == len(s.scores) and s.scores != before.scores
    assert s.policy.recipe is not None and s.policy.recipe.bid == 3.0
    assert [e.action for e in s.events[len(before.events) :]] == ["rescore"]
    assert not ws.plan_is_current()
    # Every pair the plan kept carries its new score once planned again.
    ws.solve()
    for a in ws.session.plan.assignments:
        j, i = ws.session.reviewer_index()[a.reviewer], ws.session.paper_index()[a.paper]
        assert a.score == (ws.session.scores.get(j, i) or 0.0)
    ws.undo()  # back to the first revision: its recipe and scores
    assert ws.session.scores == before.scores
    assert ws.session.policy.recipe == before.policy.recipe
    ws.save(tmp_path / "w.json")
    again = load_session(tmp_path / "w.json")
    assert again.scores == before.scores and again.signals == before.signals


def test_a_session_without_signals_keeps_its_scores_as_the_given_expertise() -> None:
    s = workshop()
    plain = s.model_copy(
        update={
            "papers": [p.model_copy(update={"abstract": "", "keywords": []}) for p in s.papers],
            "reviewers": [
                r.model_copy(update={"profile": "", "keywords": []}) for r in s.reviewers
            ],
            "policy": s.policy.model_copy(update={"recipe": None}),
            "signals": None,
        }
    )
    ws = Workspace(plain, None)
    ws.rescore({"text": 0.0, "topic": 0.0, "bid": 0.0})
    # Expertise alone, weight 1: the table as it was.
    assert ws.session.scores == plain.scores
    assert ws.session.signals is not None and ws.session.signals.expertise == plain.scores


def test_rescore_refuses_unknown_parts_and_weights_out_of_range() -> None:
    ws = Workspace(workshop(), None)
    with pytest.raises(ChangeRefused, match="unknown part 'colour'"):
        ws.rescore({"colour": 1.0})
    with pytest.raises(ChangeRefused, match="recipe"):
        ws.rescore({"text": 1e9})
    with pytest.raises(ChangeRefused, match="unknown reviewer 'nobody'"):
        ws.pair_report("nobody", ws.session.papers[0].id)


def test_scores_typed_in_with_a_new_entity_survive_a_later_score() -> None:
    from review_alloc.model import Paper, Reviewer

    ws = Workspace(workshop(), None)
    ws.solve()
    assert ws.session.signals is not None and ws.session.policy.recipe is not None
    first, events = ws.session.papers[0].id, len(ws.session.events)
    ws.add_reviewer(Reviewer(id="R-NEW", name="Ilse Varkonyi"), scores={first: 0.9})
    j = len(ws.session.reviewers) - 1
    ws.add_paper(Paper(id="P-NEW", title="Tidal lagoons"), scores={"R-NEW": 0.7})
    i = len(ws.session.papers) - 1
    s = ws.session
    # One recorded change each, as before; the typed scores are in the table as given and
    # are now also the given expertise the recipe reads.
    assert [e.action for e in s.events[events:]] == ["add-reviewer", "add-paper"]
    assert s.scores.get(j, 0) == 0.9 and s.scores.get(j, i) == 0.7
    assert s.signals is not None
    assert s.signals.expertise.get(j, 0) == 0.9 and s.signals.expertise.get(j, i) == 0.7
    # Expertise alone, weight 1: the recomputed table gives the typed scores back.
    ws.rescore({"expertise": 1.0, "text": 0.0, "topic": 0.0, "bid": 0.0})
    assert ws.session.scores.get(j, 0) == 0.9 and ws.session.scores.get(j, i) == 0.7
    assert not ws.session.validation_problems()


def test_undo_past_an_added_reviewer_drops_its_given_scores() -> None:
    from review_alloc.model import Reviewer

    ws = Workspace(workshop(), None)
    ws.solve()
    given = ws.session.signals.expertise if ws.session.signals else None
    ws.add_reviewer(Reviewer(id="R-NEW"), scores={ws.session.papers[0].id: 0.9})
    ws.undo()  # the change is dropped: the reviewer leaves, and so do its given scores
    assert ws.session.signals is not None and ws.session.signals.expertise == given
    assert not ws.session.validation_problems()


def test_redo_gives_back_the_given_scores_an_undo_set_aside(tmp_path: Path) -> None:
    from review_alloc.model import Reviewer

    ws = Workspace(workshop(), None)
    ws.solve()
    first = ws.session.papers[0].id
    ws.add_reviewer(Reviewer(id="R-NEW", name="Ilse Varkonyi"), scores={first: 0.9})
    ws.solve()
    j = ws.session.reviewer_index()["R-NEW"]
    given = ws.session.signals.expertise if ws.session.signals else None
    ws.undo()  # back to the revision without R-NEW: its given score is set aside by id
    s = ws.session
    assert "R-NEW" not in s.reviewer_index() and not s.validation_problems()
    assert s.signals is not None
    assert [(r.reviewer, r.paper, r.value) for r in s.signals.set_aside] == [("R-NEW", first, 0.9)]
    # The set-aside row survives a save and a load between the undo and the redo.
    ws.save(tmp_path / "w.json")
    ws = Workspace.open(tmp_path / "w.json")
    ws.redo()
    s = ws.session
    assert s.signals is not None and s.signals.expertise == given and not s.signals.set_aside
    # Expertise alone, weight 1: the recomputed table gives the typed score back.
    ws.rescore({"expertise": 1.0, "text": 0.0, "topic": 0.0, "bid": 0.0})
    assert ws.session.scores.get(j, 0) == 0.9
    assert not ws.session.validation_problems()


def test_a_change_after_an_undo_drops_the_rows_set_aside_for_a_redo() -> None:
    from review_alloc.model import Reviewer

    ws = Workspace(workshop(), None)
    ws.solve()
    ws.add_reviewer(Reviewer(id="R-NEW"), scores={ws.session.papers[0].id: 0.9})
    ws.solve()
    ws.undo()
    assert ws.session.signals is not None and ws.session.signals.set_aside
    ws.withdraw_reviewer(ws.session.reviewers[0].id, reason="moved away")
    assert ws.session.signals is not None and not ws.session.signals.set_aside
    with pytest.raises(ChangeRefused, match="nothing to redo"):
        ws.redo()
    # The same id added anew starts without the dropped reviewer's scores.
    ws.add_reviewer(Reviewer(id="R-NEW"))
    j = ws.session.reviewer_index()["R-NEW"]
    assert ws.session.signals is not None
    assert not (ws.session.signals.expertise.reviewer == j).any()


def test_signals_between_sets_aside_and_gives_back_bids_and_expertise() -> None:
    from review_alloc.model import ScoreTable, Signals
    from review_alloc.workspace.base import signals_between

    s = workshop()
    n = len(s.reviewers)
    last = s.reviewers[-1].id
    signals = Signals(
        expertise=ScoreTable.from_arrays([0, n - 1], [0, 1], [0.5, 0.8]),
        bids=ScoreTable.from_arrays([n - 1, 1], [2, 2], [4.0, 1.0]),
    )
    full = s.model_copy(update={"signals": signals})
    short = full.model_copy(update={"reviewers": full.reviewers[:-1]})
    after = signals_between(full, short)
    assert after is not None
    assert after.expertise == ScoreTable.from_arrays([0], [0], [0.5])
    assert after.bids == ScoreTable.from_arrays([1], [2], [1.0])
    assert sorted((r.table, r.reviewer, r.value) for r in after.set_aside) == [
        ("bids", last, 4.0),
        ("expertise", last, 0.8),
    ]
    back = signals_between(short.model_copy(update={"signals": after}), full)
    assert back is not None and back.expertise == signals.expertise
    assert back.bids == signals.bids and not back.set_aside
