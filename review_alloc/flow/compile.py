"""Compile (or load from the cache) every kernel ahead of the first real solve.

`warm_up()` is safe to call from a background thread (the kernels release the GIL while they
run, and a lock keeps two warm-ups from compiling at once). After a warm-up that succeeded, a
small marker file in the cache folder lets `solver_cache_ready()` tell, without importing numba
or compiling anything, whether the next process will load the kernels from disk. The kernel
modules are imported on first need only, so importing this module stays cheap.

numba compiles one kernel at a time under a process-wide lock, so on a cold cache one child
process compiles the kernels of cost scaling (the largest group, sharing no callee with the rest)
into the on-disk cache while this process compiles the others; this process then loads the
child's kernels from the cache. Should the child fail (no second CPU, no way to start a process),
this process compiles them itself.

`prepare()` is what the workspace calls before a plan: on a warm cache it is `warm_up()`; on a
cold one it starts a detached, low-priority process that runs `warm_up()` for the next run
(`compile_claimed`; a claim file beside the marker keeps two runs from compiling at once) and
lets small solves run the kernels uncompiled meanwhile (`flow.interpreted`).
"""

from __future__ import annotations

import hashlib
import os
import platform
import subprocess
import sys
import threading
from collections.abc import Callable
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import TYPE_CHECKING, Any

from review_alloc import __version__
from review_alloc.flow._cache import cache_folder

if TYPE_CHECKING:
    from review_alloc.flow.residual import ResidualNetwork

_lock = threading.Lock()


def _kernels() -> tuple[Any, ...]:
    """Every kernel that Python calls (importing the kernel modules, which configures numba)."""
    from review_alloc.flow.cost_scaling import cost_scaling_kernel
    from review_alloc.flow.dinic import (
        dinic_kernel,
        max_flow_kernel,
        reachable_kernel,
        reaching_kernel,
    )
    from review_alloc.flow.kept import kept_route_kernel, kept_swap_kernel
    from review_alloc.flow.potentials import exact_potentials
    from review_alloc.flow.primal_dual import primal_dual_kernel
    from review_alloc.flow.residual import _csr_kernel

    kernels = (
        _csr_kernel,
        max_flow_kernel,
        dinic_kernel,
        reachable_kernel,
        reaching_kernel,
        primal_dual_kernel,
        kept_route_kernel,
        kept_swap_kernel,
        cost_scaling_kernel,
        exact_potentials,
    )
    # While small calls run uncompiled, the module names hold switches around the kernels.
    return tuple(getattr(kernel, "kernel", kernel) for kernel in kernels)


def jit_disabled() -> bool:
    """Whether numba runs every kernel as plain Python (NUMBA_DISABLE_JIT=1): nothing compiles."""
    from numba.core import config

    return bool(config.DISABLE_JIT)


def kernels_ready() -> bool:
    """Whether every kernel is already compiled or loaded in this process."""
    kernels = _kernels()
    # With the JIT disabled the kernels are plain functions, ready as they are.
    return jit_disabled() or all(kernel.signatures for kernel in kernels)


def _numba_version() -> str:
    """numba's version, read from its installed metadata rather than by importing it."""
    try:
        return version("numba")
    except PackageNotFoundError:
        import numba

        return str(numba.__version__)


def _cache_in_force() -> Path:
    """The folder numba caches the kernels in: its config if set, else the one `_jit` will set."""
    numba = sys.modules.get("numba")
    if numba is not None and numba.config.CACHE_DIR:
        return Path(numba.config.CACHE_DIR)
    return cache_folder()


def _marker() -> Path:
    """The marker file for this package version, numba, Python and kernel sources."""
    key = hashlib.sha256()
    key.update(f"{__version__}|{_numba_version()}|{platform.python_version()}".encode())
    # numba drops a cached kernel when its source file changes, so the marker follows them too.
    for source in sorted(Path(__file__).parent.glob("*.py")):
        stat = source.stat()
        key.update(f"|{source.name}:{stat.st_size}:{stat.st_mtime_ns}".encode())
    return _cache_in_force() / f"review-alloc-ready-{key.hexdigest()[:16]}"


def solver_cache_ready() -> bool:
    """Whether a warm-up already filled the on-disk kernel cache for this exact installation."""
    try:
        return _marker().is_file()
    except OSError:
        return False


_GROUPS = ("max flow", "lower bounds, primal-dual", "cost scaling")
"""Kernel groups that share no callee across groups, so that two processes compiling different
groups never compile the same function twice. "max flow": the fused kernel and its helpers
(`dinic.max_flow_kernel`, `residual.scan_edges`, `sort_by_tail_packed`, `index_entering`);
"lower bounds, primal-dual": the residual CSR, Dinic, both reachability walks, the primal-dual
kernel with its Dijkstra and heap, and the kept flow's re-solve and shared-array swaps
(`kept.kept_route_kernel`, `kept.kept_swap_kernel`);
"cost scaling": the push-relabel kernel and Bellman-Ford (`potentials.py`)."""

_CHILD_GROUPS = ("cost scaling",)
"""The groups the child process compiles while this process compiles the others."""

_CHILD = "import sys; from review_alloc.flow.compile import exercise; exercise(sys.argv[1])"

_BACKGROUND = (
    "import sys; from review_alloc.flow.compile import compile_claimed; "
    "compile_claimed(sys.argv[1:])"
)

_ALSO: list[str] = []
"""Warm-ups of kernels owned by the layers above the engine, as "module:function" names
(`also_warm`): the engine may not import them, yet a cold machine should compile them with its own
kernels instead of at a large plan's first use."""


def also_warm(target: str) -> None:
    """Have a cold warm-up (here or in the background compile) also run `target`, a
    "module:function" that compiles kernels of a layer above the engine."""
    module, _, function = target.partition(":")
    if not module or not function:
        raise ValueError(f"a warm-up target is 'module:function', not {target!r}")
    if target not in _ALSO:
        _ALSO.append(target)


def _run_also() -> None:
    """Run the registered warm-ups of the layers above (imported by name: see `also_warm`)."""
    import importlib

    for target in tuple(_ALSO):
        module, _, function = target.partition(":")
        getattr(importlib.import_module(module), function)()

_CLAIM_AGE = 900.0
"""Seconds after which a background compile's claim file counts as left over by a dead run."""

# Path 0 -> 1 -> 2 plus a direct edge; the lower bound exercises the circulation stage.
_TAILS = (0, 1, 0)
_HEADS = (1, 2, 2)
_CAPACITIES = (2, 2, 1)
_CIRCULATION = (_TAILS + (2,), _HEADS + (0,), _CAPACITIES + (3,), (1, 1, 3, -4))


def _two_node_circulation() -> ResidualNetwork:
    """Edge 0 -> 1 (capacity 1, cost 1) without flow, built without `_csr_kernel`.

    The arrays have the dtypes of `build_residual`'s output, so the cost-scaling kernels compile
    the very signature a real solve loads; the warm-up tests catch any drift.
    """
    import numpy as np

    from review_alloc.flow.residual import ResidualNetwork

    return ResidualNetwork(
        n=2,
        start=np.array([0, 1, 2], dtype=np.int64),
        head=np.array([1, 0], dtype=np.int32),
        cap=np.array([1, 0], dtype=np.int64),
        rev=np.array([1, 0], dtype=np.int32),
        arc_of_edge=np.array([0], dtype=np.int64),
        cost=np.array([1, -1], dtype=np.int64),
    )


def exercise(group: str) -> None:
    """Run the solvers of one kernel group on a tiny graph, compiling or loading its kernels."""
    if group not in _GROUPS:
        raise ValueError(f"unknown kernel group {group!r}; choose from {_GROUPS}")
    import numpy as np

    from review_alloc.flow.cost_scaling import optimal_potentials
    from review_alloc.flow.maxflow import max_flow
    from review_alloc.flow.mincost import min_cost_flow

    tails, heads, capacities = (np.array(a, np.int64) for a in (_TAILS, _HEADS, _CAPACITIES))
    if group == _GROUPS[0]:
        max_flow(3, tails, heads, capacities, 0, 2)
    elif group == _GROUPS[1]:
        max_flow(3, tails, heads, capacities, 0, 2, lower=np.array([1, 0, 0], np.int64))
        min_cost_flow(3, *(np.array(a, np.int64) for a in _CIRCULATION), method="primal-dual")
        from review_alloc.flow.kept import KeptFlow

        kept = KeptFlow.solve(
            3, *(np.array(a, np.int64) for a in _CIRCULATION), method="primal-dual"
        )
        kept.patched([0], capacities=[1]).resolve()
    else:
        # Straight to the kernels: the routing stage before them belongs to the group above.
        optimal_potentials(_two_node_circulation())


def _child_env() -> dict[str, str]:
    """The environment of a compiling child: this copy of the package and this cache folder."""
    env = dict(os.environ)
    # The children must import this very copy of the package and write the same cache; they
    # get the folder through their environment, this process keeps its own untouched.
    package_root = str(Path(__file__).resolve().parents[2])
    env["PYTHONPATH"] = os.pathsep.join(p for p in (package_root, env.get("PYTHONPATH")) if p)
    env["NUMBA_CACHE_DIR"] = str(_cache_in_force())
    return env


def _start_children(groups: tuple[str, ...]) -> list[subprocess.Popen[bytes]]:
    """Start one child process per group compiling it into the cache; [] if none can start."""
    if (os.cpu_count() or 1) < 2 or not sys.executable:
        return []
    env = _child_env()
    children = []
    for group in groups:
        try:
            children.append(subprocess.Popen(
                [sys.executable, "-c", _CHILD, group], env=env,
                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            ))
        except OSError:
            # Whatever no child compiles, this process compiles after its own groups.
            break
    return children


def _wait(children: list[subprocess.Popen[bytes]]) -> bool:
    """Wait for the children; whether every one of them succeeded."""
    ok = True
    for child in children:
        try:
            ok = child.wait(timeout=600) == 0 and ok
        except subprocess.TimeoutExpired:
            child.kill()
            child.wait()
            ok = False
    return ok


def warm_up(parallel: bool = True) -> None:
    """Compile or load every kernel so that later calls start at full speed.

    With `parallel` and an empty cache, a child process compiles the cost-scaling kernels while
    this one compiles the rest; this process then loads the child's kernels (or, if the child
    failed, compiles them). With the JIT disabled there is nothing to compile, and no cache
    marker is written (it would tell a later process with the JIT on that the cache is filled).
    """
    if jit_disabled():
        return
    with _lock:
        children: list[subprocess.Popen[bytes]] = []
        # On a warm cache the layers' own kernels load at their first use (milliseconds); only
        # a cold one is worth compiling them ahead.
        cold = not solver_cache_ready()
        if parallel and not kernels_ready() and cold:
            children = _start_children(_CHILD_GROUPS)
        for group in _GROUPS:
            if group not in _CHILD_GROUPS:
                exercise(group)
        # A failed child only means this process compiles what it did not; otherwise it loads.
        _wait(children)
        for group in _CHILD_GROUPS:
            exercise(group)
        if cold:
            _run_also()
        if kernels_ready() and not solver_cache_ready():
            try:
                _marker().touch()
            except OSError:
                # A read-only cache folder only costs the message being shown again.
                return


_background: list[subprocess.Popen[bytes]] = []
"""The background compile this process started, if any."""


def _claim_file() -> Path:
    marker = _marker()
    return marker.with_name(marker.name.replace("-ready-", "-compiling-"))


def _claim() -> bool:
    """Claim the background compile of this installation; False if a live run holds it."""
    import time

    claim = _claim_file()
    try:
        claim.parent.mkdir(parents=True, exist_ok=True)
        if claim.exists() and time.time() - claim.stat().st_mtime > _CLAIM_AGE:
            claim.unlink(missing_ok=True)
        claim.touch(exist_ok=False)
    except OSError:
        return False
    return True


def _start_background() -> bool:
    """Start a detached process compiling every kernel into the cache; whether one now runs.

    The process outlives this one (a command that plans a small session exits long before the
    compile ends), so the next run loads the kernels from the cache.
    """
    if not sys.executable:
        return False
    if not _claim():
        # Another process is compiling already: the cache fills all the same.
        return True
    try:
        _background.append(subprocess.Popen(
            [sys.executable, "-c", _BACKGROUND, *_ALSO], env=_child_env(),
            start_new_session=True,
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        ))
    except OSError:
        return False
    return True


def compile_claimed(also: list[str] | None = None) -> None:
    """Compile every kernel into the cache, with the `also_warm` targets named in `also`, then
    drop the claim (the background process's job)."""
    for target in also or ():
        also_warm(target)
    if hasattr(os, "nice"):
        # The plan that started this one runs meanwhile on the same cores; it goes first.
        os.nice(19)
    try:
        warm_up()
    finally:
        _claim_file().unlink(missing_ok=True)


def _finish_background() -> None:
    """Wait for the background compile (if this process started one) and load its kernels."""
    _wait(_background)
    _background.clear()
    warm_up()


def prepare(
    announce: Callable[[bool], None] | None = None, small_first: bool = True
) -> bool:
    """Make the kernels ready to solve; whether the cache was cold (the kernels not compiled).

    On a cold cache with `small_first`, a detached process compiles the kernels into the cache
    while small solves in this process run them uncompiled (`flow.interpreted`); the first large
    solve waits for that compile and loads its kernels. Otherwise this is `warm_up()`. On a cold
    cache `announce(in_background)` is called first, before anything waits.
    """
    cold = not solver_cache_ready() and not kernels_ready()
    if cold and small_first and _start_background():
        from review_alloc.flow import interpreted

        interpreted.enter(solver_cache_ready, _finish_background)
        if announce is not None:
            announce(True)
        return cold
    if cold and announce is not None:
        announce(False)
    warm_up()
    return cold
