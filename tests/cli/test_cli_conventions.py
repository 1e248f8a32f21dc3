"""The command line follows convention: --version, usage errors exit 2 with the sub-command's
own usage, no app without a terminal, a light start, and spreadsheets on the command line.

Exit status 2 for bad usage and a usage line on standard error are the convention of POSIX
utilities and of Python's argparse (common practice).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from review_alloc import __version__
from review_alloc.cli import main
from review_alloc.model import load_session, save_session
from review_alloc.samples import workshop

ROOT = Path(__file__).resolve().parents[2]
FIXTURES = ROOT / "tests" / "io" / "fixtures"
NAMES = ("papers", "reviewers", "conflicts", "scores")


def _python(code: str, *argv: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-c", code, *argv],
        env={**os.environ, "PYTHONPATH": str(ROOT)},
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out.strip() == f"review-alloc {__version__}"


@pytest.fixture
def saved(tmp_path: Path) -> Path:
    path = tmp_path / "w.json"
    save_session(workshop(), path)
    return path


@pytest.mark.parametrize(
    ("argv", "command", "message"),
    [
        (["set", "--reviewer", "R0001", "--reviews", "3"], "set", "apply to a paper"),
        (["set", "--paper", "W0001", "--cap", "3"], "set", "apply to a reviewer"),
        (["set", "--reviewer", "R0001"], "set", "give --cap or --floor"),
        (["whatif"], "whatif", "at least one change"),
    ],
)
def test_usage_errors_inside_commands_exit_2_with_their_own_usage(
    saved: Path, capsys: pytest.CaptureFixture[str], argv: list[str], command: str, message: str
) -> None:
    before = saved.read_bytes()
    assert main([argv[0], str(saved), *argv[1:]]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"usage: review-alloc {command} ")
    assert f"review-alloc {command}: error: " in err and message in err
    assert saved.read_bytes() == before


@pytest.mark.parametrize(
    ("command", "rest"),
    [
        ("plan", []),
        ("export", ["--to", "x.csv"]),
        ("explain", []),
        ("diff", []),
        ("set", ["--paper", "W0001"]),
    ],
)
def test_an_unknown_option_shows_the_sub_commands_usage(
    saved: Path, capsys: pytest.CaptureFixture[str], command: str, rest: list[str]
) -> None:
    with pytest.raises(SystemExit) as stop:
        main([command, str(saved), *rest, "--no-such-option"])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert err.startswith(f"usage: review-alloc {command} ")
    assert "--no-such-option" in err


def test_without_a_terminal_the_app_is_not_started() -> None:
    # Standard input is not a terminal here: the app would wait forever for keys.
    run = _python("import runpy; runpy.run_module('review_alloc', run_name='__main__')")
    assert run.returncode == 2, run.stderr
    assert run.stderr.startswith("usage: review-alloc")
    assert "no terminal" in run.stderr and run.stdout == ""


@pytest.mark.parametrize("argv", [["--help"], ["--version"], ["schema"], ["import", "--help"]])
def test_help_version_and_schema_load_no_solver(argv: list[str]) -> None:
    code = (
        "import sys\n"
        "from review_alloc.cli import main\n"
        "try:\n"
        "    code = main(sys.argv[1:])\n"
        "except SystemExit as stop:\n"
        "    code = stop.code\n"
        "heavy = sorted(m for m in ('numba', 'scipy', 'sklearn', 'textual') if m in sys.modules)\n"
        "print('LOADED', heavy, file=sys.stderr)\n"
        "models = sorted(m for m in ('numpy', 'review_alloc.model.session') if m in sys.modules)\n"
        "print('MODELS', models, file=sys.stderr)\n"
        "sys.exit(code)\n"
    )
    run = _python(code, *argv)
    assert run.returncode == 0, run.stderr
    assert "LOADED []" in run.stderr
    if argv != ["schema"]:
        # Help and the version need no document model and no numpy (a tenth of a second).
        assert "MODELS []" in run.stderr
    if argv == ["schema"]:
        assert json.loads(run.stdout)["type"] == "object"


@pytest.mark.parametrize(("folder", "suffix"), [("xlsx", ".xlsx"), ("ods", ".ods")])
def test_import_takes_workbooks_on_the_command_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], folder: str, suffix: str
) -> None:
    out = tmp_path / "s.json"
    files = [f"--{name}={FIXTURES / folder / (name + suffix)}" for name in NAMES]
    assert main(["import", *files, "--sheet", "scores", "-o", str(out)]) == 1
    err = capsys.readouterr().err
    assert "no sheet named 'scores'" in err and not out.exists()
    assert main(["import", *files, "-o", str(out)]) == 0
    assert "40 papers, 24 reviewers" in capsys.readouterr().out
    assert len(load_session(out).scores) == 960


def test_import_names_the_encoding_option(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sample = ROOT / "sample_sessions" / "workshop-csv"
    reviewers = tmp_path / "reviewers.csv"
    text = (sample / "reviewers.csv").read_text(encoding="utf-8").replace("Lena", "Léna")
    reviewers.write_bytes(text.encode("cp1252"))
    args = ["import", "--papers", str(sample / "papers.csv"), "--reviewers", str(reviewers)]
    out = tmp_path / "s.json"
    assert main([*args, "-o", str(out)]) == 1
    assert "--encoding" in capsys.readouterr().err
    assert main([*args, "--encoding", "cp1252", "-o", str(out)]) == 0
    assert load_session(out).reviewers[0].name == "Léna Morbrand"


@pytest.fixture(scope="module")
def planned(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A session with two revisions, a withdrawal between them, under the shared-topic rule
    (which the re-check of the stored plan on open then asks, for every pair)."""
    from review_alloc.workspace import Workspace

    path = tmp_path_factory.mktemp("planned") / "w.json"
    save_session(workshop(), path)
    with Workspace.editing(path) as ws:
        ws.set_policy({"require_shared_topic": True}, reason="topics")
        ws.solve()
        ws.withdraw_reviewer(ws.session.plan.assignments[0].reviewer, "illness")
        ws.solve()
        ws.save()
    return path


@pytest.mark.parametrize(
    "argv",
    [
        ["history", "{s}"],
        ["history", "{s}", "--json"],
        ["diff", "{s}"],
        ["diff", "{s}", "1", "2", "--json"],
        ["export", "{s}", "--to", "{dir}/plan.csv"],
        ["export", "{s}", "--to", "{dir}/plan.xlsx", "--json"],
        ["export", "{s}", "--to", "-"],
        ["notify", "{s}", "--since", "1", "--to", "{dir}/tell.csv", "--json"],
        ["notify", "{s}", "--since", "1", "--to", "-"],
    ],
)
def test_commands_that_solve_nothing_load_no_solver(
    planned: Path, tmp_path: Path, argv: list[str]
) -> None:
    # Opening the session re-checks its stored plan against the rules; that, too, must run
    # without numba or scipy (each costs a noticeable part of a second to import).
    words = [w.format(s=planned, dir=tmp_path) for w in argv]
    code = (
        "import sys\n"
        "from review_alloc.cli import main\n"
        "code = main(sys.argv[1:])\n"
        "heavy = sorted(\n"
        "    m for m in ('numba', 'scipy', 'sklearn', 'textual', 'filelock') if m in sys.modules\n"
        ")\n"
        "print('LOADED', heavy, file=sys.stderr)\n"
        "sys.exit(code)\n"
    )
    # filelock too: a reader takes the session's lock directly (`workspace.files`).
    run = _python(code, *words)
    assert run.returncode == 0, run.stderr
    assert "LOADED []" in run.stderr
    assert run.stdout


def test_one_misspelt_id_is_reported_once_with_its_count(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # One reviewer id misspelt on all 40 of its score rows, and one real error after them:
    # the misspelling is one line with its count, and the real error is still shown.
    sample = ROOT / "sample_sessions" / "workshop-csv"
    rows = (sample / "scores.csv").read_text(encoding="utf-8").splitlines()
    misspelt = [r.replace("R0003,", "R0O03,", 1) if r.startswith("R0003,") else r for r in rows]
    last = len(misspelt) - 1
    misspelt[last] = misspelt[last].rsplit(",", 1)[0] + ",high"
    scores = tmp_path / "scores.csv"
    scores.write_text("\n".join(misspelt) + "\n", encoding="utf-8")
    conflicts = tmp_path / "conflicts.csv"
    conflicts.write_text(
        "reviewer_id,paper_id,reason\nR9999,W0001,advisor\nR9999,W0002,advisor\n",
        encoding="utf-8",
    )
    out = tmp_path / "s.json"
    args = ["import", "--papers", str(sample / "papers.csv")]
    args += ["--reviewers", str(sample / "reviewers.csv"), "--scores", str(scores)]
    assert main([*args, "--conflicts", str(conflicts), "-o", str(out)]) == 1
    err = capsys.readouterr().err.splitlines()
    first = 2 + next(k for k, r in enumerate(misspelt[1:]) if r.startswith("R0O03,"))
    assert err == [
        f"error: {conflicts}: line 2: column 'reviewer_id': unknown reviewer 'R9999' "
        "(on 2 rows: lines 2, 3)",
        f"error: {scores}: line {first}: column 'reviewer_id': unknown reviewer 'R0O03' "
        f"(on 40 rows: lines {first}, {first + 1}, {first + 2}, {first + 3}, {first + 4} "
        "and 35 more)",
        f"error: {scores}: line {last + 1}: column 'score': 'high' is not a number >= 0",
    ]
    assert not out.exists()


def test_only_the_program_itself_freezes_what_is_left_at_its_end(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    # `main()` reading sys.argv is the program, which ends right after: it freezes the objects
    # left so that the interpreter's final collection skips them. A caller passing argv (a
    # test, a script) goes on running and keeps its collections.
    import gc

    gc.unfreeze()
    assert main(["schema"]) == 0
    assert gc.get_freeze_count() == 0
    monkeypatch.setattr(sys, "argv", ["review-alloc", "schema"])
    try:
        assert main() == 0
        assert gc.get_freeze_count() > 0
    finally:
        gc.unfreeze()
    capsys.readouterr()
