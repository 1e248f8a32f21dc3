"""The change, history, diff, undo and notify commands, end to end on the conference sample."""

from __future__ import annotations

import csv
import json
import os
import shutil
from collections import Counter
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import load_session
from review_alloc.plan import conflict_pairs
from review_alloc.samples import workshop
from review_alloc.workspace import Workspace
from tests.plan.replan_reference import ortools_count_optimum, replan_instance

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"


def _json(capsys: pytest.CaptureFixture[str], argv: list[str]) -> dict:
    capsys.readouterr()
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.fixture
def conference(tmp_path: Path) -> Path:
    target = tmp_path / "conference.json"
    shutil.copyfile(SAMPLES / "conference.json", target)
    return target


def test_late_withdrawals_move_only_what_they_must_and_undo_brings_the_plan_back(
    conference: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The OR-tools reference below models caps, conflicts and kept pairs, not the sample's
    # senior and institution rules, so those rules are switched off for this comparison.
    first = _json(
        capsys, ["plan", str(conference), "--senior-min", "0", "--max-per-institution", "off"]
    )
    first_plan = load_session(conference).plan.model_dump_json()
    loads = Counter(a["reviewer"] for a in first["assignments"])
    heavy = [who for who, _ in loads.most_common(2)]
    paper = next(a["paper"] for a in first["assignments"] if a["reviewer"] not in heavy)
    for who in heavy:
        assert main(["withdraw", str(conference), "--reviewer", who, "--reason", "ill"]) == 0
    assert main(["withdraw", str(conference), "--paper", paper]) == 0

    second = _json(capsys, ["plan", str(conference)])
    diff = _json(capsys, ["diff", str(conference)])
    assert (diff["old"], diff["new"]) == (1, 2)
    before = {(a["reviewer"], a["paper"]) for a in first["assignments"]}
    after = {(a["reviewer"], a["paper"]) for a in second["assignments"]}
    orphaned = {(r, p) for r, p in before if r in heavy or p == paper}
    removed = {(x["reviewer"], x["paper"]) for x in diff["removed"]}
    added = {(x["reviewer"], x["paper"]) for x in diff["added"]}
    assert orphaned <= removed
    assert (before | added) - removed == after
    # Reference: OR-tools SimpleMinCostFlow on the same session, counting kept earlier pairs
    # (eligibility uses the session's conflict rules, read through plan.conflict_pairs).
    session = load_session(conference)
    found = conflict_pairs(session)
    banned = set(zip(found.reviewer.tolist(), found.paper.tolist(), strict=True))
    earlier = Workspace(session).plan_of(1)
    ref = ortools_count_optimum(replan_instance(session, earlier, banned))
    assert (second["required_coverage"], second["coverage"]) == ref[:2]
    # Only the orphans moved, or more only where coverage demands it: no plan of the same
    # coverage keeps more earlier pairs than this one.
    assert diff["kept"] == ref[3]

    target = tmp_path / "tell.csv"
    assert main(["notify", str(conference), "--since", "1", "--to", str(target)]) == 0
    with target.open(newline="") as handle:
        rows = list(csv.DictReader(handle))
    changed = {r for r, _ in added | removed}
    assert {row["reviewer_id"] for row in rows} == changed
    assert set(heavy) <= changed
    reviewers = {r.id: r for r in session.reviewers}
    for row in rows:
        assert row["email"] == reviewers[row["reviewer_id"]].email
        mine_added = sorted(p for r, p in added if r == row["reviewer_id"])
        assert (row["papers_added"].split("; ") if row["papers_added"] else []) == mine_added
    assert {row["status"] for row in rows if row["reviewer_id"] in heavy} == {"withdrawn"}

    assert main(["undo", str(conference)]) == 0
    restored = load_session(conference)
    assert restored.plan.model_dump_json() == first_plan
    assert not any(r.withdrawn for r in restored.reviewers)
    assert not any(p.withdrawn for p in restored.papers)
    history = _json(capsys, ["history", str(conference)])
    assert [(r["number"], r["current"]) for r in history["revisions"]] == [(1, True), (2, False)]
    assert len(history["revisions"][1]["changes"]) == 3

    # Redo retraces the undo: the re-plan and its withdrawals come back, and a second redo
    # has nothing left to retrace.
    assert main(["redo", str(conference)]) == 0
    again = load_session(conference)
    assert again.revision == 2 and again.plan.model_dump_json() != first_plan
    assert {r.id for r in again.reviewers if r.withdrawn} >= set(heavy)
    before = conference.read_bytes()
    assert main(["redo", str(conference)]) == 1
    assert "nothing to redo" in capsys.readouterr().err
    assert conference.read_bytes() == before


@pytest.fixture
def small(tmp_path: Path) -> Path:
    target = tmp_path / "w.json"
    ws = Workspace(workshop(), target)
    ws.solve()
    ws.save()
    return target


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["withdraw", "--reviewer", "NOPE"], "unknown reviewer 'NOPE'"),
        (["withdraw", "--paper", "NOPE"], "unknown paper 'NOPE'"),
        (["reinstate", "--reviewer", "R0001"], "has not withdrawn"),
        (["pin", "--reviewer", "R0001", "--paper", "NOPE"], "unknown paper 'NOPE'"),
        (["unpin", "--reviewer", "R0001", "--paper", "W0001"], "is not pinned"),
        (["unblock", "--reviewer", "R0001", "--paper", "W0001"], "is not blocked"),
        (["set", "--paper", "W0001", "--min-reviews", "9"], "exceeds reviews"),
        (["add-reviewer", "--id", "R0001"], "already exists"),
        (["add-reviewer", "--id", "RX", "--email", "not-mail"], "not an e-mail address"),
        (["add-paper", "--id", "PX", "--score", "R0001=high"], "expected ID=VALUE"),
        (["add-paper", "--id", "PX", "--score", "NOPE=0.5"], "unknown reviewer 'NOPE'"),
        (["diff", "7"], "unknown revision 7"),
        (["undo"], "is the first"),
        (["redo"], "nothing to redo"),
    ],
)
def test_bad_changes_exit_1_with_a_message_and_leave_the_file(
    small: Path, argv: list[str], message: str, capsys: pytest.CaptureFixture[str]
) -> None:
    # Options that do not go together are usage errors (exit 2): test_cli_conventions.py.
    before = small.read_bytes()
    assert main([argv[0], str(small), *argv[1:]]) == 1
    err = capsys.readouterr().err
    assert message in err
    # Every line names the session file the refused change was meant for.
    assert all(line.startswith(f"error: {small}: ") for line in err.splitlines())
    assert small.read_bytes() == before


def test_a_conflicted_pin_is_refused_with_its_reason(
    small: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    session = load_session(small)
    found = conflict_pairs(session)
    r = session.reviewers[int(found.reviewer[0])].id
    p = session.papers[int(found.paper[0])].id
    assert main(["pin", str(small), "--reviewer", r, "--paper", p]) == 1
    assert "conflict of interest" in capsys.readouterr().err


def test_each_change_is_recorded_and_saved(small: Path, capsys: pytest.CaptureFixture[str]) -> None:
    session = load_session(small)
    a = session.plan.assignments[0]
    free = next(
        (r.id, p.id)
        for r in session.reviewers
        for p in session.papers
        if (r.id, p.id) not in {(x.reviewer, x.paper) for x in session.plan.assignments}
        and (session.reviewer_index()[r.id], session.paper_index()[p.id])
        not in conflict_pairs(session).reason_of()
    )
    out = _json(
        capsys,
        ["conflict", str(small), "--reviewer", a.reviewer, "--paper", a.paper, "--reason", "kin"],
    )
    assert out["event"]["action"] == "declare-conflict" and out["assignments_removed"] == 1
    steps = [
        ["block", "--reviewer", free[0], "--paper", free[1]],
        ["unblock", "--reviewer", free[0], "--paper", free[1]],
        ["pin", "--reviewer", free[0], "--paper", free[1]],
        ["unpin", "--reviewer", free[0], "--paper", free[1]],
        ["set", "--reviewer", free[0], "--cap", "3"],
        ["set", "--paper", free[1], "--reviews", "4", "--min-reviews", "2"],
        ["add-reviewer", "--id", "LATE-R", "--name", "Tove Marrin", "--cap", "2"],
        ["add-paper", "--id", "LATE-P", "--title", "Invented", "--score", "LATE-R=0.7"],
        ["withdraw", "--reviewer", "LATE-R"],
        ["reinstate", "--reviewer", "LATE-R"],
    ]
    for step in steps:
        assert main([step[0], str(small), *step[1:]]) == 0, step
    actions = [e.action for e in load_session(small).events]
    assert actions[-len(steps) - 1 :] == [
        "declare-conflict",
        "block",
        "unblock",
        "pin",
        "unpin",
        "set-reviewer",
        "set-paper",
        "add-reviewer",
        "add-paper",
        "withdraw-reviewer",
        "reinstate-reviewer",
    ]
    plan = _json(capsys, ["plan", str(small)])
    assert (a.reviewer, a.paper) not in {(x["reviewer"], x["paper"]) for x in plan["assignments"]}
    assert ("LATE-R", "LATE-P") in {(x["reviewer"], x["paper"]) for x in plan["assignments"]}
    fresh = _json(capsys, ["plan", str(small), "--fresh"])
    assert fresh["coverage"] == plan["coverage"]
    history = _json(capsys, ["history", str(small)])
    assert [r["fresh"] for r in history["revisions"]] == [False, False, True]


def test_an_interrupted_change_leaves_the_previous_file(
    small: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    before = small.read_bytes()

    def broken(src: str, dst: str) -> None:
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "replace", broken)
    assert main(["withdraw", str(small), "--paper", "W0001"]) == 1
    assert main(["plan", str(small)]) == 1
    assert "cannot save" in capsys.readouterr().err
    monkeypatch.undo()
    assert small.read_bytes() == before
    # No temporary file is left; the session's lock file (a dot file) may stay beside it.
    assert sorted(p.name for p in small.parent.iterdir() if not p.name.endswith('.lock')) == [
        small.name
    ]


def test_notify_writes_its_csv_atomically(
    small: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    session = load_session(small)
    who = session.plan.assignments[0].reviewer
    assert main(["withdraw", str(small), "--reviewer", who]) == 0
    assert main(["plan", str(small)]) == 0
    target = tmp_path / "tell.csv"
    target.write_text("earlier list\n")

    def broken(src: str, dst: str) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken)
    argv = ["notify", str(small), "--since", "1", "--to", str(target), "--force"]
    assert main(argv) == 1
    monkeypatch.undo()
    assert target.read_text() == "earlier list\n"
    out = _json(capsys, argv)
    assert who in out["reviewers"]
    header = target.read_text().splitlines()[0]
    assert header.startswith("reviewer_id,name,email,status,papers_added")


def test_history_and_diff_print_for_people(small: Path, capsys: pytest.CaptureFixture[str]) -> None:
    session = load_session(small)
    who = session.plan.assignments[0].reviewer
    assert main(["withdraw", str(small), "--reviewer", who, "--reason", "ill"]) == 0
    assert main(["plan", str(small)]) == 0
    capsys.readouterr()
    assert main(["history", str(small)]) == 0
    text = capsys.readouterr().out
    assert "2 revisions" in text and f"withdraw-reviewer {who}: ill" in text
    assert main(["diff", str(small), "1", "2"]) == 0
    text = capsys.readouterr().out
    assert "revision 1 -> 2" in text
    # Names and titles beside the ids.
    name = next(r.name for r in session.reviewers if r.id == who)
    lost = next(a.paper for a in session.plan.assignments if a.reviewer == who)
    title = next(p.title for p in session.papers if p.id == lost)
    assert f"  {who} {name}:\n" in text and f'    - {lost} "{title}"\n' in text
    assert f"    - {who} {name}\n" in text


def test_ids_typed_in_another_unicode_form_still_match(tmp_path: Path) -> None:
    # A terminal may send "é" decomposed (NFD); the session stores ids composed (NFC).
    import unicodedata

    from review_alloc.model import Reviewer, save_session
    from review_alloc.samples import workshop

    s = workshop()
    reviewers = [*s.reviewers, Reviewer(id="Ré-1", name="Ada Vennick", topics=[])]
    path = tmp_path / "s.json"
    save_session(s.model_copy(update={"reviewers": reviewers}), path)
    typed = unicodedata.normalize("NFD", "Ré-1")
    assert typed != "Ré-1"
    assert main(["withdraw", str(path), "--reviewer", typed]) == 0
    assert load_session(path).reviewers[-1].withdrawn
