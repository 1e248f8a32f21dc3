"""`max_flow` without an index of the edges by head: carrying lists and sweeps for the sink side.

The fused kernel keeps, for each node, a list of the edges into it that ever carried flow (the
only reverse arcs a residual walk can use), and finds the nodes that can reach the sink by
sweeps over the nodes' own arcs, falling back on a search over an index by head when the sweeps
take too long (a long chain against the order of the sweeps). Every case here compares the
value with scipy's Dinic or networkx, checks the flow and both cuts with the engine's
certificates, and compares both sides with networkx reachability in the residual graph.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from flow_helpers import networkx_value, scipy_value
from numba import njit
from test_flow_cut_sides import check_sides, residual_sides
from test_flow_edge_order import ORDER_NAMES, reorder

from review_alloc.flow import check_cut, check_flow, max_flow
from review_alloc.flow.dinic import _in_id_order, _reaching_by_sweeps


@njit
def _sweeps(
    n: int, out_start: np.ndarray, heads: np.ndarray, caps: np.ndarray, flow: np.ndarray,
    sink: int, level: np.ndarray, seen: np.ndarray, budget: int,
) -> bool:
    # The helper has no Python entry point (only kernels call it): this one calls it for us,
    # with no carrying lists (no edge carries flow here).
    first = np.full(n, -1, dtype=np.int64)
    pool = np.empty(0, dtype=np.int64)
    pending = np.empty(n, dtype=np.int64)
    return _reaching_by_sweeps(
        n, out_start, heads, caps, flow, first, pool, sink, level, seen, pending, budget
    )


@njit
def _reorder(queue: np.ndarray, low: int, high: int, bits: np.ndarray) -> None:
    _in_id_order(queue, low, high, bits)


@pytest.mark.parametrize("seed", range(8))
def test_a_large_level_is_put_in_id_order(seed: int) -> None:
    # The search reorders a large level of its queue by node id; the rest of the queue stays.
    rng = np.random.default_rng(8800 + seed)
    n = int(rng.integers(1, 3000))
    queue = rng.permutation(n).astype(np.int32)
    low, high = sorted(int(x) for x in rng.integers(0, n + 1, 2))
    bits = np.zeros((n >> 5) + 1, np.int64)
    expected = queue.copy()
    expected[low:high] = np.sort(queue[low:high])  # reference: numpy's sort
    _reorder(queue, np.int64(low), np.int64(high), bits)
    assert queue.tolist() == expected.tolist()
    assert not bits.any()


def chain_into_sink(k: int, rising: bool) -> tuple[int, np.ndarray, np.ndarray, np.ndarray]:
    """Nodes 1..k in a chain ending at the sink k + 1; the source 0 has only a closed edge.

    With `rising`, the ids grow along the chain, so a sweep in id order marks one node only.
    """
    chain = np.arange(1, k + 1) if rising else np.arange(k, 0, -1)
    tails = np.concatenate([[0], chain])
    heads = np.concatenate([[chain[0]], chain[1:], [k + 1]])
    caps = np.concatenate([[0], np.full(k, 3)])
    return k + 2, tails.astype(np.int64), heads.astype(np.int64), caps.astype(np.int64)


@pytest.mark.parametrize("rising", [True, False])
def test_sweeps_give_up_on_a_chain_against_their_order(rising: bool) -> None:
    n, tails, heads, caps = chain_into_sink(60, rising)
    by_tail = np.argsort(tails, kind="stable")
    tails, heads, caps = tails[by_tail], heads[by_tail], caps[by_tail]
    out_start = np.zeros(n + 1, np.int64)
    np.cumsum(np.bincount(tails, minlength=n), out=out_start[1:])
    flow = np.zeros(len(tails), np.int64)
    level = np.full(n, -1, np.int32)
    level[0] = 0
    budget = 2 * len(tails) + n
    seen = np.zeros(n, np.bool_)
    done = _sweeps(np.int64(n), out_start, heads, caps, flow, np.int64(n - 1), level, seen, budget)
    # A chain rising in id order takes one sweep per node (about k * k / 2 reads); a falling
    # one is marked in a single sweep.
    assert done is (not rising)
    seen = np.zeros(n, np.bool_)
    assert _sweeps(np.int64(n), out_start, heads, caps, flow, np.int64(n - 1), level, seen, 10**6)
    # Reference: networkx ancestors of the sink in the residual graph (no flow: every edge of
    # positive capacity).
    _, expected = residual_sides(n, tails, heads, caps, flow, flow, 0, n - 1)
    assert seen.tolist() == expected.tolist()


@pytest.mark.parametrize("rising", [True, False])
@pytest.mark.parametrize("name", ORDER_NAMES)
def test_long_chains_on_both_sides_in_every_order(rising: bool, name: str) -> None:
    # A chain out of the source that cannot reach the sink and one into the sink that the
    # source cannot reach, their ids rising or falling along them: whichever way the kernel
    # solves (by tail, or reversed by head), one side needs the search over the index by head.
    k = 70
    out_chain = np.arange(1, k + 1) if rising else np.arange(k, 0, -1)
    in_chain = out_chain + k
    source, sink = 0, 2 * k + 1
    tails = np.concatenate([[source], out_chain[:-1], in_chain, [out_chain[-1]]])
    heads = np.concatenate([out_chain, in_chain[1:], [sink], [in_chain[0]]])
    caps = np.full(len(tails), 4, np.int64)
    caps[-1] = 0  # the only edge between the two chains is closed: no flow at all
    order = reorder(tails, heads, name, 3)
    ot, oh, oc = tails[order], heads[order], caps[order]
    assert scipy_value(2 * k + 2, ot, oh, oc, source, sink, "dinic") == 0  # reference: scipy
    check_sides(2 * k + 2, ot, oh, oc, None, source, sink)


@pytest.mark.parametrize("seed", range(30))
def test_flow_that_must_be_taken_back_in_every_order(seed: int) -> None:
    # Layered networks with many crossing edges: later phases push along reverse arcs of edges
    # that carried flow, which the carrying lists hold. Values against networkx, flows and cuts
    # against the engine's certificates, sides against networkx reachability.
    rng = np.random.default_rng(7700 + seed)
    layers = int(rng.integers(2, 5))
    width = int(rng.integers(2, 7))
    n = layers * width + 2
    source, sink = 0, n - 1
    tails_list, heads_list = [], []
    for layer in range(layers - 1):
        for _ in range(int(rng.integers(width, 3 * width))):
            tails_list.append(1 + layer * width + int(rng.integers(0, width)))
            heads_list.append(1 + (layer + 1) * width + int(rng.integers(0, width)))
    first = 1 + np.arange(width)
    last = 1 + (layers - 1) * width + np.arange(width)
    tails = np.concatenate([np.full(width, source), tails_list, last]).astype(np.int64)
    heads = np.concatenate([first, heads_list, np.full(width, sink)]).astype(np.int64)
    caps = rng.integers(1, 4, len(tails)).astype(np.int64)
    expected = networkx_value(n, tails, heads, caps, source, sink)  # reference: networkx
    for name in ORDER_NAMES:
        order = reorder(tails, heads, name, seed)
        ot, oh, oc = tails[order], heads[order], caps[order]
        result = max_flow(n, ot, oh, oc, source, sink)
        assert result.value == expected, name
        assert check_flow(n, ot, oh, oc, result.flow, source, sink) == expected, name
        check_cut(n, ot, oh, oc, result.source_side, expected, source, sink)
        check_sides(n, ot, oh, oc, None, source, sink)


_PLAIN_CHILD = """
import json, sys
import numpy as np
from numba.core import config
from review_alloc.flow import max_flow

assert config.DISABLE_JIT
out = []
for n, t, h, c, name in json.loads(sys.argv[1]):
    r = max_flow(n, np.array(t), np.array(h), np.array(c), 0, n - 1)
    out.append([int(r.value), r.flow.tolist()])
print(json.dumps(out))
"""


def test_plain_python_past_32_nodes_in_every_order() -> None:
    # With the JIT off the kernels run as plain Python on numpy scalars, where a bit shift of an
    # int32 node id overflows at bit 31 (ids from 31 up); node ids here reach 90. Values
    # against scipy's Dinic, flows against the engine's certificate, in every order.
    rng = np.random.default_rng(6100)
    cases = []
    for _ in range(3):
        n = int(rng.integers(40, 90))
        tails = rng.integers(0, n, 5 * n)
        heads = rng.integers(0, n, 5 * n)
        caps = rng.integers(0, 6, 5 * n)
        for name in ORDER_NAMES:
            order = reorder(tails, heads, name, 1)
            cases.append(
                [n, tails[order].tolist(), heads[order].tolist(), caps[order].tolist(), name]
            )
    root = Path(__file__).resolve().parents[2]
    env = dict(os.environ, NUMBA_DISABLE_JIT="1", PYTHONPATH=str(root))
    done = subprocess.run(
        [sys.executable, "-c", _PLAIN_CHILD, json.dumps(cases)], env=env, capture_output=True,
        text=True, timeout=600, check=True,
    )
    for (n, t, h, c, name), (value, flow) in zip(
        cases, json.loads(done.stdout.strip().splitlines()[-1]), strict=True
    ):
        t, h, c = np.array(t), np.array(h), np.array(c)
        assert value == scipy_value(n, t, h, c, 0, n - 1, "dinic"), name  # reference: scipy
        assert check_flow(n, t, h, c, np.array(flow), 0, n - 1) == value, name
