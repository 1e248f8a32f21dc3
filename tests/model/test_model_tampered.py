"""Tampered and damaged session files: refused with field paths, or loaded; never a traceback."""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from model_samples import make_session

from review_alloc.model import (
    Event,
    HistoryError,
    InputError,
    Reviewer,
    ScoreTable,
    Session,
    load_session,
    session_bytes,
)
from review_alloc.model.history import (
    DataDelta,
    Revision,
    SessionData,
    assignment_table,
    restore_data,
)


def _data(session: Session) -> SessionData:
    return SessionData(**{name: getattr(session, name) for name in SessionData.__annotations__})


def _revision(
    session: Session, number: int, before: SessionData | None, event: int, current: ScoreTable
) -> Revision:
    plan = session.plan
    assert plan is not None
    data = _data(session)
    return Revision(
        number=number,
        parent=number - 1 if before is not None else None,
        created_at=plan.created_at,
        changes_from=event - 1 if before is not None else 0,
        event=event,
        figures=plan.figures,
        method=plan.method,
        checked=plan.checked,
        assignments=assignment_table(plan, data),
        data=DataDelta.between(before, data, current),
    )


@pytest.fixture(scope="module")
def document() -> dict[str, Any]:
    """The small session with two revisions (the second adds a fourth reviewer), as JSON."""
    first = make_session()
    second = first.model_copy(
        update={
            "reviewers": [*first.reviewers, Reviewer(id="R4", name="Ivo Brenner", cap=2)],
            "scores": first.scores.updated([3], [2], [0.5]),
        }
    )
    events = [
        Event(action="plan"),
        Event(action="add-reviewer", subject="R4"),
        Event(action="plan"),
    ]
    # The first revision's scores are stored against the session's current table.
    revisions = [
        _revision(first, 1, None, 0, second.scores),
        _revision(second, 2, _data(first), 2, second.scores),
    ]
    final = second.model_copy(update={"events": events, "revisions": revisions, "revision": 2})
    return json.loads(session_bytes(Session.model_validate(final.model_dump())))


def _load(tmp_path: Path, document: dict[str, Any] | bytes) -> Session:
    path = tmp_path / "s.json"
    path.write_bytes(document if isinstance(document, bytes) else json.dumps(document).encode())
    return load_session(path)


def _refused(tmp_path: Path, document: dict[str, Any]) -> list[str]:
    with pytest.raises(InputError) as caught:
        _load(tmp_path, document)
    lines = caught.value.lines
    assert all(line.startswith(f"{tmp_path / 's.json'}: ") for line in lines), lines
    return [line.removeprefix(f"{tmp_path / 's.json'}: ") for line in lines]


def _table(reviewer: list[int], paper: list[int], value: list[float]) -> dict[str, Any]:
    return ScoreTable.from_arrays(
        np.array(reviewer, np.int32), np.array(paper, np.int32), np.array(value)
    ).to_document()


def _set(document: dict[str, Any], path: str, value: Any) -> dict[str, Any]:
    changed = copy.deepcopy(document)
    *parents, last = path.split(".")
    at: Any = changed
    for part in parents:
        at = at[int(part)] if isinstance(at, list) else at[part]
    if isinstance(at, list):
        at[int(last)] = value
    else:
        at[last] = value
    return changed


def test_a_file_that_starts_with_a_byte_order_mark_loads(
    tmp_path: Path, document: dict[str, Any]
) -> None:
    raw = json.dumps(document).encode()
    assert _load(tmp_path, b"\xef\xbb\xbf" + raw) == _load(tmp_path, raw)


@pytest.mark.parametrize(
    ("path", "value", "expected"),
    [
        ("reviewers.3.cap", 10**20, "reviewers.3.cap: Input should be less than or equal to 10000"),
        ("policy.reviews", 10**6, "policy.reviews: Input should be less than or equal to 10000"),
        ("papers.2.reviews", "many", "papers.2.reviews: Input should be a valid integer"),
        ("papers", "all of them", "papers: Input should be a valid array"),
        ("scores.count", 10**30, "scores: count: 1000000000000000000000000000000 is not a whole"),
        (
            "reviewers.3.institution",
            "Wren\u200bholt",
            "reviewers.3.institution: contains the invisible character U+200B (zero-width space)",
        ),
        ("papers.1.id", "P\x00", "papers.1.id: contains the control character U+0000 (null)"),
        ("revisions.0.data.policy", None, "revisions.0.data.policy: the first revision must"),
        (
            "revisions.1.assignments",
            _table([0], [9999], [0.0]),
            "revisions.1.assignments: row 0: paper position 9999 is out of range",
        ),
        (
            "revisions.1.data.reviewers",
            {"length": 10**12, "changed": []},
            "revisions.1.data.reviewers: position",
        ),
        (
            "revisions.1.data.scores",
            {"added": _table([5000], [0], [0.5]), "removed": _table([], [], [])},
            "revisions.1.data.scores.added: row 0: reviewer position 5000 is out of range",
        ),
        ("revisions.1.parent", 7, "revisions.1.parent: revision 7 is not an earlier revision"),
        ("revisions.1.event", 10**9, "revisions.1.event: 1000000000 is not a recorded event"),
    ],
)
def test_tampered_fields_are_refused_with_their_path(
    tmp_path: Path, document: dict[str, Any], path: str, value: Any, expected: str
) -> None:
    lines = _refused(tmp_path, _set(document, path, value))
    assert any(line.startswith(expected) for line in lines), lines


def test_a_negative_changed_position_is_refused(tmp_path: Path, document: dict[str, Any]) -> None:
    delta = document["revisions"][1]["data"]["reviewers"]
    assert delta is not None and delta["changed"]
    delta = copy.deepcopy(delta)
    delta["changed"][0][0] = -1
    lines = _refused(tmp_path, _set(document, "revisions.1.data.reviewers", delta))
    assert any(line.startswith("revisions.1.data.reviewers.changed.0.0:") for line in lines)


def test_rebuilding_damaged_history_raises_history_error_lines(document: dict[str, Any]) -> None:
    session = Session.model_validate(document)
    with pytest.raises(HistoryError, match="revision 9 is not in the history"):
        restore_data(session.revisions, 9, session.scores)
    data = restore_data(session.revisions, 2, session.scores)
    short = SessionData(**{**data.fields(), "papers": data.papers[:1]})
    with pytest.raises(HistoryError) as caught:
        session.revisions[1].plan(short)
    assert caught.value.lines[0].startswith("revision 2: assignments: row ")
    # Callers that caught the ValueError of a failed rebuild still do.
    assert isinstance(caught.value, ValueError) and isinstance(caught.value, InputError)
    # Scores changed behind the history: the first revision cannot be rebuilt; said in lines.
    shifted = ScoreTable.from_arrays(
        session.scores.reviewer, session.scores.paper, session.scores.value * 0.5
    )
    with pytest.raises(HistoryError, match=r"^revisions\.0\.data: the session's scores"):
        restore_data(session.revisions, 2, shifted)


_HOSTILE_VALUES = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.floats(allow_nan=False, allow_infinity=False),
    st.text(st.sampled_from("aZ9 @.-=\u200b\u00ad\ufeff\x00\u202ee\u0301\u00e9\n"), max_size=12),
    st.lists(st.integers(-3, 3), max_size=3),
    st.dictionaries(st.sampled_from(["length", "changed", "count", "x"]), st.integers(-2, 9)),
)


def _paths(node: Any, prefix: str = "") -> list[str]:
    found = [prefix] if prefix else []
    if isinstance(node, dict):
        for key, value in node.items():
            found += _paths(value, f"{prefix}.{key}" if prefix else key)
    elif isinstance(node, list):
        for k, value in enumerate(node[:3]):
            found += _paths(value, f"{prefix}.{k}" if prefix else str(k))
    return found


def _check_load(tmp_path: Path, raw: bytes) -> None:
    try:
        loaded = _load(tmp_path, raw)
    except InputError as error:
        assert all(line.startswith(f"{tmp_path / 's.json'}: ") for line in error.lines)
        return
    session_bytes(loaded)  # what loads can be saved again


_FEW = settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
_MANY = settings(_FEW, max_examples=3000)


@_FEW
@given(data=st.data())
def test_random_field_tampering_loads_or_is_refused(
    tmp_path: Path, document: dict[str, Any], data: st.DataObject
) -> None:
    _tamper_fields(tmp_path, document, data)


@pytest.mark.large
@_MANY
@given(data=st.data())
def test_much_random_field_tampering_loads_or_is_refused(
    tmp_path: Path, document: dict[str, Any], data: st.DataObject
) -> None:
    _tamper_fields(tmp_path, document, data)


def _tamper_fields(tmp_path: Path, document: dict[str, Any], data: st.DataObject) -> None:
    changed = document
    for _ in range(data.draw(st.integers(1, 3))):
        path = data.draw(st.sampled_from(_paths(changed)))
        changed = _set(changed, path, data.draw(_HOSTILE_VALUES))
    _check_load(tmp_path, json.dumps(changed).encode())


@_FEW
@given(data=st.data())
def test_random_byte_damage_loads_or_is_refused(
    tmp_path: Path, document: dict[str, Any], data: st.DataObject
) -> None:
    _damage_bytes(tmp_path, document, data)


@pytest.mark.large
@_MANY
@given(data=st.data())
def test_much_random_byte_damage_loads_or_is_refused(
    tmp_path: Path, document: dict[str, Any], data: st.DataObject
) -> None:
    _damage_bytes(tmp_path, document, data)


def _damage_bytes(tmp_path: Path, document: dict[str, Any], data: st.DataObject) -> None:
    raw = bytearray(json.dumps(document).encode())
    for _ in range(data.draw(st.integers(1, 4))):
        at = data.draw(st.integers(0, len(raw) - 1))
        kind = data.draw(st.sampled_from(["byte", "cut", "insert"]))
        if kind == "byte":
            raw[at] = data.draw(st.integers(0, 255))
        elif kind == "cut":
            del raw[at : at + data.draw(st.integers(1, 40))]
        else:
            raw[at:at] = b"\x00\xef\xbb\xbf\\u200b"
    _check_load(tmp_path, bytes(raw))
