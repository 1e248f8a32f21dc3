"""Long work (plan, import, report) shows its progress on standard error at a terminal only:
never in a script's output, never with --json."""

from __future__ import annotations

import io
import json
import sys
from pathlib import Path

import pytest

from review_alloc.cli import main
from review_alloc.model import save_session
from review_alloc.samples import workshop

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_sessions" / "workshop-csv"


class FakeTerminal(io.StringIO):
    """Standard error as a terminal would be: it says it is one."""

    def isatty(self) -> bool:
        """A terminal."""
        return True


class Pipe(io.StringIO):
    """Standard error as a pipe or a log file."""

    def isatty(self) -> bool:
        """Not a terminal."""
        return False


def _run(
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
    terminal: bool,
    *argv: str,
) -> tuple[str, str]:
    err = FakeTerminal() if terminal else Pipe()
    monkeypatch.setattr(sys, "stderr", err)
    assert main(list(argv)) == 0
    monkeypatch.undo()
    return capsys.readouterr().out, err.getvalue()


@pytest.fixture
def saved(tmp_path: Path) -> Path:
    path = tmp_path / "w.json"
    save_session(workshop(), path)
    return path


def test_plan_shows_its_steps_at_a_terminal(
    saved: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    out, err = _run(monkeypatch, capsys, True, "plan", str(saved))
    assert "planning 40 papers and 24 reviewers" in err
    assert f"saving {saved.name}" in err
    # The report itself is on standard output, plain text with no terminal codes.
    assert out.startswith(f"{workshop().name}: plan checked") and "\x1b" not in out


@pytest.mark.parametrize(("terminal", "flags"), [(False, []), (True, ["--json"])])
def test_plan_is_silent_in_scripts_and_with_json(
    saved: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
    terminal: bool,
    flags: list[str],
) -> None:
    out, err = _run(monkeypatch, capsys, terminal, "plan", str(saved), *flags)
    assert "planning" not in err and "\x1b" not in err
    if flags:
        assert json.loads(out)["command"] == "plan"


@pytest.mark.parametrize("terminal", [True, False])
def test_import_and_report_show_progress_only_at_a_terminal(
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
    terminal: bool,
) -> None:
    s = tmp_path / "s.json"
    files = [f"--{n}={SAMPLE / (n + '.csv')}" for n in ("papers", "reviewers", "scores")]
    out, err = _run(monkeypatch, capsys, terminal, "import", *files, "-o", str(s))
    assert ("reading papers.csv" in err) is terminal and "40 papers" in out
    _run(monkeypatch, capsys, False, "plan", str(s))
    page = tmp_path / "r.html"
    out, err = _run(monkeypatch, capsys, terminal, "report", str(s), "--to", str(page))
    assert ("gathering the figures" in err) is terminal and out.startswith(str(page))
