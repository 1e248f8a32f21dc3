"""Bad CSV input: one test per kind, each message naming file, line and column; nothing written."""

from __future__ import annotations

from pathlib import Path

import pytest
from io_samples import snapshot, write_all

from review_alloc.io import import_csv
from review_alloc.model import InputError, Policy


def _errors(
    tmp_path: Path, ignore_extra: bool = False, policy: Policy | None = None, **changes: str | bytes
) -> tuple[list[str], dict[str, Path]]:
    files = write_all(tmp_path, **changes)
    before = snapshot(tmp_path)
    with pytest.raises(InputError) as caught:
        import_csv(
            files["papers"],
            files["reviewers"],
            files["conflicts"],
            files["scores"],
            ignore_extra=ignore_extra,
            policy=policy,
        )
    assert snapshot(tmp_path) == before, "a failed import must leave every file as it was"
    return caught.value.lines, files


def test_unclosed_quote(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers='paper_id,title\nP1,ok\nP2,"never closed\nP3,x\n')
    assert lines == [
        f"{f['papers']}: line 3: a quoted cell is not closed before the end of the file "
        "(check the \" marks) (separator ',')"
    ]


def test_malformed_quoting(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers='reviewer_id,name\nR1,"Cyra" Vellmarsh\n')
    assert len(lines) == 1
    assert lines[0].startswith(f"{f['reviewers']}: line 2: malformed quoting")


def test_wrong_number_of_cells(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, scores="reviewer_id,paper_id,score\nR1,P1,0.5\nR1,P2\n")
    assert lines == [f"{f['scores']}: line 3: 2 cells, but the header has 3 (separator ',')"]


def test_unknown_ids_in_scores_and_conflicts(tmp_path: Path) -> None:
    lines, f = _errors(
        tmp_path,
        scores="reviewer_id,paper_id,score\nR1,P1,0.5\nR7,P999,0.5\n",
        conflicts="reviewer_id,paper_id,reason\nR2,P4,friend\n",
    )
    assert lines == [
        f"{f['conflicts']}: line 2: column 'paper_id': unknown paper 'P4'",
        f"{f['scores']}: line 3: column 'reviewer_id': unknown reviewer 'R7'",
        f"{f['scores']}: line 3: column 'paper_id': unknown paper 'P999'",
    ]


def test_negative_cap(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers="reviewer_id,cap\nR1,4\nR2,-1\nR3,\n")
    assert lines == [f"{f['reviewers']}: line 3: column 'cap': '-1' is not a whole number >= 0"]


@pytest.mark.parametrize("bad", ["-2", "0", "2.5", "three"])
def test_bad_reviews(tmp_path: Path, bad: str) -> None:
    papers = f"paper_id,reviews\nP1,\nP2,3\nP3,{bad}\n"
    lines, f = _errors(tmp_path, papers=papers)
    assert lines == [f"{f['papers']}: line 4: column 'reviews': '{bad}' is not a whole number >= 1"]


def test_duplicate_paper_ids(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="paper_id\nP1\nP4\nP2\nP3\nP5\nP4\n")
    assert lines == [f"{f['papers']}: line 7: column 'paper_id': duplicate of line 3 ('P4')"]


def test_empty_id(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers="reviewer_id,name\nR1,a\n,Nameless\nR2,b\nR3,c\n")
    assert lines == [
        f"{f['reviewers']}: line 3: column 'reviewer_id': empty; every reviewer needs an id"
    ]


def test_duplicate_conflict_and_score_pairs(tmp_path: Path) -> None:
    lines, f = _errors(
        tmp_path,
        conflicts="reviewer_id,paper_id\nR2,P2\nR2,P2\n",
        scores="reviewer_id,paper_id,score\nR1,P1,1\nR1,P2,1\nR2,P3,1\nR2,P1,1\nR1,P2,0.5\n",
    )
    assert lines == [
        f"{f['conflicts']}: line 3: duplicate pair (R2, P2), first on line 2",
        f"{f['scores']}: line 6: duplicate pair (R1, P2), first on line 3",
    ]


def test_bad_senior_value(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers="reviewer_id,senior\nR1,yes\nR2,sometimes\nR3,no\n")
    assert lines == [
        f"{f['reviewers']}: line 3: column 'senior': 'sometimes' is not yes or no "
        "(true/false, y/n and 1/0 work too)"
    ]


def test_floor_above_cap(tmp_path: Path) -> None:
    lines, f = _errors(
        tmp_path,
        policy=Policy(cap=5),
        reviewers="reviewer_id,cap,floor\nR1,4,1\nR2,,\nR3,,\nR4,4,7\nR5,,6\n",
    )
    assert lines == [
        f"{f['reviewers']}: line 5: column 'floor': 7 exceeds cap 4",
        f"{f['reviewers']}: line 6: column 'floor': 6 exceeds cap 5 (the policy's)",
    ]


def test_min_reviews_above_reviews(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="paper_id,reviews,min_reviews\nP1,2,3\nP2,,4\nP3,,\n")
    assert lines == [
        f"{f['papers']}: line 2: column 'min_reviews': 3 exceeds reviews 2",
        f"{f['papers']}: line 3: column 'min_reviews': 4 exceeds reviews 3 (the policy's)",
    ]


def test_bad_email(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers="reviewer_id,email\nR1,cyra at wrenholt\nR2,\nR3,\n")
    assert lines == [
        f"{f['reviewers']}: line 2: column 'email': 'cyra at wrenholt' is not an e-mail "
        "address (expected name@domain)"
    ]


@pytest.mark.parametrize(
    "cell, message",
    [
        ("-0.5", "'-0.5' is not a number >= 0"),
        ("high", "'high' is not a number >= 0"),
        ("nan", "'nan' is not a finite number"),
        ("inf", "'inf' is not a finite number"),
        ("", "empty; every row needs a score"),
    ],
)
def test_bad_scores(tmp_path: Path, cell: str, message: str) -> None:
    lines, f = _errors(tmp_path, scores=f"reviewer_id,paper_id,score\nR1,P1,0.5\nR2,P2,{cell}\n")
    assert lines == [f"{f['scores']}: line 3: column 'score': {message}"]


def test_non_utf8_file(tmp_path: Path) -> None:
    data = b"paper_id,title\nP1,ok\nP2,Caf" + b"\xe9 models\n"
    lines, f = _errors(tmp_path, papers=data)
    offset = data.index(b"\xe9")
    assert lines == [
        f"{f['papers']}: line 3: not UTF-8 text (byte 0xe9 at byte offset {offset}); "
        "save the file as UTF-8 (or UTF-16 with a byte-order mark), or name its encoding with "
        "--encoding (for example --encoding cp1252); other encodings are read only when named"
    ]


def test_missing_required_column(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, scores="reviewer_id,score\nR1,0.5\n")
    assert lines == [
        f"{f['scores']}: line 1: missing required column 'paper_id' (separator ',')"
    ]


def test_missing_header(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="P1,Tidal sensing\nP2,Sediment models\n")
    assert len(lines) == 1
    assert lines[0].startswith(
        f"{f['papers']}: line 1: no header row (separator ','): the first row must name"
    )
    assert "found 'P1', 'Tidal sensing'" in lines[0]


def test_extra_column_without_ignore_extra(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="paper_id,colour\nP1,blue\n")
    assert lines == [
        f"{f['papers']}: line 1: unknown column 'colour' (separator ','); known columns are "
        "paper_id, title, "
        "topics, reviews, min_reviews, authors, institutions, abstract, keywords "
        "(--ignore-extra skips unknown columns)"
    ]


def test_extra_column_with_ignore_extra_still_checks_the_rest(tmp_path: Path) -> None:
    lines, f = _errors(
        tmp_path, ignore_extra=True, papers="paper_id,colour,reviews\nP1,blue,x\nP2,red,\nP3,,\n"
    )
    assert lines == [f"{f['papers']}: line 2: column 'reviews': 'x' is not a whole number >= 1"]


def test_column_named_twice(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="paper_id,title,Title\nP1,a,b\n")
    assert lines == [f"{f['papers']}: line 1: column 'title' appears twice (cells 2 and 3)"]


def test_empty_file(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, conflicts="")
    assert lines == [
        f"{f['conflicts']}: the file is empty; the first row must name the columns "
        "(reviewer_id, paper_id, reason)"
    ]


def test_header_without_rows(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, reviewers="reviewer_id,name\n")
    assert f"{f['reviewers']}: no reviewers: the file has a header but no rows" in lines


def test_file_that_does_not_exist(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], tmp_path / "nobody.csv", files["conflicts"])
    assert caught.value.lines == [f"{tmp_path / 'nobody.csv'}: no such file"]


def test_unknown_kind(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    with pytest.raises(InputError, match="kind: 'journal' is not one of conference, panel"):
        import_csv(files["papers"], files["reviewers"], kind="journal")


def test_twenty_errors_per_file_then_a_count(tmp_path: Path) -> None:
    rows = "".join(f"R1,P{k},0.5\n" for k in range(100, 125))
    lines, f = _errors(tmp_path, scores="reviewer_id,paper_id,score\n" + rows)
    assert len(lines) == 21
    assert lines[0] == f"{f['scores']}: line 2: column 'paper_id': unknown paper 'P100'"
    assert lines[-1] == f"... and 5 more errors in {f['scores']}"


def test_errors_are_collected_across_all_files(tmp_path: Path) -> None:
    lines, f = _errors(
        tmp_path,
        papers="paper_id,reviews\nP1,0\nP2,\nP3,\n",
        reviewers="reviewer_id,cap\nR1,x\nR2,\nR3,\n",
        conflicts="reviewer_id,paper_id\nR1,P9\n",
        scores="reviewer_id,paper_id,score\nR9,P1,1\n",
    )
    assert [line.split(": ")[0] for line in lines] == [
        str(f["papers"]),
        str(f["reviewers"]),
        str(f["conflicts"]),
        str(f["scores"]),
    ]
    # P1 and R1 had bad cells but known ids: the other files are not blamed for them.
    assert not any(
        "unknown paper 'P1'" in line or "unknown reviewer 'R1'" in line for line in lines
    )


def test_an_unreadable_papers_file_does_not_blame_the_scores(tmp_path: Path) -> None:
    lines, f = _errors(tmp_path, papers="", scores="reviewer_id,paper_id,score\nR1,P1,-3\n")
    assert lines[1:] == [f"{f['scores']}: line 2: column 'score': '-3' is not a number >= 0"]
