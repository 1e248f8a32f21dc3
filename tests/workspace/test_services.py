"""The Workspace as the one door: what-ifs and fixes are recorded changes, plans start warm,
and a policy change leaves no forbidden pair in the plan."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import Conflict, InputError, load_session, save_session
from review_alloc.plan import check_plan
from review_alloc.plan import solve as solve_module
from review_alloc.samples import workshop
from review_alloc.workspace import ChangeRefused, ChangeSet, FileChanged, Workspace
from tests.plan.test_explain_groups import topic_session

SCARCE = "quantum sensing"


def _short_venue() -> Workspace:
    """A small venue whose scarce topic has gaps that cap raises close."""
    ws = Workspace(topic_session({SCARCE: (8, 3, 4), "soil chemistry": (10, 8, 6)}))
    ws.solve()
    return ws


def test_accepting_a_fix_is_one_change_and_one_revision_and_undo_takes_it_back() -> None:
    ws = _short_venue()
    before = ws.session
    explanation = ws.explain()
    assert explanation.caps.raises, "the scarce topic's reviewers are at cap"
    preview = ws.what_if(ChangeSet(fixes=("raise-caps",)), explanation)
    assert ws.session is before, "a preview changes nothing"
    number = ws.accept(preview, reason="agreed with the reviewers")
    s = ws.session
    assert [e.action for e in s.events[len(before.events) :]] == ["accept-fix", "plan"]
    for r in explanation.caps.raises:
        assert s.reviewer_cap(s.reviewer_index()[r.reviewer]) == r.new_cap
    assert number == before.revision + 1 and len(ws.revisions) == len(before.revisions) + 1
    assert s.plan == preview.after
    check_plan(s, s.plan, None)
    assert ws.history()[-1].changes[0].startswith("accept-fix raise-caps (raise cap of ")

    assert ws.undo() == before.revision
    back = ws.session
    assert [r.cap for r in back.reviewers] == [r.cap for r in before.reviewers]
    assert back.plan == before.plan


def test_an_old_preview_cannot_be_accepted() -> None:
    ws = _short_venue()
    preview = ws.what_if(ChangeSet(raise_caps={ws.session.reviewers[0].id: 1}))
    ws.set_reviewer(ws.session.reviewers[1].id, cap=9)
    with pytest.raises(ChangeRefused, match="changed since this preview"):
        ws.accept(preview)


def test_whatif_accept_on_the_command_line_is_recorded_and_undone(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({SCARCE: (2, 3, 4)}), path)
    assert main(["plan", str(path)]) == 0
    planned = load_session(path)
    rid = planned.reviewers[0].id
    capsys.readouterr()
    assert main(["whatif", str(path), "--raise-cap", f"{rid}=2", "--accept", "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    after = load_session(path)
    assert payload["accepted"] and payload["revision"] == planned.revision + 1
    assert [e.action for e in after.events[len(planned.events) :]] == ["accept-whatif", "plan"]
    assert after.revision == payload["revision"]
    assert after.reviewer_cap(0) == planned.reviewer_cap(0) + 2
    assert after.plan.figures.model_dump() == payload["after"]

    assert main(["history", str(path), "--json"]) == 0
    history = json.loads(capsys.readouterr().out)
    last = history["revisions"][-1] if "revisions" in history else history["history"][-1]
    assert any(c.startswith("accept-whatif") for c in last["changes"])

    assert main(["undo", str(path)]) == 0
    back = load_session(path)
    assert back.revision == planned.revision
    assert back.reviewer_cap(0) == planned.reviewer_cap(0)
    assert back.plan == planned.plan


def test_a_policy_change_prunes_the_plan_and_marks_it_stale() -> None:
    ws = Workspace(workshop())
    ws.solve()
    scores = sorted(a.score for a in ws.session.plan.assignments)
    limit = scores[len(scores) // 2]
    ws.set_policy({"min_score": limit, "require_shared_topic": True})
    plan = ws.session.plan
    assert plan is not None and not plan.checked and "stale" in plan.method
    assert not ws.plan_is_current()
    topics = {r.id: set(r.topics) for r in ws.session.reviewers}
    paper_topics = {p.id: set(p.topics) for p in ws.session.papers}
    pinned = {(p.reviewer, p.paper) for p in ws.session.pins}
    for a in plan.assignments:
        if (a.reviewer, a.paper) in pinned:
            continue
        # The rules, read straight from the policy: no pair below the limit or without a topic.
        assert a.score >= limit - 1e-12
        assert topics[a.reviewer] & paper_topics[a.paper]
    assert len(plan.assignments) < len(scores)
    check_plan(ws.session, plan, None)
    ws.solve()
    assert ws.session.plan.checked and ws.plan_is_current()


def test_any_change_marks_the_plan_stale_even_when_no_pair_leaves() -> None:
    ws = Workspace(workshop())
    ws.solve()
    before = ws.session.plan
    r = ws.session.reviewers[0]
    ws.set_reviewer(r.id, cap=ws.session.reviewer_cap(0) + 1)
    after = ws.session.plan
    assert after.assignments == before.assignments
    assert not after.checked and not ws.plan_is_current()


def test_every_plan_after_the_first_starts_warm(monkeypatch: pytest.MonkeyPatch) -> None:
    seen: list[object] = []
    real = solve_module.make_plan

    def recording(session, **kwargs):  # type: ignore[no-untyped-def]
        seen.append(kwargs.get("warm"))
        return real(session, **kwargs)

    # The workspace imports make_plan when it plans, so patching its home is enough.
    monkeypatch.setattr(solve_module, "make_plan", recording)
    ws = Workspace(workshop())
    first = ws.solve()
    ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer, "illness")
    ws.solve()
    assert seen == [None, first]


def test_two_writers_at_once_both_land(tmp_path: Path) -> None:
    # Two change commands on one session at the same moment, 20 rounds: the lock makes the
    # second wait for the first and then change the newer file, so no change is lost.
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    start = load_session(path)
    ids = [r.id for r in start.reviewers]
    papers = [p.id for p in start.papers]
    root = Path(__file__).resolve().parents[2]
    env = {**os.environ, "PYTHONPATH": str(root)}
    code = "import sys; from review_alloc.cli import main; sys.exit(main(sys.argv[1:]))"
    for round_ in range(20):
        commands = [
            ["withdraw", str(path), "--reviewer", ids[round_]],
            ["conflict", str(path), "--reviewer", ids[round_ + 1], "--paper", papers[round_],
             "--reason", f"round {round_}"],
        ]
        runs = [
            subprocess.Popen(
                [sys.executable, "-c", code, *argv],
                env=env,
                stdout=subprocess.DEVNULL,
                stderr=subprocess.PIPE,
            )
            for argv in commands
        ]
        for run in runs:
            assert run.wait(timeout=120) == 0, run.stderr.read() if run.stderr else ""
    session = load_session(path)
    assert {r.id for r in session.reviewers if r.withdrawn} == set(ids[:20])
    declared = {(c.reviewer, c.paper) for c in session.conflicts} - {
        (c.reviewer, c.paper) for c in start.conflicts
    }
    assert declared == {(ids[k + 1], papers[k]) for k in range(20)}
    assert len(session.events) == 40


def test_a_save_never_overwrites_a_file_changed_on_disk(tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    mine = Workspace.open(path)
    theirs = Workspace.open(path)
    theirs.withdraw_reviewer(theirs.session.reviewers[0].id, "their change")
    theirs.save()
    mine.withdraw_reviewer(mine.session.reviewers[1].id, "my change")
    assert mine.changed_on_disk()
    saved = path.read_bytes()
    with pytest.raises(FileChanged, match="changed on disk"):
        mine.save()
    assert path.read_bytes() == saved
    copy = mine.save(tmp_path / "mine.json")
    assert load_session(copy).reviewers[1].withdrawn
    assert not mine.changed_on_disk()


def _tampered(tmp_path: Path) -> tuple[Path, tuple[str, str]]:
    """A planned session file into which a conflict on a planned pair was written by hand."""
    ws = Workspace(workshop())
    ws.solve()
    a = ws.session.plan.assignments[0]
    s = ws.session
    conflicts = [*s.conflicts, Conflict(reviewer=a.reviewer, paper=a.paper, reason="hand edit")]
    path = tmp_path / "tampered.json"
    save_session(s.model_copy(update={"conflicts": conflicts}), path)
    return path, (a.reviewer, a.paper)


def test_a_stored_plan_is_held_to_the_rules_when_opened(tmp_path: Path) -> None:
    path, pair = _tampered(tmp_path)
    ws = Workspace.open(path)
    plan = ws.session.plan
    assert pair not in {(a.reviewer, a.paper) for a in plan.assignments}
    assert not plan.checked and ws.plan_problems
    assert ws.plan_problems[0].startswith(f"({pair[0]}, {pair[1]}) is in the stored plan but")
    # Everything left keeps the hard rules (the independent checker, no certificate).
    check_plan(ws.session, plan, None)
    with pytest.raises(InputError, match="plan again"):
        ws.export(tmp_path / "out.csv")
    assert not (tmp_path / "out.csv").exists()
    ws.solve()
    assert ws.export(tmp_path / "out.csv") == len(ws.session.plan.assignments)


def test_export_of_a_tampered_file_is_refused_on_the_command_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path, pair = _tampered(tmp_path)
    before = path.read_bytes()
    assert main(["export", str(path), "--to", str(tmp_path / "out.csv")]) == 1
    err = capsys.readouterr().err
    assert f"({pair[0]}, {pair[1]})" in err and "plan again" in err
    assert path.read_bytes() == before and not (tmp_path / "out.csv").exists()


def test_ctrl_c_says_the_file_is_unchanged_and_exits_130(tmp_path: Path) -> None:
    import shutil
    import signal
    import time

    root = Path(__file__).resolve().parents[2]
    path = tmp_path / "conference.json"
    shutil.copyfile(root / "sample_sessions" / "conference.json", path)
    before = path.read_bytes()
    code = "import sys; from review_alloc.cli import main; sys.exit(main(sys.argv[1:]))"
    run = subprocess.Popen(
        [sys.executable, "-c", code, "plan", str(path)],
        env={**os.environ, "PYTHONPATH": str(root)},
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        # A shell's background job starts with Ctrl-C ignored, and Python then never raises
        # KeyboardInterrupt; the test must not depend on how pytest itself was started.
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
    )
    # The lock file appears once `plan` holds the session: it is then loading or planning
    # 1,500 papers (seconds), well before it saves.
    lock = tmp_path / ".conference.json.lock"
    deadline = time.monotonic() + 60
    while not lock.exists() and run.poll() is None and time.monotonic() < deadline:
        time.sleep(0.01)
    time.sleep(0.1)
    assert run.poll() is None, "plan finished before it could be interrupted"
    run.send_signal(signal.SIGINT)
    out, err = run.communicate(timeout=60)
    # 130 = 128 + SIGINT, the shell's convention (common practice).
    assert run.returncode == 130, err
    assert "interrupted: no file was changed" in err and "Traceback" not in err
    assert path.read_bytes() == before


def test_writers_never_destroy_a_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    assert main(["plan", str(path)]) == 0
    session_bytes = path.read_bytes()
    other = tmp_path / "other.json"
    save_session(workshop(), other)
    other_bytes = other.read_bytes()
    existing = tmp_path / "plan.csv"
    existing.write_text("keep me\n")
    capsys.readouterr()
    # The session itself and any session document are never written over, even with --force.
    for target in (path, other):
        assert main(["export", str(path), "--to", str(target), "--force"]) == 1
        assert "session" in capsys.readouterr().err
    assert path.read_bytes() == session_bytes and other.read_bytes() == other_bytes
    # Another existing file only with --force (as import does).
    assert main(["export", str(path), "--to", str(existing)]) == 1
    assert "--force" in capsys.readouterr().err and existing.read_text() == "keep me\n"
    assert main(["notify", str(path), "--since", "1", "--to", str(existing)]) == 1
    assert existing.read_text() == "keep me\n"
    assert main(["export", str(path), "--to", str(existing), "--force"]) == 0
    assert existing.read_text().startswith("paper_id,")
    # '-' writes to standard output and touches no file.
    capsys.readouterr()
    assert main(["export", str(path), "--to", "-", "--by", "reviewer"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("reviewer_id,") and len(out.splitlines()) > 10
    assert main(["notify", str(path), "--since", "1", "--to", "-"]) == 0
    assert capsys.readouterr().out.startswith("reviewer_id,")


def test_reload_and_redo_keeps_both_sides_changes(tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    mine = Workspace.open(path)
    theirs = Workspace.open(path)
    theirs.withdraw_reviewer(theirs.session.reviewers[0].id, "their change")
    theirs.save()
    # My steps: a change, a plan, and a fix accepted from a preview.
    mine.set_reviewer(mine.session.reviewers[1].id, cap=9, reason="mine")
    mine.solve()
    mine.block(mine.session.plan.assignments[0].reviewer, mine.session.plan.assignments[0].paper)
    refreshed, refused = mine.reload_and_redo()
    assert refused == []
    s = refreshed.session
    assert s.reviewers[0].withdrawn and s.reviewer_cap(1) == 9
    assert [e.action for e in s.events] == ["withdraw-reviewer", "set-reviewer", "plan", "block"]
    assert refreshed.save() == path
    assert load_session(path).reviewers[0].withdrawn


def test_a_step_the_newer_file_refuses_is_named(tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    mine = Workspace.open(path)
    theirs = Workspace.open(path)
    who = theirs.session.reviewers[0].id
    theirs.withdraw_reviewer(who, "their change")
    theirs.save()
    mine.withdraw_reviewer(who, "my change too")
    _, refused = mine.reload_and_redo()
    assert refused and "already withdrawn" in refused[0] and refused[0].startswith("withdraw")
