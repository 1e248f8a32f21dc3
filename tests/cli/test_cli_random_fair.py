"""`plan --max-probability` and `plan --fair` end to end: stored draws that redraw, re-plans that
stay randomised, the figures beside the plain plan's, and refused combinations."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session
from review_alloc.plan.randomized import redraw
from review_alloc.workspace import Workspace

ROOT = Path(__file__).resolve().parents[2]
SAMPLES_DIR = ROOT / "sample_sessions"


@pytest.fixture
def workshop(tmp_path: Path) -> Path:
    """A copy of the shipped workshop session."""
    path = tmp_path / "workshop.json"
    shutil.copy(SAMPLES_DIR / "workshop.json", path)
    return path


def _plan_json(capsys: pytest.CaptureFixture[str], *args: str) -> dict:
    assert main(["plan", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_randomised_plan_stores_a_draw_that_redraws(
    workshop: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    summary = _plan_json(capsys, str(workshop), "--max-probability", "0.5", "--seed", "7")
    drawn = summary["randomised"]
    assert drawn["seed"] == 7 and drawn["max_probability"] == 0.5 and drawn["scale"] == 1000
    assert "Gandhi, Khuller, Parthasarathy and Srinivasan" in drawn["method"]
    assert all(0 < row["probability"] <= 0.5 for row in drawn["probabilities"])
    assert drawn["plain"]["total_score"] >= drawn["expected"]["total_score"]
    assert summary["checked"] is True
    assert "not optimal" in summary["optimality"]["claim"]
    saved = load_session(workshop)
    assert saved.plan is not None and saved.plan.draw is not None
    assert saved.revisions[-1].draw == saved.plan.draw
    # Anyone can redraw the plan from the stored probabilities and seed alone.
    pairs = sorted((a.reviewer, a.paper) for a in saved.plan.assignments)
    assert sorted(redraw(saved, saved.plan.draw)) == pairs
    # The revision gives the same plan back, draw record included.
    ws = Workspace.open(workshop)
    assert ws.plan_of(saved.revisions[-1].number).draw == saved.plan.draw


def test_replan_after_a_withdrawal_stays_randomised(
    workshop: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    first = _plan_json(capsys, str(workshop), "--max-probability", "0.4", "--seed", "11")
    before = {(a["reviewer"], a["paper"]) for a in first["assignments"]}
    gone = first["assignments"][0]["reviewer"]
    assert main(["withdraw", str(workshop), "--reviewer", gone, "--reason", "ill"]) == 0
    capsys.readouterr()
    again = _plan_json(capsys, str(workshop))
    drawn = again["randomised"]
    assert drawn["seed"] == 11 and drawn["max_probability"] == 0.4 and drawn["kept_earlier"]
    after = {(a["reviewer"], a["paper"]) for a in again["assignments"]}
    assert not any(r == gone for r, _ in after)
    # Pairs new to this plan were drawn under the cap; kept pairs may carry probability 1.
    chance = {(r["reviewer"], r["paper"]): r["probability"] for r in drawn["probabilities"]}
    assert all(chance[pair] <= 0.4 for pair in after - before)
    # Only the withdrawn reviewer's pairs were redrawn (the keep tier held every other pair).
    assert len(after & before) == len(before) - sum(1 for r, _ in before if r == gone)
    saved = load_session(workshop)
    assert saved.plan is not None and saved.plan.draw is not None
    assert sorted(redraw(saved, saved.plan.draw)) == sorted(after)
    # --fresh redraws everything under the same cap and seed.
    fresh = _plan_json(capsys, str(workshop), "--fresh")["randomised"]
    assert fresh["seed"] == 11 and fresh["max_probability"] == 0.4 and not fresh["kept_earlier"]
    assert all(row["probability"] <= 0.4 for row in fresh["probabilities"])
    # 'off' goes back to the plain optimal plan.
    plain = _plan_json(capsys, str(workshop), "--max-probability", "off")
    assert "randomised" not in plain


def test_text_output_sets_the_draw_beside_the_plain_plan(
    workshop: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["plan", str(workshop), "--max-probability", "0.5", "--seed", "3"]) == 0
    out = capsys.readouterr().out
    assert "each pair at most 0.5 (seed 3" in out
    assert "this draw    expected  plain plan" in out
    assert "A randomised plan gives up some expected score" in out


def test_fairest_plan_reports_the_worst_off_papers(
    workshop: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    summary = _plan_json(capsys, str(workshop), "--fair")
    fair = summary["fairness"]
    assert fair["exact"] is True and fair["gap_to_bound"] == 0
    assert fair["lowest_paper_score"] >= fair["plain_lowest_paper_score"]
    assert fair["worst_papers"]
    assert fair["fair"]["coverage"] == fair["plain"]["coverage"]
    assert main(["plan", str(workshop), "--fair"]) == 0
    out = capsys.readouterr().out
    assert "fairest plan     lowest paper total" in out
    assert "The fairest plan lifts the worst-off papers" in out
    # A fair plan is not sticky: the next plan is the plain one.
    assert "fairness" not in _plan_json(capsys, str(workshop))


def test_refused_combinations(workshop: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["plan", str(workshop), "--fair", "--max-probability", "0.5"]) == 1
    assert "not both" in capsys.readouterr().err
    assert main(["plan", str(workshop), "--seed", "4"]) == 1
    assert "a seed is for a randomised plan" in capsys.readouterr().err
    with pytest.raises(SystemExit) as stop:
        main(["plan", str(workshop), "--max-probability", "1.5"])
    assert stop.value.code == 2
    assert "must be above 0 and at most 1" in capsys.readouterr().err
