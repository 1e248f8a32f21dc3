"""Session cross-field rules, effective values and the cached id maps."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from model_samples import make_session
from pydantic import ValidationError

from review_alloc.model import Conflict, PairRule, Paper, Reviewer, ScoreTable, Session


def _with(**changes: Any) -> dict[str, Any]:
    data = make_session().model_dump()
    data.update(changes)
    return data


def test_effective_values_use_overrides_then_the_policy(session: Session) -> None:
    # Policy: reviews 3, min_reviews 2, cap 5, floor 3.
    assert [session.paper_reviews(i) for i in range(3)] == [3, 2, 1]
    # P3 wants one review and sets no minimum: the policy's 2 is clamped to 1.
    assert [session.paper_min_reviews(i) for i in range(3)] == [2, 1, 1]
    assert [session.reviewer_cap(j) for j in range(3)] == [4, 5, 2]
    # R3's cap of 2 clamps the policy floor of 3.
    assert [session.reviewer_floor(j) for j in range(3)] == [1, 3, 2]
    assert session.paper_reviews_array().tolist() == [3, 2, 1]
    assert session.paper_min_reviews_array().tolist() == [2, 1, 1]
    assert session.reviewer_cap_array().tolist() == [4, 5, 2]
    assert session.reviewer_floor_array().tolist() == [1, 3, 2]
    assert session.paper_reviews_array().dtype == np.int64


def test_empty_lists_give_empty_arrays() -> None:
    empty = Session(name="Empty", papers=[], reviewers=[])
    assert empty.paper_reviews_array().shape == (0,)
    assert empty.reviewer_floor_array().shape == (0,)
    assert len(empty.scores) == 0


def test_index_maps_are_cached_and_follow_list_changes(session: Session) -> None:
    index = session.paper_index()
    assert index == {"P1": 0, "P2": 1, "P3": 2}
    assert session.paper_index() is index
    session.papers.append(Paper(id="P4"))
    assert session.paper_index()["P4"] == 3
    copied = session.model_copy(update={"reviewers": [Reviewer(id="RX"), *session.reviewers]})
    assert copied.reviewer_index() == {"RX": 0, "R1": 1, "R2": 2, "R3": 3}
    assert session.reviewer_index() == {"R1": 0, "R2": 1, "R3": 2}
    session.papers[0] = Paper(id="P0")
    session.forget_indexes()
    assert "P0" in session.paper_index()


def test_cached_maps_do_not_affect_equality(session: Session) -> None:
    other = make_session()
    session.paper_index()
    session.reviewer_index()
    assert session == other
    assert session.model_copy(deep=True) == other


def test_duplicate_paper_ids_name_both_positions() -> None:
    papers = [{"id": "P1"}, {"id": "P2"}, {"id": "P1"}]
    with pytest.raises(
        ValidationError, match=r"papers.2.id: duplicate paper id 'P1' \(first at papers.0\)"
    ):
        Session.model_validate(
            _with(
                papers=papers,
                plan=None,
                pins=[],
                blocks=[],
                conflicts=[],
                scores=ScoreTable.empty(),
            )
        )


def test_duplicate_reviewer_ids_are_refused() -> None:
    data = _with()
    data["reviewers"].append({"id": "R2"})
    with pytest.raises(
        ValidationError,
        match=r"reviewers.3.id: duplicate reviewer id 'R2' \(first at reviewers.1\)",
    ):
        Session.model_validate(data)


@pytest.mark.parametrize("field", ["conflicts", "pins", "blocks"])
def test_pairs_must_name_known_ids(field: str) -> None:
    data = _with()
    data[field] = [*data[field], {"reviewer": "R9", "paper": "P9"}]
    k = len(data[field]) - 1
    with pytest.raises(ValidationError) as caught:
        Session.model_validate(data)
    text = str(caught.value)
    assert f"{field}.{k}.reviewer: unknown reviewer 'R9'" in text
    assert f"{field}.{k}.paper: unknown paper 'P9'" in text


def test_duplicate_conflict_rows_are_refused() -> None:
    data = _with()
    data["conflicts"].append({"reviewer": "R3", "paper": "P1", "reason": "again"})
    with pytest.raises(
        ValidationError, match=r"conflicts.1: duplicate pair \(R3, P1\), first at conflicts.0"
    ):
        Session.model_validate(data)


def test_a_pair_both_pinned_and_blocked_is_refused() -> None:
    with pytest.raises(
        ValidationError, match=r"pins.0: pair \(R1, P1\) is also blocked \(blocks.1\)"
    ):
        Session.model_validate(
            _with(blocks=[{"reviewer": "R2", "paper": "P1"}, {"reviewer": "R1", "paper": "P1"}])
        )


def test_a_pinned_declared_conflict_is_refused() -> None:
    with pytest.raises(
        ValidationError, match=r"pins.0: pair \(R3, P1\) is a declared conflict \(conflicts.0\)"
    ):
        Session.model_validate(_with(pins=[PairRule(reviewer="R3", paper="P1")]))


def test_explicit_floor_above_cap_is_refused() -> None:
    data = _with()
    data["reviewers"][0]["floor"] = 7
    with pytest.raises(ValidationError, match=r"reviewers.0.floor: 7 exceeds cap 4"):
        Session.model_validate(data)
    data["reviewers"][0]["cap"] = None
    with pytest.raises(
        ValidationError, match=r"reviewers.0.floor: 7 exceeds cap 5 \(the policy's\)"
    ):
        Session.model_validate(data)


def test_explicit_min_reviews_above_reviews_is_refused() -> None:
    data = _with()
    data["papers"][2]["min_reviews"] = 2
    with pytest.raises(ValidationError, match=r"papers.2.min_reviews: 2 exceeds reviews 1"):
        Session.model_validate(data)


def test_score_indices_must_be_in_range() -> None:
    scores = ScoreTable.from_arrays([0, 3], [0, 1], [1.0, 1.0])
    with pytest.raises(
        ValidationError,
        match=r"scores: row 1: reviewer index 3 is out of range; the session has 3 reviewers",
    ):
        Session.model_validate(_with(scores=scores))
    scores = ScoreTable.from_arrays([0, 1], [5, 1], [1.0, 1.0])
    with pytest.raises(
        ValidationError, match=r"paper index 5 is out of range; the session has 3 papers"
    ):
        Session.model_validate(_with(scores=scores))


def test_plan_ids_must_be_known() -> None:
    data = _with()
    data["plan"]["assignments"][1]["reviewer"] = "R8"
    with pytest.raises(
        ValidationError, match=r"plan.assignments.1.reviewer: unknown reviewer 'R8'"
    ):
        Session.model_validate(data)


def test_unknown_fields_and_kinds_are_refused() -> None:
    with pytest.raises(ValidationError, match="Extra inputs"):
        Session.model_validate(_with(colour="blue"))
    with pytest.raises(ValidationError, match="kind"):
        Session.model_validate(_with(kind="journal"))
    with pytest.raises(ValidationError, match="format_version"):
        Session.model_validate(_with(format_version=2))


def test_several_problems_are_reported_together() -> None:
    data = _with(conflicts=[Conflict(reviewer="R1", paper="P7").model_dump()])
    data["reviewers"].append({"id": "R1"})
    with pytest.raises(ValidationError) as caught:
        Session.model_validate(data)
    text = str(caught.value)
    assert "reviewers.3.id: duplicate reviewer id 'R1'" in text
    assert "conflicts.0.paper: unknown paper 'P7'" in text
