"""A recruit placeholder of an accepted fix becomes the real person: one recorded change that
carries the placeholder's pairs, pins and conflicts over, and one undo takes it back."""

from __future__ import annotations

import pytest

from review_alloc.model import Conflict
from review_alloc.workspace import ChangeRefused, ChangeSet, Workspace
from tests.plan.test_explain_groups import topic_session


def _with_recruits() -> Workspace:
    ws = Workspace(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}))
    ws.solve()
    ws.accept(ws.what_if(ChangeSet(fixes=("recruit",))))
    return ws


def test_placeholder_becomes_a_person_in_one_change() -> None:
    ws = _with_recruits()
    placeholders = ws.recruit_placeholders()
    assert placeholders and all(p.startswith("NEW-") for p in placeholders)
    first = placeholders[0]
    s = ws.session
    j = s.reviewer_index()[first]
    pairs = sorted(a.paper for a in s.plan.assignments if a.reviewer == first)
    assert pairs
    ws.declare_conflict(first, s.papers[-1].id, "co-author")
    events = len(ws.session.events)
    ws.name_recruit(
        first, "R-KELD", "Mira Keld", email="mira@vesterhold.example", institution="Vesterhold"
    )
    s = ws.session
    assert len(s.events) == events + 1
    event = s.events[-1]
    assert event.action == "set-reviewer" and event.subject == "R-KELD"
    assert f"recruit {first}" in event.detail and "Mira Keld" in event.detail
    person = s.reviewers[j]
    assert (person.id, person.name, person.email, person.institution) == (
        "R-KELD",
        "Mira Keld",
        "mira@vesterhold.example",
        "Vesterhold",
    )
    assert person.topics == ["quantum sensing"]
    assert first not in s.reviewer_index()
    assert sorted(a.paper for a in s.plan.assignments if a.reviewer == "R-KELD") == pairs
    assert not any(a.reviewer == first for a in s.plan.assignments)
    assert Conflict(reviewer="R-KELD", paper=s.papers[-1].id, reason="co-author") in s.conflicts
    assert first not in ws.recruit_placeholders()
    # A plan of the named session keeps the person's pairs.
    ws.solve()
    assert any(a.reviewer == "R-KELD" for a in ws.session.plan.assignments)
    # Back to the revision the fix was accepted in: the placeholder again.
    ws.undo()
    assert ws.session.reviewers[j].id == first


def test_refusals_name_the_reason() -> None:
    ws = _with_recruits()
    first = ws.recruit_placeholders()[0]
    person = ws.session.reviewers[0].id
    cases = [
        ((person, "X1", "Someone"), "not a recruit placeholder"),
        ((first, person, "Someone"), "another reviewer has it already"),
        ((first, "X1", " "), "name: required"),
        ((first, "", "Someone"), "id: required"),
    ]
    events = len(ws.session.events)
    for args, words in cases:
        with pytest.raises(ChangeRefused) as refused:
            ws.name_recruit(*args)
        assert any(words in line for line in refused.value.lines)
    assert len(ws.session.events) == events
