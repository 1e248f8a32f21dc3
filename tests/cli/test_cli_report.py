"""`review-alloc report SESSION --to report.html`: one self-contained page for the committee.

Its headline figures must equal `plan --json`'s; it must fetch nothing (no script, link or
remote address); every text from the session is escaped; the writers' refusals hold. Where
Debian's chromium is installed, a headless Chromium renders it to a PNG (a real browser,
outside this project).
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import save_session
from review_alloc.samples import workshop

HOSTILE = "<script>alert(1)</script> & Co"


@pytest.fixture(scope="module")
def replanned(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo workshop, planned, a reviewer withdrawn, planned again (two revisions)."""
    session = workshop()
    session = session.model_copy(update={"name": HOSTILE})
    path = tmp_path_factory.mktemp("report") / "w.json"
    save_session(session, path)
    assert main(["plan", str(path)]) == 0
    assert main(["withdraw", str(path), "--reviewer", "R0001"]) == 0
    assert main(["plan", str(path)]) == 0
    return path


def _figures(page: str) -> dict[str, str]:
    return dict(re.findall(r'data-figure="(\w+)">([^<]*)<', page))


def test_the_report_shows_plan_json_figures_and_fetches_nothing(
    replanned: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    capsys.readouterr()
    assert main(["plan", str(replanned), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    target = tmp_path / "report.html"
    assert main(["report", str(replanned), "--to", str(target)]) == 0
    page = target.read_text(encoding="utf-8")
    figures = _figures(page)
    for key in (
        "papers",
        "reviewers",
        "required_coverage",
        "required_demand",
        "coverage",
        "demand",
        "floors_met",
    ):
        assert figures[key] == str(summary[key]), key
    assert figures["total_score"] == f"{summary['total_score']:.2f}"
    assert figures["mean_score"] == f"{summary['mean_score']:.3f}"
    for key in ("assignments", "gaps", "overloads", "underloads"):
        assert figures[key] == str(len(summary[key])), key
    # Self-contained: nothing a browser would fetch or run.
    lowered = page.lower()
    for marker in ("<script", "<link", "src=", "href=", "url(", "@import", "http:", "https:"):
        assert marker not in lowered, marker
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; Co" in page
    # The revisions since the first plan, and who must be told about them.
    assert "withdraw-reviewer R0001" in page
    assert "Who must be told (changes since revision 1)" in page
    for section in ("Coverage per topic", "load against cap", "Scores of the assigned pairs",
                    "Conflicts of interest by reason", "Cautions"):
        assert section in page
    assert page.count("<svg") >= 3


def test_the_report_is_refused_where_it_would_mislead_or_destroy(
    tmp_path: Path, replanned: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unplanned = tmp_path / "u.json"
    save_session(workshop(), unplanned)
    assert main(["report", str(unplanned), "--to", str(tmp_path / "r.html")]) == 1
    assert "plan again first" in capsys.readouterr().err
    stale = tmp_path / "s.json"
    stale.write_bytes(replanned.read_bytes())
    assert main(["set", str(stale), "--reviewer", "R0002", "--cap", "2"]) == 0
    assert main(["report", str(stale), "--to", str(tmp_path / "r.html")]) == 1
    assert "out of date" in capsys.readouterr().err
    existing = tmp_path / "old.html"
    existing.write_text("keep me")
    assert main(["report", str(replanned), "--to", str(existing)]) == 1
    assert "--force" in capsys.readouterr().err and existing.read_text() == "keep me"
    assert main(["report", str(replanned), "--to", str(tmp_path / "r.txt")]) == 1
    assert "HTML page" in capsys.readouterr().err
    before = replanned.read_bytes()
    assert main(["report", str(replanned), "--to", str(replanned), "--force"]) == 1
    assert replanned.read_bytes() == before
    assert not (tmp_path / "r.html").exists()


@pytest.mark.skipif(shutil.which("chromium") is None, reason="Debian's chromium is not installed")
def test_headless_chromium_renders_the_report(replanned: Path, tmp_path: Path) -> None:
    target = tmp_path / "report.html"
    assert main(["report", str(replanned), "--to", str(target)]) == 0
    shot = tmp_path / "report.png"
    subprocess.run(
        [
            "chromium",
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--window-size=1200,1600",
            f"--screenshot={shot}",
            target.as_uri(),
        ],
        check=True,
        capture_output=True,
        timeout=120,
    )
    data = shot.read_bytes()
    assert data.startswith(b"\x89PNG") and len(data) > 20_000


@pytest.mark.parametrize("options", [["--max-probability", "0.5", "--seed", "11"], ["--fair"]])
def test_a_randomised_or_fairest_plan_is_reported_beside_the_plain_plan(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], options: list[str]
) -> None:
    path = tmp_path / "w.json"
    save_session(workshop(), path)
    capsys.readouterr()
    assert main(["plan", str(path), *options, "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    target = tmp_path / "report.html"
    assert main(["report", str(path), "--to", str(target)]) == 0
    page = target.read_text()
    rows = {
        cells[0]: cells[1:]
        for cells in (
            re.findall(r"<td[^>]*>([^<]*)</td>", row)
            for row in re.findall(r"<tr>(.*?)</tr>", page)
        )
        if cells
    }
    if "randomised" in summary:
        r = summary["randomised"]
        assert "A randomised plan" in page and "seed 11" in page and "a 0.5 chance" in page
        columns = [r["plain"], r["expected"], r["drawn"]]
        assert r["caution"].split(":")[0] in page
    else:
        f = summary["fairness"]
        assert "The fairest plan" in page and f"{f['lowest_paper_score']:g}" in page
        assert all(p in page for p in f["worst_papers"])
        columns = [f["plain"], f["fair"]]
    # The side-by-side figures are plan --json's, column by column.
    assert rows["total score"] == [f"{c['total_score']:g}" for c in columns]
    assert rows["all reviews placed"] == [f"{c['coverage']:g}" for c in columns]
