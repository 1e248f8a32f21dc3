"""Both sides of the minimum cut: `source_side` and `sink_side` of `max_flow`'s result.

Each side is compared with reachability in the residual graph of the returned flow computed by
networkx (`nx.descendants` from the source, `nx.ancestors` of the sink), with and without lower
bounds, and each is checked to be a cut whose capacity equals the flow value (`check_cut`).
The flow values without lower bounds are compared with networkx's maximum flow.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from review_alloc.flow import check_cut, check_flow, max_flow


def residual_sides(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    upper: np.ndarray,
    lower: np.ndarray,
    flow: np.ndarray,
    source: int,
    sink: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Reference: networkx reachability from the source and to the sink in the residual graph."""
    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    for t, h, u, lo, f in zip(tails, heads, upper, lower, flow, strict=True):
        if f < u:
            graph.add_edge(int(t), int(h))
        if f > lo:
            graph.add_edge(int(h), int(t))
    source_side = np.zeros(n, dtype=bool)
    source_side[list(nx.descendants(graph, source) | {source})] = True
    sink_side = np.zeros(n, dtype=bool)
    sink_side[list(nx.ancestors(graph, sink) | {sink})] = True
    return source_side, sink_side


def random_network(
    rng: np.random.Generator, n: int, m: int, dtype: type = np.int64, sort: bool = False
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Random edges, parallel edges, self-loops and edges into the source included."""
    tails = rng.integers(0, n, m)
    heads = rng.integers(0, n, m)
    caps = rng.integers(0, 6, m)
    if sort:
        order = np.argsort(tails, kind="stable")
        tails, heads, caps = tails[order], heads[order], caps[order]
    return tails.astype(dtype), heads.astype(dtype), caps.astype(dtype)


def check_sides(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    lower: np.ndarray | None,
    source: int,
    sink: int,
) -> None:
    """Solve, then compare both sides with networkx and check both cuts against the value."""
    result = max_flow(n, tails, heads, caps, source, sink, lower=lower)
    low = np.zeros(len(tails), np.int64) if lower is None else np.asarray(lower, np.int64)
    assert check_flow(n, tails, heads, caps, result.flow, source, sink, lower=low) == result.value
    expected_source, expected_sink = residual_sides(
        n, tails, heads, caps, low, result.flow, source, sink
    )
    assert result.source_side.dtype == np.bool_ and result.sink_side.dtype == np.bool_
    np.testing.assert_array_equal(result.source_side, expected_source)
    np.testing.assert_array_equal(result.sink_side, expected_sink)
    # Max-flow min-cut: the smallest source side and the complement of the smallest sink side
    # are both minimum cuts, so each has capacity equal to the flow value.
    for side in (result.source_side, ~result.sink_side):
        check_cut(n, tails, heads, caps, side, result.value, source, sink, lower=low)
    assert not (result.source_side & result.sink_side).any()


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("dtype", [np.int32, np.int64])
def test_sides_without_lower_bounds_match_networkx(seed: int, dtype: type) -> None:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 30))
    m = int(rng.integers(0, 4 * n))
    tails, heads, caps = random_network(rng, n, m, dtype, sort=bool(seed % 2))
    source, sink = 0, n - 1
    check_sides(n, tails, heads, caps, None, source, sink)
    # Reference value: networkx's maximum flow on the summed parallel edges (self-loops dropped).
    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    for t, h, c in zip(tails.tolist(), heads.tolist(), caps.tolist(), strict=True):
        if t != h:
            previous = graph.get_edge_data(t, h, {"capacity": 0})["capacity"]
            graph.add_edge(t, h, capacity=previous + c)
    value = nx.maximum_flow_value(graph, source, sink)
    assert max_flow(n, tails, heads, caps, source, sink).value == value


@pytest.mark.parametrize("seed", range(12))
def test_sides_with_lower_bounds_match_networkx(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(3, 30))
    tails, heads, caps = random_network(rng, n, int(rng.integers(n, 4 * n)))
    source, sink = 0, n - 1
    # Lower bounds below a feasible flow keep the network feasible.
    feasible = max_flow(n, tails, heads, caps, source, sink).flow
    lower = np.where(rng.random(len(tails)) < 0.4, rng.integers(0, feasible + 1), 0)
    check_sides(n, tails, heads, caps, lower.astype(np.int64), source, sink)


def test_lower_bounds_that_force_flow_back_to_the_source() -> None:
    # 0 -> 1 -> 2 carries at most 1, while 2 -> 0 must carry 3: the best value is -2, and the
    # sides still come from the residual graph of that flow.
    tails = np.array([0, 1, 2, 2, 1], np.int64)
    heads = np.array([1, 2, 0, 1, 0], np.int64)
    caps = np.array([1, 1, 4, 5, 5], np.int64)
    lower = np.array([0, 0, 3, 0, 0], np.int64)
    result = max_flow(3, tails, heads, caps, 0, 2, lower=lower)
    assert result.value == -2
    check_sides(3, tails, heads, caps, lower, 0, 2)


def test_sink_side_of_a_saturated_path() -> None:
    # s -> a (3) -> t (1) and s -> b (2) -> t (5): a's edge to t is full, b's is not.
    result = max_flow(4, [0, 1, 0, 2], [1, 3, 2, 3], [3, 1, 2, 5], 0, 3)
    assert result.value == 3
    assert result.source_side.tolist() == [True, True, False, False]
    assert result.sink_side.tolist() == [False, False, True, True]
    with pytest.raises(ValueError, match="read-only"):
        result.sink_side[0] = True
