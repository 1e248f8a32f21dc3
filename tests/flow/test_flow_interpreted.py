"""The kernels run uncompiled (`flow.interpreted`) give the compiled engine's optimum.

The uncompiled path runs in a child process whose kernel cache is empty, so nothing there is
compiled or loaded: every kernel call is the kernel's Python twin (the child checks that no
kernel gained a signature). This process solves the same instances with the compiled kernels,
and OR-Tools' SimpleMinCostFlow and scipy's Dinic give the reference optima.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import numpy as np
from flow_helpers import ortools_cost, scipy_value

from review_alloc.flow import interpreted, max_flow, min_cost_flow, warm_up
from review_alloc.flow.interpreted import KernelSwitch, trailing_zeros

_ROOT = Path(__file__).resolve().parents[2]



Instance = tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def instances(seed: int) -> Iterator[Instance]:
    """Small random min-cost flow instances, the same in this process and in the child."""
    rng = np.random.default_rng(seed)
    for trial in range(8):
        n = int(rng.integers(6, 30))
        m = int(rng.integers(n, 6 * n))
        tails = rng.integers(0, n, m).astype(np.int64)
        heads = rng.integers(0, n, m).astype(np.int64)
        caps = rng.integers(0, 9, m).astype(np.int64)
        costs = rng.integers(-6, 20, m).astype(np.int64)
        # Either a circulation, or one unit from node 0 to node n - 1 over an edge added for it.
        supplies = np.zeros(n, np.int64)
        if trial % 2:
            tails, heads = np.append(tails, 0), np.append(heads, n - 1)
            caps, costs = np.append(caps, 1), np.append(costs, 50)
            supplies[0], supplies[n - 1] = 1, -1
        yield n, tails, heads, caps, costs, supplies


_CHILD = """
import json, sys
sys.path.insert(0, sys.argv[2])
from test_flow_interpreted import instances
from review_alloc.flow import interpreted, max_flow, min_cost_flow, warm_up
from review_alloc.flow.compile import _kernels

interpreted.enter(lambda: False)
out = []
for n, tails, heads, caps, costs, supplies in instances(int(sys.argv[1])):
    for method in ("cost-scaling", "primal-dual"):
        r = min_cost_flow(n, tails, heads, caps, costs, supplies=supplies, method=method)
        out.append({"cost": int(r.cost), "flow": r.flow.tolist()})
    f = max_flow(n, tails, heads, caps, 0, n - 1)
    out.append({"value": int(f.value), "side": f.source_side.tolist()})
print(json.dumps({
    "results": out,
    "active": interpreted.active(),
    "compiled": [k.__name__ for k in _kernels() if k.signatures],
}))
"""

def _uncompiled(seed: int, cache: Path) -> dict:
    env = dict(os.environ, NUMBA_CACHE_DIR=str(cache), PYTHONPATH=str(_ROOT))
    done = subprocess.run(
        [sys.executable, "-c", _CHILD, str(seed), str(Path(__file__).parent)], env=env,
        capture_output=True, text=True, timeout=300, check=True,
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_uncompiled_kernels_match_the_compiled_engine_and_the_references(tmp_path: Path) -> None:
    child = _uncompiled(2026, tmp_path)
    assert child["active"] is True and child["compiled"] == [], child["compiled"]
    results = iter(child["results"])
    for n, tails, heads, caps, costs, supplies in instances(2026):
        reference = ortools_cost(n, tails, heads, caps, costs, supplies)  # OR-Tools
        for method in ("cost-scaling", "primal-dual"):
            twin = next(results)
            compiled = min_cost_flow(n, tails, heads, caps, costs, supplies=supplies,
                                     method=method)
            assert twin["cost"] == int(compiled.cost) == reference
            assert twin["flow"] == compiled.flow.tolist()
        twin = next(results)
        compiled_flow = max_flow(n, tails, heads, caps, 0, n - 1)
        # scipy.sparse.csgraph.maximum_flow (Dinic) is the reference value.
        assert twin["value"] == compiled_flow.value == scipy_value(
            n, tails, heads, caps, 0, n - 1, "dinic")
        assert twin["side"] == compiled_flow.source_side.tolist()


def test_trailing_zeros_stand_in_counts_like_the_bit_pattern() -> None:
    rng = np.random.default_rng(5)
    words = rng.integers(1, 2**63, 500, dtype=np.uint64) << rng.integers(0, 40, 500).astype(
        np.uint64)
    for word in (*words.tolist(), 1, 2**63, 2**64 - 1):
        word = np.uint64(word)
        if word == 0:
            continue
        text = np.binary_repr(int(word))
        assert trailing_zeros(word) == len(text) - len(text.rstrip("0"))


def test_a_call_with_compiled_kernels_puts_them_back_everywhere() -> None:
    # In this process the kernels are compiled (or loaded): the first call through a switch
    # leaves, restoring every namespace before anything could compile against a switch.
    from review_alloc.flow import dinic, maxflow

    # An earlier test's plan may have left small calls uncompiled in this process.
    interpreted.leave()
    warm_up()
    kernel = maxflow.max_flow_kernel
    left: list[bool] = []
    try:
        interpreted.enter(lambda: False, lambda: left.append(True))
        assert isinstance(maxflow.max_flow_kernel, KernelSwitch)
        assert dinic.max_flow_kernel is maxflow.max_flow_kernel
        assert max_flow(2, [0], [1], [5], 0, 1).value == 5
        assert not interpreted.active() and left == [True]
        assert maxflow.max_flow_kernel is kernel and dinic.max_flow_kernel is kernel
    finally:
        interpreted.leave()
