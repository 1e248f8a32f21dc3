"""The planning core never needs the terminal toolkit (checked in a fresh interpreter)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]

CORE = (
    "review_alloc.model",
    "review_alloc.flow",
    "review_alloc.plan",
    "review_alloc.io",
    "review_alloc.workspace",
    "review_alloc.samples",
    "review_alloc.cli",
)


def test_core_imports_without_textual() -> None:
    code = (
        "import sys\n"
        f"for name in {CORE!r}:\n"
        "    __import__(name)\n"
        "loaded = sorted(m for m in sys.modules if m == 'textual' or m.startswith('textual.'))\n"
        "print(','.join(loaded))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code],
        cwd=REPO,
        capture_output=True,
        text=True,
        timeout=120,
        env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"},
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == ""


def test_the_app_does_import_textual() -> None:
    """The check above can fail: importing the app does load textual."""
    code = "import sys, review_alloc.tui; print('textual' in sys.modules)"
    done = subprocess.run(
        [sys.executable, "-c", code],
        cwd=REPO,
        capture_output=True,
        text=True,
        timeout=120,
        env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"},
    )
    assert done.stdout.strip() == "True", done.stderr
