"""The score recipe on the command line: import with signals, `score`, `pair`, `export --parts`,
and the rescore as one recorded change."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session, save_session
from review_alloc.plan.rules import PAIR_RULES
from review_alloc.samples import workshop
from review_alloc.workspace import Workspace

ROOT = Path(__file__).resolve().parents[2]
CSV = ROOT / "sample_sessions" / "workshop-csv"


def _import(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> Path:
    out = tmp_path / "w.json"
    args = ["import", "-o", str(out)]
    for name in ("papers", "reviewers", "conflicts", "scores", "bids"):
        args += [f"--{name}", str(CSV / f"{name}.csv")]
    assert main(args) == 0
    assert "(made by the score recipe)" in capsys.readouterr().out
    return out


def test_import_with_signals_scores_the_pairs_by_the_recipe(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from review_alloc.samples import workshop

    session = load_session(_import(tmp_path, capsys))
    assert session.policy.recipe is not None and session.signals is not None
    # The shipped CSV files make the workshop's own scores again.
    assert session.scores == workshop().scores


def test_pair_prints_every_rule_and_each_part(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _import(tmp_path, capsys)
    assert main(["plan", str(path)]) == 0
    capsys.readouterr()
    s = load_session(path)
    a = s.plan.assignments[0]
    assert main(["pair", str(path), "--reviewer", a.reviewer, "--paper", a.paper, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["assigned"] is True and report["eligible"] is True
    assert [r["rule"] for r in report["rules"]] == [str(r) for r in PAIR_RULES[1:]]
    parts = report["recipe"]["parts"]
    assert [p["part"] for p in parts] == ["expertise", "text", "topic", "bid"]
    assert report["recipe"]["total"] == pytest.approx(sum(p["contribution"] for p in parts))
    assert report["score"] == pytest.approx(report["recipe"]["score"], abs=1e-4)
    assert not report["recipe"]["stale"]
    assert main(["pair", str(path), "--reviewer", a.reviewer, "--paper", a.paper]) == 0
    text = capsys.readouterr().out
    assert f"reviewer {a.reviewer}, paper {a.paper}: eligible" in text
    assert "plan: assigned" in text and "  conflict         keeps" in text
    # An unknown id is bad input (exit 1) naming it.
    assert main(["pair", str(path), "--reviewer", "nobody", "--paper", a.paper]) == 1
    assert "unknown reviewer 'nobody'" in capsys.readouterr().err


def test_pair_names_the_conflict_rule_it_breaks(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _import(tmp_path, capsys)
    c = load_session(path).conflicts[0]
    assert main(["pair", str(path), "--reviewer", c.reviewer, "--paper", c.paper, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["eligible"] is False
    assert report["rules"][0] == {"rule": "conflict", "verdict": "breaks"}
    assert report["standing"].startswith("conflict")


def test_score_is_one_recorded_change_and_changes_the_weights(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _import(tmp_path, capsys)
    before = load_session(path)
    args = ["score", str(path), "--weights", "bid=2,text=0", "--top", "5", "--reason", "bids"]
    assert main([*args, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    after = load_session(path)
    assert out["recipe"]["bid"] == 2.0 and out["recipe"]["text"] == 0.0
    assert out["recipe"]["top"] == 5 and out["scores"] == len(after.scores)
    assert after.policy.recipe is not None and after.policy.recipe.bid == 2.0
    assert len(after.events) == len(before.events) + 1
    event = after.events[-1]
    assert event.action == "rescore" and event.reason == "bids"
    assert after.scores != before.scores
    # The signals are what they were: a later score with the defaults makes the first table.
    ws = Workspace.open(path)
    ws.rescore({"expertise": 1.0, "text": 1.0, "topic": 0.5, "bid": 0.5}, top=150)
    assert ws.session.scores == before.scores


def test_score_refuses_bad_weights(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = _import(tmp_path, capsys)
    for bad in ("colour=2", "text=-1", "text=x"):
        with pytest.raises(SystemExit) as caught:
            main(["score", str(path), "--weights", bad])
        assert caught.value.code == 2
    assert "expected part=weight" in capsys.readouterr().err
    assert main(["score", str(path), "--weights", "text=5000"]) == 1
    assert "recipe" in capsys.readouterr().err


def test_export_parts(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = _import(tmp_path, capsys)
    assert main(["export", str(path), "--to", "-", "--parts"]) == 1  # no plan yet
    capsys.readouterr()
    assert main(["plan", str(path)]) == 0
    capsys.readouterr()
    assert main(["export", str(path), "--to", "-", "--parts"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    s = load_session(path)
    assert len(rows) == len(s.plan.assignments)
    recipe = s.policy.recipe
    for row in rows:
        weighted = sum(float(row[n]) * w for n, w in recipe.weights().items())
        assert float(row["weighted_sum"]) == pytest.approx(weighted)
        assert float(row["score"]) == pytest.approx(max(0.0, weighted), abs=1e-4)
    target = tmp_path / "parts.csv"
    assert main(["export", str(path), "--to", str(target), "--parts"]) == 0
    assert target.read_text().startswith("paper_id,reviewer_id,score,expertise,text,topic,bid")


def test_export_parts_prints_one_json_object(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "w.json"
    save_session(workshop(), path)
    assert main(["plan", str(path)]) == 0
    capsys.readouterr()
    target = tmp_path / "parts.csv"
    assert main(["export", str(path), "--parts", "--to", str(target), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["command"] == "export" and out["ok"] and out["pairs"] == len(
        load_session(path).plan.assignments
    )
    assert len(target.read_text().splitlines()) == out["pairs"] + 1
