"""The document and import layers stay free of the UI and of the planner."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_model_and_io_import_without_textual_or_the_planner() -> None:
    code = (
        "import sys, review_alloc.model, review_alloc.io; "
        "bad = [m for m in sys.modules if m.split('.')[0] == 'textual' "
        "or m.startswith(('review_alloc.plan', 'review_alloc.flow', 'review_alloc.tui'))]; "
        "print(','.join(bad))"
    )
    done = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        cwd=ROOT,
        check=True,
        env={"PYTHONPATH": str(ROOT), "PATH": ""},
    )
    assert done.stdout.strip() == ""
