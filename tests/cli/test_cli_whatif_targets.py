"""`whatif --apply-fix raise-caps-min`: the fix to every paper's minimum, the pairs it moves
and whom to tell, on a small invented venue."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session, save_session
from tests.plan.test_explain_groups import topic_session


def run_json(capsys: pytest.CaptureFixture[str], argv: list[str]) -> dict:
    """Run one command with --json and return its object."""
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_minimum_fix_reaches_every_minimum_and_names_whom_to_tell(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    result = run_json(capsys, ["whatif", str(path), "--apply-fix", "raise-caps-min"])
    # No plan yet: nobody has been told anything, so no pair moves.
    assert result["moves"] is None
    assert main(["plan", str(path)]) == 0
    capsys.readouterr()
    result = run_json(capsys, ["whatif", str(path), "--apply-fix", "raise-caps-min"])
    after = result["after"]
    assert after["required_coverage"] == after["required_demand"]
    assert after["coverage"] < after["demand"]  # the minimum, not full coverage
    # Worked by hand: 8 papers need 2 required reviews each (16); their 3 reviewers give 12
    # at cap 4, so the least raise adds 4 pairs and no pair has to leave.
    moves = result["moves"]
    assert len(moves["added"]) - len(moves["removed"]) == 4
    told = {x["reviewer"] for x in moves["to_tell"]}
    raised = {c.split()[3] for c in result["changes"]}
    assert raised <= told
    assert told == {m["reviewer"] for m in moves["added"] + moves["removed"]}
    assert load_session(path).reviewers[0].cap == 4  # the file is unchanged

    assert main(["whatif", str(path), "--apply-fix", "raise-caps-min"]) == 0
    out = capsys.readouterr().out
    assert f"reviewers to tell: {len(told)}" in out
    assert "pairs moved: " in out


def test_explain_offers_both_targets_and_each_reaches_what_it_says(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    assert main(["plan", str(path)]) == 0
    capsys.readouterr()
    targets = run_json(capsys, ["explain", str(path)])["targets"]
    assert [t["key"] for t in targets] == ["raise-caps-min", "recruit-min", "raise-caps", "recruit"]
    # Worked by hand (as above): the minimum needs 4 more pairs, full coverage 8 more (8 papers
    # want 3 reviews each, 24, from 3 reviewers at cap 4, 12; required 16).
    assert {t["key"]: t["caps"] for t in targets if t["kind"] == "raise-caps"} == {
        "raise-caps-min": 4,
        "raise-caps": 12,
    }
    for t in targets:
        after = run_json(capsys, ["whatif", str(path), "--apply-fix", t["key"]])["after"]
        got = after["required_coverage" if t["target"] == "minimum" else "coverage"]
        assert got == t["coverage_after"] == t["demand"]
    assert main(["explain", str(path)]) == 0
    text = capsys.readouterr().out
    assert "every paper at its minimum (required reviews): ask" in text
    assert "--apply-fix raise-caps-min" in text and "--apply-fix recruit-min" in text


def test_under_the_senior_rule_a_fixs_coverage_is_said_to_be_a_bound(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from tests.plan.test_constraints_reference import rules_session

    # Papers with their own senior rule: seniors rank above all reviews, which no flow states.
    session = rules_session(2015, (6, 10), max_per_institution=1, min_reviews=2)
    assert any(p.senior_min for p in session.papers)
    path = tmp_path / "venue.json"
    save_session(session, path)
    report = run_json(capsys, ["explain", str(path)])
    assert report["fixes"]["coverage_after_exact"] is False
    assert main(["explain", str(path)]) == 0
    assert "is at most the figure shown" in capsys.readouterr().out
