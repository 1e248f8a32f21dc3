"""End-to-end command line: import → plan → explain → export, exit codes, and bad input."""

from __future__ import annotations

import csv
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.io.session_csv import write_session_csv
from review_alloc.model import load_session
from review_alloc.samples import SAMPLES, workshop

ROOT = Path(__file__).resolve().parents[2]
SAMPLES_DIR = ROOT / "sample_sessions"


def _csv_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "csv"
    write_session_csv(workshop(), folder)
    return folder


def _import_args(folder: Path, out: Path) -> list[str]:
    return [
        "import",
        "--papers",
        str(folder / "papers.csv"),
        "--reviewers",
        str(folder / "reviewers.csv"),
        "--conflicts",
        str(folder / "conflicts.csv"),
        "--scores",
        str(folder / "scores.csv"),
        "-o",
        str(out),
    ]


def test_import_plan_explain_export(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folder = _csv_folder(tmp_path)
    session_file = tmp_path / "w.json"
    assert main(_import_args(folder, session_file)) == 0
    capsys.readouterr()

    assert main(["plan", str(session_file), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    for key in ("assignments", "coverage", "required_coverage", "total_score", "gaps", "overloads"):
        assert key in summary
    assert summary["checked"] is True
    assert summary["coverage"] == summary["demand"] == 120
    saved = load_session(session_file)
    assert saved.plan is not None and len(saved.plan.assignments) == 120

    assert main(["explain", str(session_file), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["gaps"] == []

    out = tmp_path / "by-reviewer.csv"
    assert main(["export", str(session_file), "--to", str(out), "--by", "reviewer"]) == 0
    rows = list(csv.DictReader(out.open(encoding="utf-8")))
    assert len(rows) == 120
    assert {(r["reviewer_id"], r["paper_id"]) for r in rows} == {
        (a.reviewer, a.paper) for a in saved.plan.assignments
    }


def test_plain_plan_output_carries_the_caution(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    session_file = tmp_path / "panel.json"
    shutil.copy(SAMPLES_DIR / "panel.json", session_file)
    assert main(["plan", str(session_file)]) == 0
    out = capsys.readouterr().out
    assert "proposals 60" in out
    assert "conflict-of-interest policy" in out
    # A grant panel's rule lines speak of proposals too, as its other lines do.
    assert "proposals without a senior lead" in out and "papers without" not in out


def test_conference_sample_shows_its_scarce_topic_gaps(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    session_file = tmp_path / "conference.json"
    shutil.copy(SAMPLES_DIR / "conference.json", session_file)
    assert main(["plan", str(session_file), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    session = load_session(session_file)
    by_id = {p.id: p for p in session.papers}
    gap_topics = {t for g in summary["gaps"] for t in by_id[g["paper"]].topics}
    assert summary["gaps"], "the conference sample is built with an under-supplied topic"
    assert gap_topics == {"hardware verification"}


def test_json_mode_prints_only_json(tmp_path: Path) -> None:
    session_file = tmp_path / "w.json"
    shutil.copy(SAMPLES_DIR / "workshop.json", session_file)
    done = subprocess.run(
        [sys.executable, "-m", "review_alloc", "plan", str(session_file), "--json"],
        capture_output=True,
        text=True,
        cwd=ROOT,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    json.loads(done.stdout)


@pytest.mark.parametrize(
    ("file", "header", "row", "message"),
    [
        ("reviewers.csv", None, ["R0001", "", "", "", "", "-1", "", "no"], "line 2: column 'cap'"),
        ("scores.csv", None, ["R0001", "NOPE", "0.5"], "unknown paper 'NOPE'"),
        ("scores.csv", None, ["R0001", "W0001", "-0.5"], "column 'score'"),
        ("papers.csv", None, ["W0001", "dup"], "duplicate"),
        ("conflicts.csv", None, ["R9999", "W0001", "x"], "unknown reviewer 'R9999'"),
        ("reviewers.csv", ["reviewer_id", "nickname"], ["R1", "x"], "nickname"),
    ],
)
def test_bad_input_exits_1_names_file_and_line_and_writes_nothing(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    file: str,
    header: list[str] | None,
    row: list[str],
    message: str,
) -> None:
    folder = _csv_folder(tmp_path)
    path = folder / file
    if header is not None:
        path.write_text(",".join(header) + "\n" + ",".join(row) + "\n", encoding="utf-8")
    else:
        lines = path.read_text(encoding="utf-8").splitlines()
        width = len(lines[0].split(","))
        cells = row + [""] * (width - len(row))
        if file in ("reviewers.csv",):
            lines[1] = ",".join(cells)
        else:
            lines.append(",".join(cells))
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    out = tmp_path / "never.json"
    assert main(_import_args(folder, out)) == 1
    err = capsys.readouterr().err
    assert file in err and message in err
    assert not out.exists()
    assert not list(tmp_path.glob("never*"))


def test_import_refuses_to_overwrite_without_force(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = _csv_folder(tmp_path)
    out = tmp_path / "w.json"
    out.write_text("keep me", encoding="utf-8")
    assert main(_import_args(folder, out)) == 1
    assert "already exists" in capsys.readouterr().err
    assert out.read_text(encoding="utf-8") == "keep me"
    assert main([*_import_args(folder, out), "--force"]) == 0


def test_malformed_session_file_exits_1_and_is_left_alone(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text('{"format_version": 1, "name": "x", "papers": [{"id": ""}]}', encoding="utf-8")
    before = bad.read_bytes()
    assert main(["plan", str(bad)]) == 1
    err = capsys.readouterr().err
    assert "bad.json" in err and "papers.0" in err
    assert bad.read_bytes() == before


def test_bad_usage_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["plan"])
    assert stop.value.code == 2
    with pytest.raises(SystemExit) as stop:
        main(["import", "--papers", "p.csv", "--reviewers", "r.csv", "--reviews", "-3", "-o", "x"])
    assert stop.value.code == 2


def test_schema_is_json(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    assert "papers" in schema["properties"]


@pytest.mark.parametrize("stem", sorted(SAMPLES))
def test_shipped_samples_are_what_the_generator_builds(stem: str) -> None:
    shipped = load_session(SAMPLES_DIR / f"{stem}.json")
    assert shipped == SAMPLES[stem](), "run `python sample_sessions/build.py` after changes"
