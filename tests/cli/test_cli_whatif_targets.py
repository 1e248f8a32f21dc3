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
