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
environ = dict(os.environ)
import review_alloc.flow as flow
before = flow.kernels_ready()
on_disk_before = flow.solver_cache_ready()
if sys.argv[1] == "warm":
    flow.warm_up()
import numba
print(json.dumps({
    "cache": numba.config.CACHE_DIR,
    "environ_kept": dict(os.environ) == environ,
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
    assert report["environ_kept"] is True  # numba learns the folder from its config, not os.environ
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
    assert report["environ_kept"] is True
    assert report["before"] is False and report["after"] is False


_IMPORT_ONLY = """
import json, os, sys
environ = dict(os.environ)
import review_alloc.flow as flow
from review_alloc.flow import solver_cache_ready, warm_up
imported = {"numba": "numba" in sys.modules, "environ_kept": dict(os.environ) == environ}
solver_cache_ready()
checked = {"numba": "numba" in sys.modules, "environ_kept": dict(os.environ) == environ}
value = flow.max_flow(3, [0, 1], [1, 2], [4, 3], 0, 2).value
import numba
print(json.dumps({
    "imported": imported,
    "checked": checked,
    "value": value,
    "environ_kept": dict(os.environ) == environ,
    "cache": numba.config.CACHE_DIR,
    "all": sorted(flow.__all__) == sorted(name for name in flow.__all__ if hasattr(flow, name)),
}))
"""


def test_importing_the_engine_changes_nothing_until_a_solve(tmp_path: Path) -> None:
    # Importing the package (and asking whether the cache is ready) neither touches the
    # environment nor imports numba; the first solve compiles into the per-user folder.
    env = dict(os.environ, XDG_CACHE_HOME=str(tmp_path), PYTHONPATH=str(_ROOT))
    env.pop("NUMBA_CACHE_DIR", None)
    done = subprocess.run(
        [sys.executable, "-c", _IMPORT_ONLY], env=env, capture_output=True, text=True,
        timeout=300, check=True,
    )
    report = json.loads(done.stdout.strip().splitlines()[-1])
    assert report["imported"] == {"numba": False, "environ_kept": True}
    assert report["checked"] == {"numba": False, "environ_kept": True}
    assert report["value"] == 3 and report["environ_kept"] is True and report["all"] is True
    folder = tmp_path / "review-alloc" / "numba"
    assert report["cache"] == str(folder)
    assert any(folder.rglob("dinic*.nbi")), "the solve cached no kernel in the per-user folder"


def test_an_unknown_engine_name_is_an_attribute_error() -> None:
    import review_alloc.flow as flow

    with pytest.raises(AttributeError, match="has no attribute 'no_such_solver'"):
        flow.no_such_solver  # noqa: B018


def test_every_kernel_releases_the_gil() -> None:
    # The TUI solves in a worker thread; a kernel holding the GIL would freeze the screen.
    from review_alloc.flow.compile import _kernels

    assert all(kernel.targetoptions.get("nogil") for kernel in _kernels())


def test_warm_up_in_process() -> None:
    warm_up()
    assert kernels_ready()
    assert max_flow(2, [0], [1], [5], 0, 1).value == 5



_CHILD_ONLY = """
from review_alloc.flow.compile import _CHILD_GROUPS, _start_children, _wait
children = _start_children(_CHILD_GROUPS)
assert len(children) == len(_CHILD_GROUPS) and _wait(children)
"""

_LOADS_ONLY = """
import json
import review_alloc.flow as flow
from review_alloc.flow.compile import _kernels
flow.warm_up(parallel=False)
print(json.dumps({k.__name__: [sum(k.stats.cache_hits.values()), sum(k.stats.cache_misses.values())]
                  for k in _kernels()}))
"""


def test_the_child_fills_the_cache_so_the_parent_only_loads_its_kernels(tmp_path: Path) -> None:
    # The parallel cold start compiles cost scaling in a child process, from arrays built by
    # hand; a real solve afterwards must find exactly those kernels on disk.
    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path), PYTHONPATH=str(_ROOT))
    for code in (_CHILD_ONLY, _LOADS_ONLY):
        done = subprocess.run(
            [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=300,
            check=True,
        )
    counts = json.loads(done.stdout.strip().splitlines()[-1])
    from_child = {"cost_scaling_kernel", "exact_potentials"}
    assert from_child <= counts.keys()
    assert all(counts[name] == [1, 0] for name in from_child), counts
    # The kernels of the groups the parent compiles itself were not in the cache.
    assert all(counts[name][1] == 1 for name in counts.keys() - from_child), counts


_SIGNATURES = """
import importlib, json, pkgutil
import numpy as np
from numba.core.registry import CPUDispatcher
import review_alloc.flow as flow
from review_alloc.flow import max_flow, min_cost_flow

# In this process: helpers of kernels loaded from the cache would show no signature at all.
flow.warm_up(parallel=False)
rng = np.random.default_rng(7)
for dtype in (np.int32, np.int64):
    for trial in range(4):
        n, m = 40, 240
        tails = rng.integers(0, n, m).astype(dtype)
        heads = rng.integers(0, n, m).astype(dtype)
        caps = rng.integers(1, 9, m).astype(dtype)
        costs = rng.integers(-5, 20, m).astype(dtype)
        lower = (rng.random(m) < 0.1).astype(dtype)
        max_flow(n, tails, heads, caps, 0, n - 1)
        max_flow(n, np.sort(tails), heads, caps, 0, n - 1)
        for bounds in (None, lower):
            try:
                max_flow(n, tails, heads, caps, 0, n - 1, lower=bounds)
            except flow.InfeasibleError:
                pass
            for method in ("cost-scaling", "primal-dual"):
                try:
                    min_cost_flow(n, tails, heads, caps, costs, lower=bounds, method=method)
                except flow.InfeasibleError:
                    pass
        first = min_cost_flow(n, tails, heads, caps, costs)
        caps[: m // 10] = 0
        min_cost_flow(
            n, tails, heads, caps, costs, warm=flow.WarmStart(first.flow, first.potentials)
        )
# The planner's own networks: S-size venues, then a re-plan after withdrawals from a warm start.
from benchmarks.instances import make_instance, make_session, withdrawal
from review_alloc.plan import make_plan
for family in ("tight", "scarce"):
    inst = make_instance(family, "S")
    outcome = make_plan(make_session(inst))
    after = make_session(inst, withdrawn=withdrawal(inst)).model_copy(
        update={"plan": outcome.plan}
    )
    make_plan(after, warm=outcome)
counts = {}
for info in pkgutil.iter_modules(flow.__path__):
    module = importlib.import_module(f"review_alloc.flow.{info.name}")
    for name, value in vars(module).items():
        if isinstance(value, CPUDispatcher) and value.__module__ == module.__name__:
            counts[f"{info.name}.{name}"] = len(value.signatures)
print(json.dumps(counts))
"""


def test_every_kernel_compiles_exactly_one_signature(tmp_path: Path) -> None:
    # Every extra signature is a second cold compile (and a kernel the warm-up misses): after a
    # warm-up and solves of every kind on int32 and int64 inputs, with and without lower bounds
    # and warm starts, and the planner's S-size venues with a warm re-plan, each kernel must hold
    # the one signature the warm-up compiled. A fresh process, so that kernels called directly
    # by other tests do not count.
    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path), PYTHONPATH=str(_ROOT))
    done = subprocess.run(
        [sys.executable, "-c", _SIGNATURES], env=env, capture_output=True, text=True,
        timeout=600, check=True,
    )
    counts = json.loads(done.stdout.strip().splitlines()[-1])
    expected = {
        "dinic.bfs_levels", "dinic.reaching_kernel", "dinic._edge_reaching",
        "primal_dual.heap_push", "residual._csr_kernel", "potentials.bellman_ford",
    }
    assert expected <= counts.keys()
    assert {name: count for name, count in counts.items() if count != 1} == {}


def test_an_unknown_kernel_group_is_refused() -> None:
    from review_alloc.flow.compile import exercise

    with pytest.raises(ValueError, match="no such group"):
        exercise("no such group")


_CALLS: list[str] = []


def record_warm_up() -> None:
    """A warm-up target of a layer above the engine, for the test below."""
    _CALLS.append("warmed")


def test_layers_above_compile_their_kernels_in_a_cold_warm_up_only(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    import review_alloc.flow.compile as compile_module

    target = f"{__name__}:record_warm_up"
    monkeypatch.setattr(compile_module, "_ALSO", [])
    monkeypatch.setattr(compile_module, "_marker", lambda: tmp_path / "ready")
    compile_module.also_warm(target)
    compile_module.also_warm(target)  # registered once
    _CALLS.clear()
    compile_module.warm_up(parallel=False)  # the marker is missing: a cold cache
    assert _CALLS == ["warmed"] and (tmp_path / "ready").is_file()
    compile_module.warm_up(parallel=False)  # warm: their kernels load at first use instead
    assert _CALLS == ["warmed"]
    with pytest.raises(ValueError, match="module:function"):
        compile_module.also_warm("no_function_named")
    # The detached background compile is told the same targets.
    started: list[list[str]] = []

    class _Popen:
        def __init__(self, args: list[str], **_: object) -> None:
            started.append(args)

    monkeypatch.setattr(compile_module, "_claim", lambda: True)
    monkeypatch.setattr(compile_module.subprocess, "Popen", _Popen)
    monkeypatch.setattr(compile_module, "_background", [])
    assert compile_module._start_background()
    assert started and started[0][-1] == target
    _CALLS.clear()
    monkeypatch.setattr(compile_module, "_claim_file", lambda: tmp_path / "claim")
    (tmp_path / "ready").unlink()
    compile_module.compile_claimed([target])
    assert _CALLS == ["warmed"]


def test_the_workspace_registers_the_planner_kernels() -> None:
    import review_alloc.flow.compile as compile_module
    from review_alloc.workspace import prepare_solver

    prepare_solver()
    assert {
        "review_alloc.plan.lead_paths:exercise", "review_alloc.plan.check_pass:exercise"
    } <= set(compile_module._ALSO)
