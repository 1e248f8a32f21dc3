"""The layering of DESIGN.md, as the import contracts in pyproject.toml state it."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_import_contract_is_kept() -> None:
    done = subprocess.run(
        [sys.executable, "-c", "from importlinter.cli import lint_imports_command as c; c()"],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-2000:]
    assert "0 broken" in done.stdout


def test_the_faces_never_name_the_engine() -> None:
    # Not even in a function-level import: the app and the command line solve through the
    # workspace only (the contract above checks the same from the import graph).
    for face in ("tui", "cli"):
        for path in (ROOT / "review_alloc" / face).glob("*.py"):
            text = path.read_text(encoding="utf-8")
            assert "review_alloc.flow" not in text, path
