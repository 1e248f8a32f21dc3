"""`export --to FILE.xlsx`: a real workbook, read back with openpyxl (a reader we did not write).

Checks what a chair's spreadsheet relies on: scores and loads are number cells, no cell is a
formula (a hostile title stays text), the lead of each paper is marked, the header row is
frozen; and that CSV exports carry the lead column, and other suffixes are refused.
"""

from __future__ import annotations

import csv
from pathlib import Path

import openpyxl
import pytest

from review_alloc.cli import main
from review_alloc.io.workbook import SHEETS
from review_alloc.model import InputError, save_session
from review_alloc.samples import workshop
from review_alloc.workspace import Workspace

HOSTILE = '=HYPERLINK("http://attacker.example/x","click")'


@pytest.fixture(scope="module")
def planned(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo workshop with a formula-like title, planned with leads, saved to a file."""
    session = workshop()
    papers = [
        p.model_copy(update={"title": HOSTILE}) if k == 0 else p
        for k, p in enumerate(session.papers)
    ]
    session = session.model_copy(update={"papers": papers})
    path = tmp_path_factory.mktemp("wb") / "s.json"
    save_session(session, path)
    assert main(["plan", str(path)]) == 0
    return path


def _sheet_rows(sheet: openpyxl.worksheet.worksheet.Worksheet) -> list[list[object]]:
    return [[cell.value for cell in row] for row in sheet.iter_rows()]


def test_the_workbook_reads_back_with_numbers_text_and_leads(
    planned: Path, tmp_path: Path
) -> None:
    target = tmp_path / "plan.xlsx"
    ws = Workspace.open(planned)
    plan = ws.session.plan
    assert ws.export(target) == len(plan.assignments)
    # openpyxl 3.1 (outside this project) reads the file back.
    book = openpyxl.load_workbook(target)
    assert book.sheetnames == list(SHEETS)
    for sheet in book.worksheets:
        assert sheet.freeze_panes == "A2"
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", f"{sheet.title}!{cell.coordinate} is a formula"
    by_paper = book["By paper"]
    rows = _sheet_rows(by_paper)
    header = rows[0]
    assert header == [
        "paper_id",
        "title",
        "reviewer_id",
        "reviewer_name",
        "reviewer_email",
        "score",
        "lead",
    ]
    assert len(rows) - 1 == len(plan.assignments)
    score_at, lead_at = header.index("score"), header.index("lead")
    for row in by_paper.iter_rows(min_row=2):
        assert row[score_at].data_type == "n" and isinstance(row[score_at].value, int | float)
        assert row[lead_at].font.b == (row[lead_at].value == "yes")
    expected_leads = {(a.paper, a.reviewer) for a in plan.assignments if a.lead}
    assert expected_leads, "the demo workshop picks leads (max_leads 3)"
    assert {(r[0], r[2]) for r in rows[1:] if r[lead_at] == "yes"} == expected_leads
    hostile = [r for r in rows[1:] if r[0] == ws.session.papers[0].id]
    assert hostile and all(r[1] == HOSTILE for r in hostile)

    reviewers = _sheet_rows(book["By reviewer"])
    at = {name: k for k, name in enumerate(reviewers[0])}
    loads = {}
    for a in plan.assignments:
        loads[a.reviewer] = loads.get(a.reviewer, 0) + 1
    for row in reviewers[1:]:
        assert row[at["load"]] == loads.get(row[at["reviewer_id"]], 0)
        assert isinstance(row[at["cap"]], int | float) and row[at["load"]] <= row[at["cap"]]

    summary = ws.summary()
    figures = {row[0]: row[1] for row in _sheet_rows(book["Summary"])[1:]}
    assert figures["assignments"] == len(summary["assignments"])
    assert figures["total score"] == pytest.approx(summary["total_score"])
    short = _sheet_rows(book["Short of reviews"])
    assert len(short) - 1 == len(summary["gaps"])


def test_csv_exports_carry_the_lead_column(planned: Path, tmp_path: Path) -> None:
    target = tmp_path / "plan.csv"
    ws = Workspace.open(planned)
    ws.export(target, by="reviewer")
    with target.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][-1] == "lead"
    leads = {(a.reviewer, a.paper) for a in ws.session.plan.assignments if a.lead}
    assert {(r[0], r[3]) for r in rows[1:] if r[-1] == "yes"} == leads
    assert {r[-1] for r in rows[1:]} == {"yes", "no"}


@pytest.mark.parametrize("name", ["plan.txt", "plan.xls", "plan.ods", "plan"])
def test_other_suffixes_are_refused(planned: Path, tmp_path: Path, name: str) -> None:
    with pytest.raises(InputError, match=r"an export is a \.csv or \.xlsx file"):
        Workspace.open(planned).export(tmp_path / name)
    assert not (tmp_path / name).exists()


def test_a_workbook_keeps_the_writers_refusals(
    planned: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    existing = tmp_path / "plan.xlsx"
    existing.write_bytes(b"keep me")
    assert main(["export", str(planned), "--to", str(existing)]) == 1
    assert "--force" in capsys.readouterr().err and existing.read_bytes() == b"keep me"
    assert main(["export", str(planned), "--to", str(existing), "--bom", "--force"]) == 1
    assert "--bom is for CSV" in capsys.readouterr().err
    assert main(["export", str(planned), "--to", str(existing), "--force"]) == 0
    assert "workbook with" in capsys.readouterr().out
    assert openpyxl.load_workbook(existing).sheetnames == list(SHEETS)
    session_copy = tmp_path / "other.xlsx"
    session_copy.write_bytes(planned.read_bytes())
    assert main(["export", str(planned), "--to", str(session_copy), "--force"]) == 1
    assert "session file" in capsys.readouterr().err
    assert main(["export", str(planned), "--to", str(tmp_path / "plan.pdf")]) == 1
    assert ".csv or .xlsx" in capsys.readouterr().err
