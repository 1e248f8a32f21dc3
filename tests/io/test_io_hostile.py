"""Hostile CSV input: invisible characters, mixed Unicode forms, NUL bytes, huge numbers.

Every problem is an InputError line naming file, line and column; nothing else escapes.
"""

from __future__ import annotations

import shutil
import unicodedata
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from io_samples import PAPERS, REVIEWERS, SCORES, write_all

from review_alloc.io import import_csv
from review_alloc.model import MAX_COUNT, InputError, Session, matched_text_problem

WORKSHOP = Path(__file__).resolve().parents[2] / "sample_sessions" / "workshop-csv"


def _import(files: dict[str, Path]) -> Session:
    return import_csv(files["papers"], files["reviewers"], files["conflicts"], files["scores"])


def _lines(tmp_path: Path, **changes: str | bytes) -> tuple[list[str], dict[str, Path]]:
    files = write_all(tmp_path, **changes)
    with pytest.raises(InputError) as caught:
        _import(files)
    return caught.value.lines, files


def test_an_invisible_character_in_an_institution_is_refused_with_its_place(
    tmp_path: Path,
) -> None:
    reviewers = REVIEWERS.replace("Ashmere Research Centre", "Ashmere\u200b Research Centre")
    lines, f = _lines(tmp_path, reviewers=reviewers)
    assert lines == [
        f"{f['reviewers']}: line 3: column 'institution': contains the invisible character "
        "U+200B (zero-width space) at character 8; such characters make equal-looking values "
        "differ, so retype the value without it"
    ]


@pytest.mark.parametrize(
    ("kind", "old", "new", "line", "column", "what"),
    [
        ("reviewers", "dario@", "da\x00rio@", 3, "email", "control character U+0000 (null)"),
        ("reviewers", "buoys", "bu\u00adoys", 2, "topics", "U+00AD (soft hyphen)"),
        ("reviewers", "\nR3,", "\nR\ufeff3,", 4, "reviewer_id", "U+FEFF (byte-order mark)"),
        ("papers", "Kelreach College", "Kel\u202ereach College", 3, "institutions", "U+202E"),
        ("papers", "\nP3,", "\nP\u200d3,", 4, "paper_id", "U+200D (zero-width joiner)"),
        ("papers", "ada.quill@", "ada\u2060.quill@", 2, "authors", "U+2060 (word joiner)"),
        ("conflicts", "R2,P2", "R2\u200b,P2", 2, "reviewer_id", "U+200B (zero-width space)"),
        ("scores", "R1,P2", "R1,P\u200b2", 3, "paper_id", "U+200B (zero-width space)"),
    ],
)
def test_hostile_characters_in_matched_columns(
    tmp_path: Path, kind: str, old: str, new: str, line: int, column: str, what: str
) -> None:
    base = {"papers": PAPERS, "reviewers": REVIEWERS, "scores": SCORES}.get(kind)
    if base is None:
        from io_samples import CONFLICTS as base
    assert old in base
    lines, f = _lines(tmp_path, **{kind: base.replace(old, new, 1)})
    expected = f"{f[kind]}: line {line}: column {column!r}: contains the "
    assert any(x.startswith(expected) and what in x for x in lines), lines


def test_free_text_is_cleaned_and_a_file_bom_is_fine(tmp_path: Path) -> None:
    papers = "\ufeff" + PAPERS.replace("Sonar calibration", "So\u200bnar\x00 cali\u00adbration")
    reviewers = REVIEWERS.replace("Cyra Vellmarsh", "\u202eCyra\ufeff Vellmarsh")
    session = _import(write_all(tmp_path, papers=papers, reviewers=reviewers))
    assert session.papers[2].title == "Sonar calibration"
    assert session.reviewers[0].name == "Cyra Vellmarsh"


def test_ids_in_composed_and_decomposed_form_match_across_files(tmp_path: Path) -> None:
    composed, decomposed = "P-\u00e9t\u00e9", "P-e\u0301te\u0301"
    papers = PAPERS.replace("\nP1,", f"\n{decomposed},")
    scores = SCORES.replace("R1,P1,", f"R1,{composed},")
    conflicts = f"reviewer_id,paper_id,reason\nR3,{decomposed},\n"
    session = _import(write_all(tmp_path, papers=papers, scores=scores, conflicts=conflicts))
    assert session.papers[0].id == composed == session.conflicts[0].paper
    assert session.scores.get(0, 0) == 0.9


@pytest.mark.parametrize(
    ("kind", "old", "new", "line", "column", "message"),
    [
        ("reviewers", ",4,1,yes", ",100000000000000000000,1,yes", 2, "cap", "is above 10000"),
        ("reviewers", ",4,1,yes", f",{MAX_COUNT + 1},1,yes", 2, "cap", "is above 10000"),
        ("reviewers", ",4,1,yes", ",4," + "9" * 5000 + ",yes", 2, "floor", "(5000 characters)"),
        ("papers", ",2,1,", ",10001,1,", 3, "reviews", "is above 10000"),
        ("papers", ",2,1,", ",2,99999,", 3, "min_reviews", "is above 10000"),
        ("scores", "R1,P1,0.9", "R1,P1,1e308", 2, "score", "is above 1e+06"),
        ("scores", "R1,P1,0.9", "R1,P1,1e400", 2, "score", "is not a finite number"),
        ("scores", "R1,P1,0.9", "R1,P1,0\x009", 2, "score", "is not a number >= 0"),
    ],
)
def test_numbers_beyond_their_bounds_are_refused(
    tmp_path: Path, kind: str, old: str, new: str, line: int, column: str, message: str
) -> None:
    base = {"papers": PAPERS, "reviewers": REVIEWERS, "scores": SCORES}[kind]
    assert old in base
    lines, f = _lines(tmp_path, **{kind: base.replace(old, new, 1)})
    assert len(lines) == 1 and lines[0].startswith(f"{f[kind]}: line {line}: column {column!r}: ")
    assert message in lines[0] and len(lines[0]) < 300


def test_a_zero_width_space_cannot_hide_the_workshops_conflicts(tmp_path: Path) -> None:
    # The measured attack: a zero-width space after every institution made the inferred
    # conflicts of the workshop fall from 206 to 6. Now the import stops, naming each cell.
    for name in ("papers", "reviewers", "conflicts", "scores"):
        shutil.copy(WORKSHOP / f"{name}.csv", tmp_path / f"{name}.csv")
    path = tmp_path / "reviewers.csv"
    rows = path.read_text(encoding="utf-8").splitlines()
    header = rows[0].split(",")
    at = header.index("institution")
    hostile = [rows[0]]
    for row in rows[1:]:
        cells = row.split(",")
        cells[at] += "\u200b"
        hostile.append(",".join(cells))
    path.write_text("\n".join(hostile) + "\n", encoding="utf-8")
    with pytest.raises(InputError) as caught:
        import_csv(*(tmp_path / f"{n}.csv" for n in ("papers", "reviewers", "conflicts", "scores")))
    lines = caught.value.lines
    assert lines[0].startswith(f"{path}: line 2: column 'institution': contains the invisible")
    assert lines[-1].startswith(f"... and {len(rows) - 1 - 20} more errors in {path}")


# Cells built from pieces that break naive importers: separators, quotes, line breaks, NUL,
# invisible characters, combining accents, formula starts, huge and negative numbers.
_PIECES = st.sampled_from(
    [
        "P1", "R1", "P2", "R2", "x", "é", "e\u0301", ",", '"', "\n", "\r", "\x00", "\u200b",
        "\ufeff", "\u00ad", "\u202e", "=", "-", "'", ";", " ", "0.5", "1e308", "nan", "-3",
        "9" * 30, "@", "\t",
    ]
)  # fmt: skip
_CELL = st.lists(_PIECES, max_size=4).map("".join)


def _table(header: str, rows: list[list[str]], data: st.DataObject) -> str:
    quoted = data.draw(st.booleans())
    lines = [header]
    for row in rows:
        if quoted:
            lines.append(",".join('"' + c.replace('"', '""') + '"' for c in row))
        else:
            lines.append(",".join(row))
    return "\n".join(lines) + "\n"


_FEW = settings(
    max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
_MANY = settings(_FEW, max_examples=2000)


@_FEW
@given(data=st.data())
def test_fuzzed_files_import_or_fail_with_placed_lines(tmp_path: Path, data: st.DataObject) -> None:
    _import_fuzzed(tmp_path, data)


@pytest.mark.large
@_MANY
@given(data=st.data())
def test_many_fuzzed_files_import_or_fail_with_placed_lines(
    tmp_path: Path, data: st.DataObject
) -> None:
    _import_fuzzed(tmp_path, data)


def _import_fuzzed(tmp_path: Path, data: st.DataObject) -> None:
    def rows(width: int) -> list[list[str]]:
        n = data.draw(st.integers(0, 4))
        return [data.draw(st.lists(_CELL, min_size=width, max_size=width)) for _ in range(n)]

    files = write_all(
        tmp_path,
        papers=_table("paper_id,title,reviews,min_reviews,authors,institutions", rows(6), data),
        reviewers=_table("reviewer_id,name,email,institution,topics,cap,floor", rows(7), data),
        conflicts=_table("reviewer_id,paper_id,reason", rows(3), data),
        scores=_table("reviewer_id,paper_id,score", rows(3), data),
    )
    try:
        session = _import(files)
    except InputError as error:
        places = tuple(f"{path}: " for path in files.values()) + ("... and ",)
        assert all(line.startswith(places) for line in error.lines), error.lines
        return
    for paper in session.papers:
        for text in (paper.id, *paper.topics, *paper.institutions, *paper.authors):
            assert matched_text_problem(text) is None and unicodedata.is_normalized("NFC", text)
    for reviewer in session.reviewers:
        for text in (reviewer.id, reviewer.email, reviewer.institution, *reviewer.topics):
            assert matched_text_problem(text) is None and unicodedata.is_normalized("NFC", text)
        assert reviewer.cap is None or reviewer.cap <= MAX_COUNT
