"""Other systems' column names: `import --column KIND.FIELD=COLUMN`, kept in the session so a
re-import needs no retyping, and the header lists the app's import dialog shows."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session
from review_alloc.workspace import Workspace

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_sessions" / "workshop-csv"
FIXTURES = ROOT / "tests" / "io" / "fixtures"
THEIR_HEADER = "Submission ID,Paper Title,Keywords,reviews,min_reviews,authors,institutions"
MAPPING = [
    "--column",
    "papers.paper_id=submission id",  # case does not matter
    "--column",
    "papers.title= Paper Title ",
    "--column",
    "papers.topics=Keywords",
]


def _their_papers(folder: Path) -> Path:
    """The sample papers as another system exports them: its own names for three columns."""
    # Their system keeps no abstracts or keywords: the sample's columns up to institutions.
    with (SAMPLE / "papers.csv").open(encoding="utf-8", newline="") as handle:
        rows = [row[:7] for row in csv.reader(handle)][1:]
    path = folder / "submissions.csv"
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(THEIR_HEADER.split(","))
        writer.writerows(rows)
    return path


def _import(papers: Path, out: Path, *extra: str) -> list[str]:
    files = ["--papers", str(papers), "--reviewers", str(SAMPLE / "reviewers.csv")]
    files += ["--scores", str(SAMPLE / "scores.csv")]
    return ["import", *files, "-o", str(out), *extra]


def test_mapped_columns_import_as_our_own_and_are_kept(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    plain = tmp_path / "plain.json"
    assert main(_import(SAMPLE / "papers.csv", plain)) == 0
    theirs = _their_papers(tmp_path)
    out = tmp_path / "theirs.json"
    assert main(_import(theirs, out)) == 1
    assert "unknown column 'submission id'" in capsys.readouterr().err and not out.exists()

    assert main(_import(theirs, out, *MAPPING, "--json")) == 0
    payload = json.loads(capsys.readouterr().out)
    expected = {"paper_id": "submission id", "title": "Paper Title", "topics": "Keywords"}
    assert payload["columns"] == {"papers": expected}
    session = load_session(out)
    assert session.import_columns == {"papers": expected}
    # The same papers as the sample's own file gives, but for the two columns left out.
    blank = {"abstract": "", "keywords": []}
    assert session.papers == [p.model_copy(update=blank) for p in load_session(plain).papers]

    # A re-import of newer files onto the session needs no mapping again.
    assert main(_import(theirs, out, "--force")) == 0
    said = capsys.readouterr().out
    assert "papers.title from 'Paper Title'" in said and "kept from the earlier session" in said
    assert load_session(out).import_columns == {"papers": expected}
    # One more option changes one field and keeps the others.
    assert main(_import(theirs, out, "--force", "--column", "papers.topics=keywords")) == 0
    assert load_session(out).import_columns["papers"] == {**expected, "topics": "keywords"}


@pytest.mark.parametrize(
    ("option", "message"),
    [
        ("papers.paper=X", "papers files have no field 'paper'; use paper_id, title"),
        ("talks.title=X", "'talks' is not a kind of file; use papers, reviewers"),
        ("papers.title", "expected KIND.FIELD=COLUMN"),
        ("papers.title=Nope", "the column mapping names columns this file does not have "
         "(title='Nope'); its header has 'Submission ID', 'Paper Title'"),
    ],
)
def test_a_bad_mapping_is_named(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], option: str, message: str
) -> None:
    out = tmp_path / "s.json"
    assert main(_import(_their_papers(tmp_path), out, "--column", option)) == 1
    assert message in capsys.readouterr().err and not out.exists()


def test_one_column_for_two_fields_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "s.json"
    argv = _import(_their_papers(tmp_path), out, *MAPPING, "--column", "papers.authors=keywords")
    assert main(argv) == 1
    assert "column 'keywords' is given to both 'topics' and 'authors'" in capsys.readouterr().err


def test_the_dialog_reads_each_files_header(tmp_path: Path) -> None:
    assert Workspace.file_header(_their_papers(tmp_path), "papers") == THEIR_HEADER.split(",")
    sheet = Workspace.file_header(FIXTURES / "xlsx" / "reviewers.xlsx", "reviewers")
    assert sheet[:2] == ["reviewer_id", "name"]
    fields = Workspace.import_fields()
    assert fields["scores"] == ("reviewer_id", "paper_id", "score")
    assert fields["papers"][0] == "paper_id"


def test_the_bids_file_is_mapped_like_the_others(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bids = tmp_path / "preferences.csv"
    bids.write_text("Member,Submission,Preference\nR0001,W0001,eager\nR0002,W0001,1\n")
    out = tmp_path / "s.json"
    argv = [*_import(SAMPLE / "papers.csv", out), "--bids", str(bids)]
    assert main(argv) == 1
    assert "found 'Member', 'Submission', 'Preference'" in capsys.readouterr().err
    mapping = ["bids.reviewer_id=Member", "bids.paper_id=Submission", "bids.bid=Preference"]
    assert main([*argv, *(w for m in mapping for w in ("--column", m))]) == 0
    session = load_session(out)
    assert session.signals is not None
    assert session.signals.bids.get(0, 0) == 4.0 and session.signals.bids.get(1, 0) == 1.0
    assert session.import_columns["bids"]["bid"] == "Preference"
