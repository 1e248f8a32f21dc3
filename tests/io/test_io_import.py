"""Importing good CSV files: every column read, formats tolerated, results as documented."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from io_samples import write, write_all

from review_alloc.io import import_csv
from review_alloc.io.reading import FileProblems, open_table
from review_alloc.io.score_rows import SCORES, _diagnose, _fast
from review_alloc.io.sources import ReadOptions
from review_alloc.model import Policy


def _import(files: dict[str, Path], **options: object):  # noqa: ANN202
    return import_csv(
        files["papers"], files["reviewers"], files["conflicts"], files["scores"], **options
    )


def test_every_column_is_read(tmp_path: Path) -> None:
    session = _import(write_all(tmp_path), name="Harbour Workshop")
    assert session.name == "Harbour Workshop" and session.kind == "conference"
    p1, p2, p3 = session.papers
    assert (p1.id, p1.title, p1.topics) == (
        "P1",
        "Tidal sensing with drifting buoys",
        ["buoys", "acoustics"],
    )
    assert (p1.reviews, p1.min_reviews, p1.institutions) == (None, None, ["Northmere Institute"])
    assert p2.title == "Sediment models, revisited"
    assert p2.authors == ["bram.ostholt@kelreach.example", "lior.vang@kelreach.example"]
    assert (p2.reviews, p2.min_reviews, p3.reviews) == (2, 1, 4)
    r1, r2, r3 = session.reviewers
    assert (r1.email, r1.institution, r1.cap, r1.floor, r1.senior) == (
        "cyra@wrenholt.example",
        "Wrenholt University",
        4,
        1,
        True,
    )
    assert (r2.cap, r2.floor, r2.senior, r3.email, r3.senior) == (None, None, False, "", False)
    assert [(c.reviewer, c.paper, c.reason) for c in session.conflicts] == [
        ("R2", "P2", "former advisor"),
        ("R3", "P1", "declared"),
    ]
    assert session.scores.as_dict() == {(0, 0): 0.9, (0, 1): 0.25, (1, 1): 1.0, (2, 2): 0.0}


def test_policy_and_kind_are_passed_on(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    policy = Policy(reviews=4, min_reviews=3, cap=8, unscored="exclude")
    session = _import(files, policy=policy, kind="panel")
    assert session.policy == policy and session.kind == "panel"
    assert session.paper_reviews_array().tolist() == [4, 2, 4]
    assert session.name == tmp_path.name


def test_conflicts_and_scores_are_optional(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    session = import_csv(files["papers"], files["reviewers"])
    assert session.conflicts == [] and len(session.scores) == 0


def test_only_the_id_columns_are_required_and_order_is_free(tmp_path: Path) -> None:
    files = write_all(
        tmp_path,
        papers="title,paper_id\nFirst,P1\nSecond,P2\n",
        reviewers="Reviewer_ID\nR1\n",
        conflicts="paper_id,reviewer_id\nP2,R1\n",
        scores="score,paper_id,reviewer_id\n0.5,P1,R1\n",
    )
    session = _import(files)
    assert [p.title for p in session.papers] == ["First", "Second"]
    assert session.conflicts[0].paper == "P2"
    assert session.scores.as_dict() == {(0, 0): 0.5}


def test_rfc_4180_quoting_and_line_breaks(tmp_path: Path) -> None:
    # RFC 4180 section 2, rules 5-7: quoted fields may hold commas, CRLF and doubled quotes;
    # records may end in CRLF.
    papers = 'paper_id,title\r\nP1,"Buoys, sonar and ""drift"""\r\nP2,"Two\r\nlines"\r\n'
    files = write_all(
        tmp_path,
        papers=papers,
        conflicts="reviewer_id,paper_id\n",
        scores="reviewer_id,paper_id,score\n",
    )
    session = _import(files)
    assert [p.title for p in session.papers] == ['Buoys, sonar and "drift"', "Two\r\nlines"]


def test_byte_order_mark_blank_rows_and_spaces_are_tolerated(tmp_path: Path) -> None:
    files = write_all(
        tmp_path,
        papers="\ufeffpaper_id,title\nP1,A\n\n,\nP2,B\n\n",
        scores="reviewer_id,paper_id,score\n R1 , P2 , 0.5 \n\nR2,P1,1e-3\n",
    )
    session = _import(files, ignore_extra=False)
    assert [p.id for p in session.papers] == ["P1", "P2"]
    assert session.scores.as_dict() == {(0, 1): 0.5, (1, 0): 0.001}


@pytest.mark.parametrize(
    "text, expected",
    [
        ("yes", True),
        ("No", False),
        ("TRUE", True),
        ("false", False),
        ("1", True),
        ("0", False),
        ("Y", True),
        ("n", False),
        ("", False),
    ],
)
def test_senior_accepts_the_usual_spellings(tmp_path: Path, text: str, expected: bool) -> None:
    files = write_all(tmp_path, reviewers=f"reviewer_id,senior\nR1,{text}\nR2,no\nR3,no\n")
    assert _import(files).reviewers[0].senior is expected


def test_extra_columns_are_skipped_with_ignore_extra(tmp_path: Path) -> None:
    files = write_all(tmp_path, papers="paper_id,colour,\nP1,blue,\nP2,red,\nP3,green,\n")
    session = _import(files, ignore_extra=True)
    assert [p.id for p in session.papers] == ["P1", "P2", "P3"]


def test_the_fast_and_the_row_by_row_score_readers_agree(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    reviewers = {f"R{j}": j for j in range(40)}
    papers = {f"P{i}": i for i in range(70)}
    keys = rng.choice(40 * 70, 900, replace=False)
    lines = ["paper_id,score,reviewer_id"] + [
        f"P{k % 70},{v:.3f},R{k // 70}"
        for k, v in zip(keys.tolist(), rng.random(900).tolist(), strict=True)
    ]
    path = write(tmp_path, "scores.csv", "\n".join(lines) + "\n")
    problems = FileProblems(str(path))
    opened = open_table(path, SCORES, ReadOptions(), problems)
    assert opened is not None
    header, _, source = opened
    fast = _fast(source, header, reviewers, papers)
    slow = _diagnose(source, header, reviewers, papers, problems)
    assert fast is not None and slow is not None and not problems
    for column, expected in zip(fast, (slow.reviewer, slow.paper, slow.value), strict=True):
        assert np.array_equal(column, expected)
