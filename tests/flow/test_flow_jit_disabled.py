"""With numba's JIT disabled (NUMBA_DISABLE_JIT=1) the engine still solves, as plain Python.

A child process with the JIT off and an empty kernel cache solves small instances (max flows in
every edge order the fused kernel distinguishes, with and without lower bounds, and min-cost
flows by both methods); this process compares its answers with scipy's Dinic, networkx and
OR-Tools, and the child checks that nothing was compiled and no cache marker was written.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import networkx as nx
import numpy as np
from flow_helpers import ortools_cost, scipy_value
from scipy.optimize import linprog

_ROOT = Path(__file__).resolve().parents[2]

Instance = tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def instances(seed: int) -> Iterator[Instance]:
    """Small random graphs (n, tails, heads, capacities, costs), the same in both processes."""
    rng = np.random.default_rng(seed)
    for _ in range(4):
        n = int(rng.integers(5, 14))
        m = int(rng.integers(n, 4 * n))
        tails = rng.integers(0, n, m).astype(np.int64)
        heads = rng.integers(0, n, m).astype(np.int64)
        caps = rng.integers(0, 7, m).astype(np.int64)
        costs = rng.integers(-3, 12, m).astype(np.int64)
        yield n, tails, heads, caps, costs


ORDERS = ("as drawn", "by tail", "by head")


def ordered(tails: np.ndarray, heads: np.ndarray, order: str) -> np.ndarray:
    """The permutation listing the edges in `order` (the fused kernel solves each differently)."""
    if order == "by tail":
        return np.argsort(tails, kind="stable")
    if order == "by head":
        return np.argsort(heads, kind="stable")
    return np.arange(len(tails))


_CHILD = """
import json, sys
sys.path.insert(0, sys.argv[2])
import numpy as np
from numba.core import config
from test_flow_jit_disabled import ORDERS, instances, ordered
from review_alloc.flow import check_flow, max_flow, min_cost_flow, warm_up
from review_alloc.flow.compile import kernels_ready, prepare, solver_cache_ready

assert config.DISABLE_JIT
warm_up()
prepare()
out = []
for n, tails, heads, caps, costs in instances(int(sys.argv[1])):
    for order in ORDERS:
        p = ordered(tails, heads, order)
        r = max_flow(n, tails[p], heads[p], caps[p], 0, n - 1)
        check_flow(n, tails[p], heads[p], caps[p], r.flow, 0, n - 1)
        out.append(int(r.value))
    lower = np.minimum(caps, 1) * (np.arange(len(caps)) % 3 == 0)
    try:
        out.append(int(max_flow(n, tails, heads, caps, 0, n - 1, lower=lower).value))
    except Exception as error:
        out.append(type(error).__name__)
    for method in ("cost-scaling", "primal-dual"):
        r = min_cost_flow(n, tails, heads, caps, costs, method=method)
        out.append(int(r.cost))
print(json.dumps({"results": out, "ready": kernels_ready(), "marker": solver_cache_ready()}))
"""


def _highs_max_flow(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                    lower: np.ndarray, s: int, t: int) -> int | str:
    """The maximum net outflow of s with lower <= flow <= caps, or "InfeasibleError"."""
    m = len(tails)
    incidence = np.zeros((n, m))
    np.add.at(incidence, (tails, np.arange(m)), 1.0)
    np.add.at(incidence, (heads, np.arange(m)), -1.0)
    inner = [v for v in range(n) if v not in (s, t)]
    result = linprog(-incidence[s], A_eq=incidence[inner], b_eq=np.zeros(len(inner)),
                     bounds=np.column_stack([lower, caps]).astype(float), method="highs")
    if result.status == 2:
        return "InfeasibleError"
    assert result.status == 0, result.message
    return int(round(-result.fun))


def _networkx_min_cost(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                       costs: np.ndarray) -> int:
    """The least-cost circulation by networkx's network simplex (parallel edges split)."""
    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    for e, (t, h, c, w) in enumerate(zip(tails.tolist(), heads.tolist(), caps.tolist(),
                                         costs.tolist(), strict=True)):
        # A middle node per edge: networkx's DiGraph holds no parallel edges or self-loops.
        graph.add_edge(t, ("edge", e), capacity=c, weight=w)
        graph.add_edge(("edge", e), h, capacity=c, weight=0)
    cost, _ = nx.network_simplex(graph)
    return int(cost)


def test_the_engine_solves_with_the_jit_disabled(tmp_path: Path) -> None:
    env = dict(os.environ, NUMBA_DISABLE_JIT="1", NUMBA_CACHE_DIR=str(tmp_path),
               PYTHONPATH=str(_ROOT))
    done = subprocess.run(
        [sys.executable, "-c", _CHILD, "4242", str(Path(__file__).parent)], env=env,
        capture_output=True, text=True, timeout=300,
    )
    assert done.returncode == 0, done.stderr[-3000:]
    child = json.loads(done.stdout.strip().splitlines()[-1])
    # Nothing compiled, and no marker that would tell a JIT-enabled process the cache is full.
    assert child["ready"] is True and child["marker"] is False
    assert not any(tmp_path.iterdir())
    results = iter(child["results"])
    for n, tails, heads, caps, costs in instances(4242):
        # scipy.sparse.csgraph.maximum_flow (Dinic) gives the reference value in every order.
        reference = scipy_value(n, tails, heads, caps, 0, n - 1, "dinic")
        for _ in ORDERS:
            assert next(results) == reference
        lower = np.minimum(caps, 1) * (np.arange(len(caps)) % 3 == 0)
        # HiGHS (scipy.optimize.linprog) solves the flow LP with the lower bounds.
        assert next(results) == _highs_max_flow(n, tails, heads, caps, lower, 0, n - 1)
        # OR-Tools' SimpleMinCostFlow and networkx's network simplex give the reference cost.
        supplies = np.zeros(n, np.int64)
        best = ortools_cost(n, tails, heads, caps, costs, supplies)
        assert best == _networkx_min_cost(n, tails, heads, caps, costs)
        for _ in ("cost-scaling", "primal-dual"):
            assert next(results) == best
