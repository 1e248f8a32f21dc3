"""Shared set-up of the app tests: a private data folder and a fixed clock."""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path

import pytest

from review_alloc.tui import ReviewAllocApp, make_app

FIXED_TIME = datetime(2026, 1, 5, 9, 30, tzinfo=UTC)
"""Every plan made in these tests carries this time, so screens stay the same run to run.

It lies in the past, so that a change made after a plan (recorded at the real time) counts as
newer than the plan, as it does for a chair."""


@pytest.fixture(autouse=True)
def private_data_folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """Point the user's data folder at a temporary one (the demo copy is written there)."""
    folder = tmp_path / "data"
    monkeypatch.setenv("XDG_DATA_HOME", str(folder))
    return folder


@pytest.fixture
def new_app() -> Callable[..., ReviewAllocApp]:
    """The factory the command line uses, with the clock fixed."""

    def build(path: Path | None = None) -> ReviewAllocApp:
        return make_app(path, clock=lambda: FIXED_TIME)

    return build
