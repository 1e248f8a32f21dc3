"""Session files: round trips, atomic saves, and load errors that name the field."""

from __future__ import annotations

import json
import os
import time
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from model_samples import make_session

import review_alloc.model.storage as storage
from review_alloc.model import (
    InputError,
    Paper,
    Reviewer,
    ScoreTable,
    Session,
    atomic_write_text,
    load_session,
    save_session,
    session_json_schema,
)


def _saved(tmp_path: Path, document: dict[str, object], name: str = "s.json") -> Path:
    path = tmp_path / name
    path.write_text(json.dumps(document), encoding="utf-8")
    return path


def _document() -> dict[str, object]:
    return json.loads(make_session().model_dump_json())


def test_save_then_load_gives_an_equal_session(tmp_path: Path, session: Session) -> None:
    path = tmp_path / "workshop.json"
    save_session(session, path)
    loaded = load_session(path)
    assert loaded == session
    assert np.array_equal(loaded.scores.value, session.scores.value)
    assert loaded.plan is not None and loaded.plan.created_at == session.plan.created_at  # type: ignore[union-attr]
    assert not list(tmp_path.glob(".*.tmp"))


def test_saved_document_matches_the_published_schema(tmp_path: Path, session: Session) -> None:
    path = tmp_path / "workshop.json"
    save_session(session, path)
    # Outside check: the jsonschema package's validator for the schema's own draft.
    schema = session_json_schema()
    validator = jsonschema.validators.validator_for(schema)
    validator.check_schema(schema)
    validator(schema).validate(json.loads(path.read_text(encoding="utf-8")))
    assert schema["properties"]["scores"]["properties"]["count"]["minimum"] == 0


def test_failed_replace_leaves_the_old_file_intact(
    tmp_path: Path, session: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "workshop.json"
    save_session(session, path)
    before = path.read_bytes()

    def broken_replace(src: str, dst: str) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(storage.os, "replace", broken_replace)
    changed = session.model_copy(update={"name": "Renamed"})
    with pytest.raises(InputError, match=r"workshop.json: cannot save \(No space left on device\)"):
        save_session(changed, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["workshop.json"]


def test_failed_write_leaves_the_old_file_and_no_temp_file(
    tmp_path: Path, session: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "workshop.json"
    save_session(session, path)
    before = path.read_bytes()

    real_fdopen = os.fdopen

    class BrokenHandle:
        def __init__(self, handle: object) -> None:
            self.handle = handle

        def __enter__(self) -> BrokenHandle:
            return self

        def __exit__(self, *exc: object) -> None:
            self.handle.close()  # type: ignore[attr-defined]

        def write(self, data: bytes) -> int:
            raise OSError(5, "Input/output error")

    monkeypatch.setattr(storage.os, "fdopen", lambda fd, mode: BrokenHandle(real_fdopen(fd, mode)))
    with pytest.raises(InputError, match="Input/output error"):
        save_session(session.model_copy(update={"name": "Renamed"}), path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["workshop.json"]


def test_atomic_write_keeps_the_mode_of_the_file_it_replaces(tmp_path: Path) -> None:
    path = tmp_path / "notes.txt"
    path.write_text("old")
    path.chmod(0o640)
    atomic_write_text(path, "new")
    assert path.read_text() == "new"
    assert path.stat().st_mode & 0o777 == 0o640


def test_missing_folder_is_reported(tmp_path: Path, session: Session) -> None:
    with pytest.raises(InputError, match=r"cannot save"):
        save_session(session, tmp_path / "no-such-folder" / "s.json")


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"s.json: no such file"):
        load_session(tmp_path / "s.json")


def test_empty_file(tmp_path: Path) -> None:
    (tmp_path / "s.json").write_text("")
    with pytest.raises(InputError, match=r"s.json: the file is empty"):
        load_session(tmp_path / "s.json")


def test_bad_json_names_the_file_and_position(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    path.write_text('{"format_version": 1, "name": ')
    with pytest.raises(InputError, match=r"s.json: Invalid JSON: .*line 1 column"):
        load_session(path)


def test_wrong_format_version(tmp_path: Path) -> None:
    document = _document()
    document["format_version"] = 7
    document["surprise"] = True
    with pytest.raises(InputError) as caught:
        load_session(_saved(tmp_path, document))
    assert caught.value.lines == [
        f"{tmp_path / 's.json'}: format_version: this file is format 7; this version reads format 1"
    ]


def test_field_errors_name_the_path(tmp_path: Path) -> None:
    document = _document()
    document["papers"][1]["reviews"] = 0  # type: ignore[index]
    with pytest.raises(InputError) as caught:
        load_session(_saved(tmp_path, document))
    assert caught.value.lines == [
        f"{tmp_path / 's.json'}: papers.1.reviews: Input should be greater than or equal to 1"
    ]


def test_duplicate_ids_in_json_name_both_positions(tmp_path: Path) -> None:
    document = _document()
    document["reviewers"].append({"id": "R2"})  # type: ignore[attr-defined]
    with pytest.raises(InputError) as caught:
        load_session(_saved(tmp_path, document))
    assert caught.value.lines == [
        f"{tmp_path / 's.json'}: reviewers.3.id: duplicate reviewer id 'R2' (first at reviewers.1)"
    ]


def test_bad_score_encoding_names_the_column(tmp_path: Path) -> None:
    document = _document()
    document["scores"]["paper"] = "%%%"  # type: ignore[index]
    with pytest.raises(InputError, match=r"s.json: scores: paper: not valid base64"):
        load_session(_saved(tmp_path, document))


def test_at_most_twenty_lines_then_a_count(tmp_path: Path) -> None:
    document = _document()
    document["papers"] = [{"id": f"P{k}", "reviews": 0} for k in range(25)]
    document.update(plan=None, pins=[], blocks=[], conflicts=[])
    document["scores"] = ScoreTable.empty().to_document()
    with pytest.raises(InputError) as caught:
        load_session(_saved(tmp_path, document))
    assert len(caught.value.lines) == 21
    assert caught.value.lines[-1] == f"... and 5 more errors in {tmp_path / 's.json'}"


def test_a_large_score_table_round_trips_quickly(tmp_path: Path) -> None:
    rng = np.random.default_rng(7)
    n_r, n_p, rows = 600, 2000, 300_000
    keys = rng.choice(n_r * n_p, rows, replace=False)
    table = ScoreTable.from_arrays(keys // n_p, keys % n_p, rng.random(rows))
    session = Session(
        name="Large",
        papers=[Paper(id=f"P{i}") for i in range(n_p)],
        reviewers=[Reviewer(id=f"R{j}") for j in range(n_r)],
        scores=table,
    )
    path = tmp_path / "large.json"
    started = time.perf_counter()
    save_session(session, path)
    loaded = load_session(path)
    elapsed = time.perf_counter() - started
    assert loaded.scores == table
    assert elapsed < 5.0
    assert path.stat().st_size < rows * 16


@pytest.mark.large
def test_three_million_scores_save_and_load_in_seconds(tmp_path: Path) -> None:
    rng = np.random.default_rng(11)
    n_r, n_p, rows = 3000, 10_000, 3_000_000
    keys = rng.choice(n_r * n_p, rows, replace=False)
    table = ScoreTable.from_arrays(keys // n_p, keys % n_p, rng.random(rows).round(4))
    session = Session(
        name="Huge",
        papers=[Paper(id=f"P{i}") for i in range(n_p)],
        reviewers=[Reviewer(id=f"R{j}") for j in range(n_r)],
        scores=table,
    )
    path = tmp_path / "huge.json"
    started = time.perf_counter()
    save_session(session, path)
    saved = time.perf_counter()
    loaded = load_session(path)
    done = time.perf_counter()
    assert loaded.scores == table
    assert saved - started < 4.0 and done - saved < 4.0
