"""The user's copy of the demo workshop across versions: a copy still as written follows a
changed built-in sample, a copy the chair changed is never touched (the new sample goes beside
it, and the chair is told)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from review_alloc import samples
from review_alloc.model import load_session, save_session
from review_alloc.workspace import Workspace, demo_session_path, refresh_demo
from review_alloc.workspace.files import DEMO_FILE, DEMO_FRESH, DEMO_STAMP


@pytest.fixture
def data(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    # The per-user data folder follows XDG_DATA_HOME (platformdirs on Linux).
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
    return tmp_path / "review-alloc"


def _new_version(monkeypatch: pytest.MonkeyPatch, name: str) -> None:
    """A later version of the program whose demo workshop is named differently."""
    made = samples.workshop()
    monkeypatch.setattr(samples, "workshop_key", lambda: "a later version's sample")
    monkeypatch.setattr(samples, "workshop", lambda: made.model_copy(update={"name": name}))


def test_the_first_start_writes_the_copy_and_its_stamp(data: Path) -> None:
    path, note = refresh_demo()
    assert path == data / DEMO_FILE and note is None
    assert load_session(path).name == samples.workshop().name
    stamp = json.loads((data / DEMO_STAMP).read_text())
    assert stamp["sample"] == samples.workshop_key() and stamp["written"]
    before = path.stat().st_mtime_ns
    assert refresh_demo() == (path, None) and path.stat().st_mtime_ns == before


def test_an_unchanged_copy_follows_a_new_sample(
    data: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = demo_session_path()
    _new_version(monkeypatch, "Harbourlight Workshop, second edition")
    found, note = refresh_demo()
    assert found == path and note is not None and "unchanged" in note
    assert load_session(path).name == "Harbourlight Workshop, second edition"
    assert sorted(p.name for p in data.glob("*.json") if p.name != DEMO_STAMP) == [DEMO_FILE]
    assert refresh_demo() == (path, None)


def test_a_copy_the_chair_changed_is_kept_and_the_new_sample_goes_beside_it(
    data: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = demo_session_path()
    ws = Workspace.open(path)
    ws.withdraw_reviewer(ws.session.reviewers[0].id, "on leave")
    ws.save()
    theirs = path.read_bytes()
    _new_version(monkeypatch, "Harbourlight Workshop, second edition")
    found, note = refresh_demo()
    assert found == path and path.read_bytes() == theirs
    fresh = data / DEMO_FRESH.format(key="a later ve")
    assert note is not None and "kept" in note and str(fresh) in note
    assert load_session(fresh).name == "Harbourlight Workshop, second edition"
    # Said once; and theirs is never replaced by any later sample either.
    assert refresh_demo() == (path, None)
    monkeypatch.setattr(samples, "workshop_key", lambda: "a third version's sample")
    assert refresh_demo()[0] == path and path.read_bytes() == theirs


def test_a_copy_without_a_stamp_is_of_unknown_origin_and_kept(
    data: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # An earlier version wrote the copy and no stamp; the chair may have edited it by hand.
    data.mkdir(parents=True)
    old = samples.workshop().model_copy(update={"name": "Harbourlight Workshop, first edition"})
    save_session(old, data / DEMO_FILE)
    theirs = (data / DEMO_FILE).read_bytes()
    path, note = refresh_demo()
    assert path.read_bytes() == theirs and note is not None and "kept" in note
    fresh = data / DEMO_FRESH.format(key=samples.workshop_key()[:10])
    assert load_session(fresh).name == samples.workshop().name
