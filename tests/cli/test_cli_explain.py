"""`explain` and `whatif` end to end, on the shipped conference sample and small venues."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session, save_session
from tests.plan.test_explain_groups import topic_session

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"
SCARCE = "hardware verification"


@pytest.fixture(scope="module")
def conference_copy(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A copy of the shipped conference session; the shipped file is never touched."""
    target = tmp_path_factory.mktemp("conference") / "conference.json"
    shutil.copyfile(SAMPLES / "conference.json", target)
    return target


def run_json(capsys: pytest.CaptureFixture[str], argv: list[str]) -> dict:
    """Run one command with --json and return its object (stdout holds nothing else)."""
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_explain_names_the_scarce_topic_group(
    conference_copy: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = conference_copy.read_bytes()
    report = run_json(capsys, ["explain", str(conference_copy)])
    assert conference_copy.read_bytes() == before

    session = load_session(conference_copy)
    scarce_papers = [p.id for p in session.papers if SCARCE in p.topics]
    scarce_reviewers = [r for r in session.reviewers if SCARCE in r.topics]
    caps = sum(r.cap if r.cap is not None else session.policy.cap for r in scarce_reviewers)
    reviews, minimum = session.policy.reviews, session.policy.min_reviews

    groups = {g["id"]: g for g in report["groups"]}
    whole = [g for g in groups.values() if g["tier"] == "reviews"]
    assert len(whole) == 1
    g = whole[0]
    assert g["topics"][0] == SCARCE
    assert sorted(g["papers"]) == sorted(scarce_papers)
    assert sorted(g["reviewers"]) == sorted(r.id for r in scarce_reviewers)
    assert g["needed"] == reviews * len(scarce_papers) == 72
    assert g["available"] == caps == 37
    assert g["shortfall"] == 72 - 37
    assert "few eligible reviewers" in g["cause"]

    required = [g for g in groups.values() if g["tier"] == "min_reviews"]
    assert [(r["needed"], r["available"], r["shortfall"]) for r in required] == [
        (minimum * len(scarce_papers), caps, minimum * len(scarce_papers) - caps)
    ]

    gaps = report["gaps"]
    assert all({"paper", "missing", "group"} <= set(x) for x in gaps)
    assert sum(x["missing"] for x in gaps) == g["shortfall"]
    assert {x["group"] for x in gaps} == {g["id"]}
    assert report["coverage"]["reviews"]["groups_shortfall"] == g["shortfall"]
    # The gaps agree with what `plan --json` reports for the same session.
    plan_copy = conference_copy.with_name("planned.json")
    shutil.copyfile(conference_copy, plan_copy)
    summary = run_json(capsys, ["plan", str(plan_copy)])
    assert sum(x["missing"] for x in summary["gaps"]) == g["shortfall"]

    fixes = report["fixes"]
    assert fixes["raise_caps"]["total"] == g["shortfall"]
    assert {r["reviewer"] for r in fixes["raise_caps"]["raises"]} <= set(g["reviewers"])
    assert fixes["recruit"]["needs"][0]["topic"] == SCARCE
    assert fixes["recruit"]["total"] == -(-g["shortfall"] // session.policy.cap)
    assert (
        "never lifts" in fixes["conflicts_and_blocks"]["note"]
        or "no fix lifts" in (fixes["conflicts_and_blocks"]["note"])
    )
    assert report["overloads"] == [] and report["underloads"] == []
    assert any("never overridden" in c for c in report["cautions"])
    assert any("Raising a cap" in c for c in report["cautions"])


def test_explain_plain_report(conference_copy: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["explain", str(conference_copy)]) == 0
    out = capsys.readouterr().out
    assert f"in '{SCARCE}'" in out
    assert "needed 72, available 37, shortfall 35" in out
    assert "--apply-fix raise-caps" in out
    assert "never overridden" in out


@pytest.mark.parametrize("fix", ["raise-caps", "recruit"])
def test_whatif_fixes_close_every_gap(
    conference_copy: Path, capsys: pytest.CaptureFixture[str], fix: str
) -> None:
    before = conference_copy.read_bytes()
    result = run_json(capsys, ["whatif", str(conference_copy), "--apply-fix", fix])
    assert conference_copy.read_bytes() == before
    assert result["accepted"] is False
    assert len(result["gaps_before"]) == 24
    assert result["gaps_after"] == []
    assert result["after"]["coverage"] == result["after"]["demand"]
    assert result["overloads"] == []
    if fix == "recruit":
        assert len(result["new_reviewers"]) == 5
    else:
        assert result["new_reviewers"] == []
        assert len(result["changes"]) == 5


def test_whatif_accept_saves_the_change_and_its_plan(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    result = run_json(
        capsys,
        ["whatif", str(path), "--raise-cap", "QUA-R1=4", "--raise-cap", "QUA-R2=4"],
    )
    # 8 of the 12 missing reviews come from the raises: four papers still miss one each.
    assert len(result["gaps_after"]) == 4 and load_session(path).plan is None
    assert main(["whatif", str(path), "--apply-fix", "raise-caps", "--accept"]) == 0
    assert "saved to" in capsys.readouterr().out
    saved = load_session(path)
    assert [r.cap for r in saved.reviewers[:3]] == [8, 8, 8]
    assert saved.plan is not None and saved.plan.checked
    assert saved.plan.figures.coverage == saved.plan.figures.demand


def test_whatif_overload_and_added_reviewers(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    result = run_json(capsys, ["whatif", str(path), "--allow-overload", "1"])
    assert [x["excess"] for x in result["overloads"]] == [1, 1, 1]
    result = run_json(capsys, ["whatif", str(path), "--add-reviewers", "quantum sensing=2"])
    assert result["new_reviewers"] == ["NEW-quantum-sensing-1", "NEW-quantum-sensing-2"]
    assert result["after"]["coverage"] == result["before"]["coverage"] + 8 + 4


def test_whatif_bad_ids_name_the_option(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (2, 3, 4)}), path)
    before = path.read_bytes()
    assert main(["whatif", str(path), "--raise-cap", "NOPE=2"]) == 1
    err = capsys.readouterr().err
    assert "--raise-cap NOPE=2" in err and "'NOPE'" in err
    assert main(["whatif", str(path), "--add-reviewers", "basket weaving=1"]) == 1
    assert "--add-reviewers basket weaving=1" in capsys.readouterr().err
    assert main(["whatif", str(path)]) == 2
    assert "at least one change" in capsys.readouterr().err
    with pytest.raises(SystemExit) as stop:
        main(["whatif", str(path), "--raise-cap", "QUA-R1"])
    assert stop.value.code == 2
    assert path.read_bytes() == before


def test_explain_without_gaps(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (2, 3, 4)}), path)
    report = run_json(capsys, ["explain", str(path)])
    assert report["gaps"] == [] and report["groups"] == []
    assert report["fixes"]["raise_caps"]["total"] == 0
    assert main(["explain", str(path)]) == 0
    assert "no gaps" in capsys.readouterr().out


def test_explain_lists_every_gap_with_titles_and_limit_shortens(
    conference_copy: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    report = run_json(capsys, ["explain", str(conference_copy)])
    gaps = report["gaps"]
    assert len(gaps) > 12, "more gaps than the old list of 12 showed"
    session = load_session(conference_copy)
    titles = {p.id: p.title for p in session.papers}
    names = {r.id: r.name for r in session.reviewers}
    assert main(["explain", str(conference_copy)]) == 0
    out = capsys.readouterr().out
    for g in gaps:
        assert f'  {g["paper"]} "{titles[g["paper"]]}"  {g["assigned"]}/{g["reviews"]}' in out
    group = report["groups"][0]
    assert f"{group['reviewers'][0]} {names[group['reviewers'][0]]}" in out
    assert "more (drop --limit" not in out
    assert main(["explain", str(conference_copy), "--limit", "3"]) == 0
    out = capsys.readouterr().out
    shown = [g for g in gaps if f'  {g["paper"]} "{titles[g["paper"]]}"  ' in out]
    assert len(shown) == 3
    assert f"... and {len(gaps) - 3} more (drop --limit to see all)" in out
