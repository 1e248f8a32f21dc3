"""Packaging: an SPDX licence with its file in the wheel, dependency floors the installed
versions meet, and the user's folders where the platform keeps them (platformdirs)."""

from __future__ import annotations

import re
import sys
import tomllib
from importlib.metadata import version
from pathlib import Path

import pytest

from review_alloc.flow._cache import numba_cache_dir
from review_alloc.workspace import data_folder

ROOT = Path(__file__).resolve().parents[2]
PROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]


def _release(text: str) -> tuple[int, ...]:
    return tuple(int(part) for part in re.findall(r"\d+", text)[:3])


def test_the_licence_is_an_spdx_string_with_its_file() -> None:
    assert PROJECT["license"] == "MIT"
    assert PROJECT["license-files"] == ["LICENSE"]
    text = (ROOT / "LICENSE").read_text(encoding="utf-8")
    assert text.startswith("MIT License") and "the review-alloc developers" in text


def test_installed_versions_meet_every_floor() -> None:
    floors = {}
    for line in PROJECT["dependencies"]:
        name, floor = re.fullmatch(r"([A-Za-z0-9_.-]+)>=([0-9.]+)", line).groups()
        floors[name] = floor
    # The app crashes on start with textual before 3.2 (its screens use 3.x widgets).
    assert _release(floors["textual"]) >= (3, 2)
    assert "platformdirs" in floors
    for name, floor in floors.items():
        assert _release(version(name)) >= _release(floor), name


@pytest.mark.skipif(sys.platform != "linux", reason="the XDG variables are Linux's convention")
def test_user_folders_follow_the_platform(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    # platformdirs reads the XDG variables on Linux (the XDG Base Directory specification).
    assert data_folder() == tmp_path / "data" / "review-alloc"
    assert numba_cache_dir() == tmp_path / "cache" / "review-alloc" / "numba"
