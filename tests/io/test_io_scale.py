"""Score files at scale: the bulk reader keeps large imports to seconds."""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np
import pytest

from review_alloc.io import import_csv
from review_alloc.model import load_session, save_session


def _write_inputs(folder: Path, n_r: int, n_p: int, rows: int, seed: int) -> tuple[Path, ...]:
    rng = np.random.default_rng(seed)
    keys = rng.choice(n_r * n_p, rows, replace=False)
    values = rng.integers(0, 10_000, rows) / 1000
    papers = folder / "papers.csv"
    papers.write_text("paper_id,title\n" + "".join(f"P{i},Paper {i}\n" for i in range(n_p)))
    reviewers = folder / "reviewers.csv"
    reviewers.write_text("reviewer_id\n" + "".join(f"R{j}\n" for j in range(n_r)))
    scores = folder / "scores.csv"
    with scores.open("w") as handle:
        handle.write("reviewer_id,paper_id,score\n")
        handle.writelines(
            f"R{k // n_p},P{k % n_p},{v}\n"
            for k, v in zip(keys.tolist(), values.tolist(), strict=True)
        )
    expected = folder / "expected.npz"
    np.savez(expected, reviewer=keys // n_p, paper=keys % n_p, value=values)
    return papers, reviewers, scores, expected


def _check_table(session_scores: object, expected: Path) -> None:
    data = np.load(expected)
    order = np.lexsort((data["paper"], data["reviewer"]))
    assert np.array_equal(session_scores.reviewer, data["reviewer"][order])  # type: ignore[attr-defined]
    assert np.array_equal(session_scores.paper, data["paper"][order])  # type: ignore[attr-defined]
    assert np.array_equal(session_scores.value, data["value"][order])  # type: ignore[attr-defined]


def test_three_hundred_thousand_scores_import_quickly(tmp_path: Path) -> None:
    papers, reviewers, scores, expected = _write_inputs(tmp_path, 500, 1500, 300_000, seed=5)
    started = time.perf_counter()
    session = import_csv(papers, reviewers, scores=scores)
    assert time.perf_counter() - started < 5.0
    assert len(session.scores) == 300_000
    _check_table(session.scores, expected)


def test_one_bad_row_among_many_is_found_with_its_line(tmp_path: Path) -> None:
    papers, reviewers, scores, _ = _write_inputs(tmp_path, 50, 100, 4000, seed=9)
    lines = scores.read_text().splitlines()
    lines[2500] = "R1,P7777,0.5"
    scores.write_text("\n".join(lines) + "\n")
    with pytest.raises(Exception) as caught:
        import_csv(papers, reviewers, scores=scores)
    assert str(caught.value) == f"{scores}: line 2501: column 'paper_id': unknown paper 'P7777'"


@pytest.mark.large
def test_three_million_scores_import_save_and_load(tmp_path: Path) -> None:
    papers, reviewers, scores, expected = _write_inputs(tmp_path, 3000, 10_000, 3_000_000, seed=8)
    started = time.perf_counter()
    session = import_csv(papers, reviewers, scores=scores)
    imported = time.perf_counter()
    save_session(session, tmp_path / "huge.json")
    loaded = load_session(tmp_path / "huge.json")
    done = time.perf_counter()
    assert imported - started < 10.0
    assert done - imported < 5.0
    assert loaded == session
    _check_table(loaded.scores, expected)
