"""`--json` on every command, with one shape: `command`, `ok` and `file` first, the session's
name under `session`, then the command's own keys; a failure is one object too (`ok` false,
`exit`, `errors`), with the same messages on standard error."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import pytest

from review_alloc.cli import build_parser, main
from review_alloc.model import load_session, save_session
from review_alloc.samples import workshop

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_sessions" / "workshop-csv"


def _commands() -> dict[str, argparse.ArgumentParser]:
    parser, _ = build_parser()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    raise AssertionError("no sub-commands")


def test_every_command_but_the_app_takes_json() -> None:
    commands = _commands()
    assert len(commands) > 20
    missing = [
        name
        for name, sub in commands.items()
        if name != "open" and not any("--json" in a.option_strings for a in sub._actions)
    ]
    assert missing == []


def _run(capsys: pytest.CaptureFixture[str], *argv: str, code: int = 0) -> dict:
    assert main([*argv, "--json"]) == code, capsys.readouterr().err
    out = capsys.readouterr().out
    payload = json.loads(out)  # one object and nothing else on standard output
    assert isinstance(payload, dict)
    return payload


def _ok(payload: dict, command: str, file: Path | None, name: str | None) -> None:
    assert list(payload)[:3] == ["command", "ok", "file"]
    assert payload["command"] == command and payload["ok"] is True
    assert payload["file"] == (None if file is None else str(file))
    if name is not None:
        assert payload["session"] == name


def test_a_chairs_day_scripted_in_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    s = tmp_path / "venue.json"
    names = ("papers", "reviewers", "conflicts", "scores")
    files = [f"--{n}={SAMPLE / (n + '.csv')}" for n in names]
    out = _run(capsys, "import", *files, "--name", "Venue", "-o", str(s))
    _ok(out, "import", s, "Venue")
    assert (out["papers"], out["reviewers"], out["scores"]) == (40, 24, 960)

    out = _run(capsys, "plan", str(s))
    _ok(out, "plan", s, "Venue")
    assert out["revision"] == 1 and len(out["assignments"]) == out["coverage"]
    first = {(a["reviewer"], a["paper"]) for a in out["assignments"]}
    reviewer, paper = sorted(first)[0]
    session = load_session(s)

    for argv, command in (
        (["withdraw", str(s), "--reviewer", reviewer], "withdraw"),
        (["reinstate", str(s), "--reviewer", reviewer], "reinstate"),
        (["pin", str(s), "--reviewer", reviewer, "--paper", paper], "pin"),
        (["unpin", str(s), "--reviewer", reviewer, "--paper", paper], "unpin"),
        (["block", str(s), "--reviewer", reviewer, "--paper", paper], "block"),
        (["unblock", str(s), "--reviewer", reviewer, "--paper", paper], "unblock"),
        (["set", str(s), "--paper", paper, "--reviews", "4"], "set"),
        (["add-reviewer", str(s), "--id", "RX1", "--name", "Ines Varrow"], "add-reviewer"),
        (["add-paper", str(s), "--id", "PX1", "--title", "Tidal sensing"], "add-paper"),
        (["conflict", str(s), "--reviewer", reviewer, "--paper", paper], "conflict"),
    ):
        out = _run(capsys, *argv)
        _ok(out, command, s, session.name)
        assert out["event"]["action"] and "assignments_removed" in out
    out = _run(capsys, "plan", str(s))
    assert out["revision"] == 2 and (reviewer, paper) not in {
        (a["reviewer"], a["paper"]) for a in out["assignments"]
    }

    out = _run(capsys, "history", str(s))
    _ok(out, "history", s, "Venue")
    assert [r["number"] for r in out["revisions"]] == [1, 2]
    out = _run(capsys, "diff", str(s))
    _ok(out, "diff", s, "Venue")
    assert (out["old"], out["new"]) == (1, 2)
    out = _run(capsys, "explain", str(s))
    _ok(out, "explain", s, "Venue")
    out = _run(capsys, "whatif", str(s), "--raise-cap", f"{reviewer}=1")
    _ok(out, "whatif", s, "Venue")
    assert out["accepted"] is False

    notices = tmp_path / "tell.csv"
    out = _run(capsys, "notify", str(s), "--since", "1", "--to", str(notices))
    _ok(out, "notify", s, "Venue")
    assert reviewer in out["reviewers"] and notices.exists()
    for suffix, form in ((".csv", "csv"), (".xlsx", "xlsx")):
        target = tmp_path / f"plan{suffix}"
        out = _run(capsys, "export", str(s), "--to", str(target))
        _ok(out, "export", s, "Venue")
        assert out["format"] == form and out["to"] == str(target) and target.exists()
        assert out["assignments"] == len(load_session(s).plan.assignments)
    page = tmp_path / "report.html"
    out = _run(capsys, "report", str(s), "--to", str(page))
    _ok(out, "report", s, "Venue")
    assert out["assignments"] == len(load_session(s).plan.assignments) and page.exists()

    out = _run(capsys, "undo", str(s))
    _ok(out, "undo", s, "Venue")
    assert (out["from"], out["revision"]) == (2, 1)
    out = _run(capsys, "redo", str(s))
    _ok(out, "redo", s, "Venue")
    assert (out["from"], out["revision"]) == (1, 2)


def test_demo_and_schema(capsys: pytest.CaptureFixture[str]) -> None:
    out = _run(capsys, "demo")
    _ok(out, "demo", None, workshop().name)
    # The schema is printed as it is, with or without --json: a validator reads it directly.
    schema = _run(capsys, "schema")
    assert schema["type"] == "object" and "command" not in schema


@pytest.fixture
def saved(tmp_path: Path) -> Path:
    path = tmp_path / "w.json"
    save_session(workshop(), path)
    return path


def test_a_refused_change_is_one_json_object_too(
    saved: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = _run(capsys, "withdraw", str(saved), "--reviewer", "NOBODY", code=1)
    assert out["ok"] is False and out["exit"] == 1 and out["command"] == "withdraw"
    assert out["file"] == str(saved)
    assert len(out["errors"]) == 1 and "NOBODY" in out["errors"][0]


def test_a_missing_file_is_one_json_object(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    missing = tmp_path / "none.json"
    out = _run(capsys, "history", str(missing), code=1)
    assert out["ok"] is False and out["exit"] == 1 and str(missing) in out["errors"][0]


def test_usage_errors_in_json(saved: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = _run(capsys, "set", str(saved), "--reviewer", "R0001", "--reviews", "3", code=2)
    assert out == {
        "command": "set",
        "ok": False,
        "file": str(saved),
        "exit": 2,
        "errors": ["--reviews and --min-reviews apply to a paper, not a reviewer"],
    }
    out = _run(capsys, "export", str(saved), "--to", "-", code=2)
    assert "give --to a file" in out["errors"][0]
    # Found by argparse itself: the usage line still goes to standard error.
    with pytest.raises(SystemExit) as stop:
        main(["diff", str(saved), "--no-such-option", "--json"])
    assert stop.value.code == 2
    captured = capsys.readouterr()
    assert captured.err.startswith("usage: review-alloc diff ")
    out = json.loads(captured.out)
    assert (out["command"], out["ok"], out["exit"]) == ("diff", False, 2)
    assert "--no-such-option" in out["errors"][0]
