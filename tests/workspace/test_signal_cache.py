"""The fitted signal matrices cached per user: a command that explains a pair reads the fit of
the very same texts and topics instead of fitting again, with exactly the same numbers."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from review_alloc.cli import main
from review_alloc.model import save_session
from review_alloc.plan import similarity
from review_alloc.samples import workshop
from review_alloc.workspace import Workspace
from review_alloc.workspace import scoring as scoring_module


@pytest.fixture
def cache(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    folder = tmp_path / "cache"
    monkeypatch.setattr(scoring_module, "signal_cache_folder", lambda: folder)
    return folder


def _no_fit(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(session: object) -> None:
        raise AssertionError("fitted again although the cache held this fit")

    monkeypatch.setattr(similarity.SignalMatrices, "of", classmethod(lambda cls, s: refuse(s)))


def test_a_cached_fit_gives_exactly_the_fresh_numbers(
    cache: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    s = workshop()
    reviewer, paper = s.reviewers[3].id, s.papers[5].id
    fresh = similarity.SignalMatrices.of(s)
    first = Workspace(s, None).pair_report(reviewer, paper)
    assert len(list(cache.glob("*.npz"))) == 1
    ws = Workspace(workshop(), None)  # the sample itself is made with a fit
    _no_fit(monkeypatch)
    again = ws.pair_report(reviewer, paper)
    assert again.to_json() == first.to_json()
    kept = ws._signal_matrices()
    assert kept is not None
    for name in ("paper_text", "reviewer_text", "paper_topics", "reviewer_topics"):
        a, b = getattr(kept, name), getattr(fresh, name)
        assert a.shape == b.shape
        assert np.array_equal(a.data, b.data) and a.data.dtype == b.data.dtype
        assert np.array_equal(a.indices, b.indices) and np.array_equal(a.indptr, b.indptr)
    # Every pair's text and topic values, exactly.
    n_r, n_p = len(s.reviewers), len(s.papers)
    r, p = np.repeat(np.arange(n_r), n_p), np.tile(np.arange(n_p), n_r)
    for x, y in zip(kept.pair_values(r, p), fresh.pair_values(r, p), strict=True):
        assert np.array_equal(x, y)


def test_other_texts_or_topics_are_fitted_anew(cache: Path) -> None:
    s = workshop()
    base = scoring_module.signal_key(s)
    papers = list(s.papers)
    papers[0] = papers[0].model_copy(update={"abstract": papers[0].abstract + " tidal flats"})
    assert scoring_module.signal_key(s.model_copy(update={"papers": papers})) != base
    reviewers = list(s.reviewers)
    reviewers[0] = reviewers[0].model_copy(update={"topics": [*reviewers[0].topics, "moss"]})
    assert scoring_module.signal_key(s.model_copy(update={"reviewers": reviewers})) != base
    # A withdrawal or a cap changes no text: the same fit.
    reviewers = list(s.reviewers)
    reviewers[0] = reviewers[0].model_copy(update={"withdrawn": True, "cap": 2})
    assert scoring_module.signal_key(s.model_copy(update={"reviewers": reviewers})) == base


def test_a_damaged_cache_file_is_fitted_again_and_replaced(
    cache: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    s = workshop()
    path = cache / f"{scoring_module.signal_key(s)}.npz"
    cache.mkdir(parents=True)
    path.write_bytes(b"not an npz file")
    first = Workspace(s, None).pair_report(s.reviewers[0].id, s.papers[0].id)
    assert path.read_bytes()[:2] == b"PK"  # an npz (zip) file now
    ws = Workspace(workshop(), None)  # the sample itself is made with a fit
    _no_fit(monkeypatch)
    again = ws.pair_report(s.reviewers[0].id, s.papers[0].id)
    assert again.to_json() == first.to_json()


def test_only_the_most_recent_fits_are_kept(cache: Path) -> None:
    cache.mkdir(parents=True)
    for k in range(scoring_module.SIGNAL_CACHE_KEEP + 3):
        (cache / f"old{k}.npz").write_bytes(b"x")
    Workspace(workshop(), None).pair_report(workshop().reviewers[0].id, workshop().papers[0].id)
    assert len(list(cache.glob("*.npz"))) == scoring_module.SIGNAL_CACHE_KEEP


def test_the_pair_command_reads_the_cached_fit(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    # The per-user cache folder follows XDG_CACHE_HOME (platformdirs on Linux).
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    s = workshop()
    argv = ["pair", str(path), "--reviewer", s.reviewers[2].id, "--paper", s.papers[1].id]
    assert main([*argv, "--json"]) == 0
    first = json.loads(capsys.readouterr().out)
    assert list((tmp_path / "xdg").rglob("*.npz"))
    _no_fit(monkeypatch)
    assert main([*argv, "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == first
