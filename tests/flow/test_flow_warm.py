"""Kernel warm-up, the per-user JIT cache folder, and a headless import."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from review_alloc.flow import kernels_ready, max_flow, warm_up

_ROOT = Path(__file__).resolve().parents[2]

_PROBE = """
import json, os, sys
import review_alloc.flow as flow
before = flow.kernels_ready()
on_disk_before = flow.solver_cache_ready()
if sys.argv[1] == "warm":
    flow.warm_up()
print(json.dumps({
    "cache": os.environ.get("NUMBA_CACHE_DIR"),
    "before": before,
    "after": flow.kernels_ready(),
    "on_disk_before": on_disk_before,
    "on_disk_after": flow.solver_cache_ready(),
    "textual": any(name.split(".")[0] == "textual" for name in sys.modules),
}))
"""


def _probe(env_changes: dict[str, str | None], mode: str) -> dict:
    env = dict(os.environ)
    for key, value in env_changes.items():
        if value is None:
            env.pop(key, None)
        else:
            env[key] = value
    env["PYTHONPATH"] = str(_ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    done = subprocess.run(
        [sys.executable, "-c", _PROBE, mode], env=env, capture_output=True, text=True,
        timeout=300, check=True,
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_warm_up_compiles_every_kernel_into_the_xdg_cache(tmp_path: Path) -> None:
    report = _probe({"XDG_CACHE_HOME": str(tmp_path), "NUMBA_CACHE_DIR": None}, "warm")
    folder = tmp_path / "review-alloc" / "numba"
    assert report["cache"] == str(folder)
    assert report["before"] is False and report["after"] is True
    assert any(folder.rglob("*.nbi")), "numba wrote no cache index"
    assert report["textual"] is False  # the engine imports without the UI toolkit
    assert report["on_disk_before"] is False and report["on_disk_after"] is True
    # A second process finds the cache ready before compiling or loading anything.
    again = _probe({"XDG_CACHE_HOME": str(tmp_path), "NUMBA_CACHE_DIR": None}, "cold")
    assert again["on_disk_before"] is True and again["before"] is False


def test_a_chosen_numba_cache_dir_is_kept(tmp_path: Path) -> None:
    chosen = tmp_path / "mine"
    report = _probe({"NUMBA_CACHE_DIR": str(chosen), "XDG_CACHE_HOME": str(tmp_path)}, "cold")
    assert report["cache"] == str(chosen)
    assert report["before"] is False and report["after"] is False


def test_every_kernel_releases_the_gil() -> None:
    # The TUI solves in a worker thread; a kernel holding the GIL would freeze the screen.
    from review_alloc.flow.warm import _KERNELS

    assert all(kernel.targetoptions.get("nogil") for kernel in _KERNELS)


def test_warm_up_in_process() -> None:
    warm_up()
    assert kernels_ready()
    assert max_flow(2, [0], [1], [5], 0, 1).value == 5



_CHILDREN_ONLY = """
from review_alloc.flow.warm import _compile_in_children
assert _compile_in_children()
"""

_LOADS_ONLY = """
import json
import review_alloc.flow as flow
from review_alloc.flow.warm import _KERNELS
flow.warm_up(parallel=False)
print(json.dumps({k.__name__: [sum(k.stats.cache_hits.values()), sum(k.stats.cache_misses.values())]
                  for k in _KERNELS}))
"""


def test_children_fill_the_cache_so_the_parent_only_loads(tmp_path: Path) -> None:
    # The parallel cold start compiles in child processes; every kernel must then come from disk.
    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path), PYTHONPATH=str(_ROOT))
    for code in (_CHILDREN_ONLY, _LOADS_ONLY):
        done = subprocess.run(
            [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=300,
            check=True,
        )
    counts = json.loads(done.stdout.strip().splitlines()[-1])
    assert counts and all(hits >= 1 and misses == 0 for hits, misses in counts.values()), counts


def test_an_unknown_kernel_group_is_refused() -> None:
    from review_alloc.flow.warm import exercise

    with pytest.raises(ValueError, match="no such group"):
        exercise("no such group")
