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
