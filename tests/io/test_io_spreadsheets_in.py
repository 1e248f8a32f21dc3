"""Input as spreadsheets save it: workbooks (.xlsx, .ods), `;` and tab CSV, UTF-16, encodings.

The fixtures under `fixtures/` were saved by LibreOffice Calc (`fixtures/make_fixtures.py`), a
spreadsheet written outside this project, from the sample workshop's CSV files; each must
import to the very session the plain CSV files give.
"""

from __future__ import annotations

from pathlib import Path

import pytest
import xlsxwriter
from io_samples import CONFLICTS, PAPERS, REVIEWERS, SCORES, snapshot, write, write_all

from review_alloc.io import import_csv
from review_alloc.model import InputError, Session

HERE = Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures"
WORKSHOP = HERE.parents[1] / "sample_sessions" / "workshop-csv"
NAMES = ("papers", "reviewers", "conflicts", "scores")


def _session(folder: Path, suffix: str, **options: object) -> Session:
    files = [folder / f"{name}{suffix}" for name in NAMES]
    return import_csv(*files, name="workshop", **options)  # type: ignore[arg-type]


def _plain(tmp_path: Path) -> Session:
    files = write_all(tmp_path)
    return import_csv(
        files["papers"], files["reviewers"], files["conflicts"], files["scores"], name="s"
    )


@pytest.mark.parametrize(
    ("folder", "suffix"), [("semicolon", ".csv"), ("xlsx", ".xlsx"), ("ods", ".ods")]
)
def test_files_saved_by_libreoffice_import_to_the_plain_csv_session(
    folder: str, suffix: str
) -> None:
    # LibreOffice Calc saved these (a real spreadsheet, outside this project).
    expected = _session(WORKSHOP, ".csv").model_dump(mode="json")
    assert _session(FIXTURES / folder, suffix).model_dump(mode="json") == expected


def test_the_libreoffice_files_hold_what_spreadsheets_write() -> None:
    # The point of the fixtures: decimal commas, `;` separators, and numbers stored as numbers.
    scores = (FIXTURES / "semicolon" / "scores.csv").read_text(encoding="utf-8")
    assert scores.startswith("reviewer_id;paper_id;score\n") and ";0,57" in scores
    from python_calamine import CalamineWorkbook

    for suffix in (".xlsx", ".ods"):
        book = CalamineWorkbook.from_path(str(FIXTURES / suffix[1:] / f"scores{suffix}"))
        rows = book.get_sheet_by_index(0).to_python()
        assert isinstance(rows[1][2], float)


def _book(path: Path, sheets: dict[str, list[list[object]]], at: tuple[int, int] = (0, 0)) -> Path:
    """A workbook written with xlsxwriter: each sheet's rows from cell `at` (row, column)."""
    book = xlsxwriter.Workbook(str(path))
    for name, rows in sheets.items():
        sheet = book.add_worksheet(name)
        for r, row in enumerate(rows):
            for c, value in enumerate(row):
                if value is None:
                    continue
                if isinstance(value, str):
                    sheet.write_string(at[0] + r, at[1] + c, value)
                else:
                    sheet.write(at[0] + r, at[1] + c, value)
    book.close()
    return path


def _rows(text: str) -> list[list[object]]:
    """The rows of a sample CSV text, numbers as numbers (as typed into a spreadsheet)."""
    import csv
    import io

    out: list[list[object]] = []
    for row in csv.reader(io.StringIO(text)):
        cells: list[object] = []
        for cell in row:
            try:
                cells.append(int(cell) if cell.isdigit() else float(cell))
            except ValueError:
                cells.append(cell)
        out.append(cells)
    return out


def test_a_workbook_with_numbers_typed_in_cells_gives_the_csv_session(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    papers = _book(tmp_path / "papers.xlsx", {"Papers": _rows(PAPERS)}, at=(2, 1))
    scores = _book(tmp_path / "scores.xlsx", {"Scores": _rows(SCORES)})
    session = import_csv(papers, files["reviewers"], files["conflicts"], scores, name="s")
    assert session.model_dump(mode="json") == _plain(tmp_path).model_dump(mode="json")
    assert session.papers[1].reviews == 2 and session.scores.value.tolist().count(1.0) == 1


def test_workbook_errors_name_file_sheet_row_and_column(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    rows = _rows(PAPERS)
    rows[2][3] = 2.5  # reviews of P2: not a whole number
    rows[3][0] = "P\u200b3"  # an invisible character in an id
    papers = _book(tmp_path / "papers.xlsx", {"Papers": rows}, at=(1, 0))
    before = snapshot(tmp_path)
    with pytest.raises(InputError) as caught:
        import_csv(papers, files["reviewers"])
    assert snapshot(tmp_path) == before
    lines = caught.value.lines
    assert lines[0] == (
        f"{papers}: sheet 'Papers': row 4: column 'reviews' (D): '2.5' is not a whole number >= 1"
    )
    assert lines[1].startswith(
        f"{papers}: sheet 'Papers': row 5: column 'paper_id' (A): contains the invisible "
        "character U+200B (zero-width space)"
    )


def test_sheet_by_name_and_a_missing_sheet(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    book = _book(
        tmp_path / "papers.xlsx",
        {"Notes": [["nothing here"]], "Papers": _rows(PAPERS)},
    )
    session = import_csv(book, files["reviewers"], sheet="Papers")
    assert [p.id for p in session.papers] == ["P1", "P2", "P3"]
    with pytest.raises(InputError) as caught:
        import_csv(book, files["reviewers"], sheet="Submissions")
    assert caught.value.lines == [
        f"{book}: no sheet named 'Submissions'; its sheets are 'Notes', 'Papers'"
    ]
    with pytest.raises(InputError) as caught:
        import_csv(book, files["reviewers"])
    assert caught.value.lines[0].startswith(f"{book}: sheet 'Notes': row 1: no header row:")


def test_a_value_under_an_unnamed_workbook_column_is_refused(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    rows = _rows(REVIEWERS)
    rows[2] = [*rows[2], None, "a stray note"]
    book = _book(tmp_path / "reviewers.xlsx", {"Sheet1": rows})
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], book)
    assert caught.value.lines == [
        f"{book}: sheet 'Sheet1': row 3: a value in column J, which has no name in the header "
        "row; name the column or clear the cell"
    ]


def test_a_broken_workbook_is_refused_by_name(tmp_path: Path) -> None:
    files = write_all(tmp_path)
    broken = write(tmp_path, "papers.xlsx", b"PK\x03\x04 not really a zip")
    with pytest.raises(InputError) as caught:
        import_csv(broken, files["reviewers"])
    assert caught.value.lines[0].startswith(f"{broken}: cannot read it as a workbook")


@pytest.mark.parametrize("separator", [";", "\t"])
def test_semicolon_and_tab_files_read_like_commas(tmp_path: Path, separator: str) -> None:
    import csv
    import io

    def resave(text: str) -> str:
        out = io.StringIO()
        writer = csv.writer(out, delimiter=separator, lineterminator="\n")
        for row in csv.reader(io.StringIO(text)):
            if separator == ";":
                row = [cell.replace(".", ",") if _is_decimal(cell) else cell for cell in row]
            writer.writerow(row)
        return out.getvalue()

    texts = (PAPERS, REVIEWERS, CONFLICTS, SCORES)
    files = write_all(tmp_path, **{k: resave(t) for k, t in zip(NAMES, texts, strict=True)})
    session = import_csv(
        files["papers"], files["reviewers"], files["conflicts"], files["scores"], name="s"
    )
    other = tmp_path / "plain"
    other.mkdir()
    assert session.model_dump(mode="json") == _plain(other).model_dump(mode="json")


def _is_decimal(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return "." in cell


def test_messages_name_the_separator_found(tmp_path: Path) -> None:
    files = write_all(tmp_path, scores="reviewer_id;paper_id;score\nR1;P1;0,5\nR1;P2\n")
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], files["reviewers"], None, files["scores"])
    assert caught.value.lines == [
        f"{files['scores']}: line 3: 2 cells, but the header has 3 (separator ';')"
    ]
    files = write_all(tmp_path, papers="id\ttitle\nP1\tTides\n")
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], files["reviewers"])
    assert caught.value.lines[0].startswith(
        f"{files['papers']}: line 1: unknown column 'id' (separator tab)"
    )


def test_a_decimal_comma_is_a_number_only_in_semicolon_files(tmp_path: Path) -> None:
    files = write_all(tmp_path, scores='reviewer_id,paper_id,score\nR1,P1,"0,5"\n')
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], files["reviewers"], None, files["scores"])
    assert caught.value.lines == [
        f"{files['scores']}: line 2: column 'score': '0,5' is not a number >= 0"
    ]


@pytest.mark.parametrize("encoding", ["utf-8-sig", "utf-16", "utf-16-le", "utf-16-be"])
def test_utf8_with_a_bom_and_utf16_with_a_bom_are_read(tmp_path: Path, encoding: str) -> None:
    name = "Ré Østby"
    reviewers = REVIEWERS.replace("Eun Steadlind", name)
    data = reviewers.encode(encoding)
    if encoding in ("utf-16-le", "utf-16-be"):
        # The explicit byte orders write no BOM of their own; spreadsheets do write one.
        data = "\ufeff".encode(encoding) + data
    files = write_all(tmp_path, reviewers=data)
    session = import_csv(files["papers"], files["reviewers"])
    assert session.reviewers[2].name == name


def test_other_encodings_only_when_named(tmp_path: Path) -> None:
    files = write_all(tmp_path, reviewers=REVIEWERS.replace("Eun", "Zoë").encode("cp1252"))
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], files["reviewers"])
    (line,) = caught.value.lines
    assert "not UTF-8 text" in line and "--encoding" in line and "only when named" in line
    session = import_csv(files["papers"], files["reviewers"], encoding="cp1252")
    assert session.reviewers[2].name == "Zoë Steadlind"
    with pytest.raises(InputError) as caught:
        import_csv(files["papers"], files["reviewers"], encoding="klingon")
    assert caught.value.lines == [
        "encoding: unknown encoding 'klingon' (try utf-8, cp1252 or latin-1)"
    ]
