"""The fused max-flow kernel (no lower bounds) against scipy, networkx and HiGHS.

The kernel checks, indexes and solves in one call, with a path for tails already sorted, one for
heads already sorted (the reversed problem) and one for any order (a sorted copy), and hands
inputs it refuses to the full checks for their message. These cases
cover both orders, parallel edges, self-loops, edges into the source, strided and int32 input,
totals near the int64 guard and lower bounds (which take the circulation path).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from flow_helpers import certified_max_flow, networkx_value, scipy_value
from scipy.optimize import linprog
from scipy.sparse import coo_matrix

from review_alloc.flow import FlowInputError, InfeasibleError, max_flow


def multigraph(
    rng: np.random.Generator, n: int, m: int, max_cap: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Random edges with repeated pairs, self-loops, zero capacities and edges into node 0."""
    tails = rng.integers(0, n, m)
    heads = rng.integers(0, n, m)
    repeat = rng.integers(0, m, m // 4)
    tails, heads = np.append(tails, tails[repeat]), np.append(heads, heads[repeat])
    loops = rng.integers(0, n, 2)
    tails, heads = np.append(tails, loops), np.append(heads, loops)
    into_source = rng.integers(1, n, 2)
    tails, heads = np.append(tails, into_source), np.append(heads, [0, 0])
    capacities = rng.integers(0, max_cap + 1, len(tails))
    capacities[rng.random(len(tails)) < 0.1] = 0
    return tails.astype(np.int64), heads.astype(np.int64), capacities.astype(np.int64)


def networkx_minimal_source_side(
    n: int, tails: np.ndarray, heads: np.ndarray, capacities: np.ndarray, s: int, t: int
) -> np.ndarray:
    """Nodes reachable from s in a maximum flow's residual graph, by networkx.minimum_cut.

    networkx returns as sink side the nodes that reach the sink in the residual graph; on the
    reversed graph with the terminals swapped, that side is the set reachable from s here.
    Every maximum flow has the same such set, so it is a fixed answer to compare with.
    """
    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    for u, v, c in zip(tails.tolist(), heads.tolist(), capacities.tolist(), strict=True):
        if u == v:
            continue
        if graph.has_edge(v, u):
            graph[v][u]["capacity"] += c
        else:
            graph.add_edge(v, u, capacity=c)
    _, (_, reach_s) = nx.minimum_cut(graph, t, s)
    side = np.zeros(n, dtype=bool)
    side[list(reach_s)] = True
    return side


@pytest.mark.parametrize("order", ["given", "sorted by tail", "sorted by head"])
def test_random_multigraphs_match_scipy_and_networkx(order: str) -> None:
    rng = np.random.default_rng({"given": 20261202, "sorted by tail": 7}.get(order, 13))
    for _ in range(60):
        n = int(rng.integers(2, 14))
        tails, heads, capacities = multigraph(rng, n, int(rng.integers(0, 50)), 9)
        if order == "sorted by tail":
            by_tail = np.argsort(tails, kind="stable")
            tails, heads, capacities = tails[by_tail], heads[by_tail], capacities[by_tail]
        if order == "sorted by head":
            by_head = np.argsort(heads, kind="stable")
            tails, heads, capacities = tails[by_head], heads[by_head], capacities[by_head]
        s, t = 0, int(rng.integers(1, n))
        value = certified_max_flow(n, tails, heads, capacities, s, t)
        # References: scipy.sparse.csgraph.maximum_flow (both methods) and networkx.
        assert value == scipy_value(n, tails, heads, capacities, s, t, "dinic")
        assert value == scipy_value(n, tails, heads, capacities, s, t, "edmonds_karp")
        assert value == networkx_value(n, tails, heads, capacities, s, t)
        result = max_flow(n, tails, heads, capacities, s, t)
        expected = networkx_minimal_source_side(n, tails, heads, capacities, s, t)
        assert result.source_side.tolist() == expected.tolist()  # reference: networkx
        assert result.flow[tails == heads].sum() == 0
        assert result.flow[heads == s].sum() == 0


def test_zero_lower_bounds_give_the_result_without_them() -> None:
    rng = np.random.default_rng(5)
    for _ in range(20):
        n = int(rng.integers(2, 10))
        tails, heads, capacities = multigraph(rng, n, 30, 6)
        bare = max_flow(n, tails, heads, capacities, 0, n - 1)
        zero = max_flow(n, tails, heads, capacities, 0, n - 1, lower=np.zeros(len(tails), int))
        # Reference: scipy.sparse.csgraph.maximum_flow.
        assert bare.value == scipy_value(n, tails, heads, capacities, 0, n - 1, "dinic")
        assert (bare.value, bare.phases) == (zero.value, zero.phases)
        assert np.array_equal(bare.flow, zero.flow)
        assert np.array_equal(bare.source_side, zero.source_side)


def test_reviewer_network_in_any_edge_order() -> None:
    rng = np.random.default_rng(11)
    n_r, n_p = 60, 90
    pairs = np.argwhere(rng.random((n_r, n_p)) < 0.15)
    sink = 1 + n_r + n_p
    tails = np.concatenate([np.zeros(n_r, int), 1 + pairs[:, 0], 1 + n_r + np.arange(n_p)])
    heads = np.concatenate([1 + np.arange(n_r), 1 + n_r + pairs[:, 1], np.full(n_p, sink)])
    capacities = np.concatenate([rng.integers(1, 6, n_r), np.ones(len(pairs), int),
                                 np.full(n_p, 3)])
    expected = scipy_value(sink + 1, tails, heads, capacities, 0, sink, "dinic")  # scipy
    shuffled = rng.permutation(len(tails))
    for order in (np.arange(len(tails)), shuffled, shuffled[::-1]):
        t, h, c = tails[order], heads[order], capacities[order]
        assert certified_max_flow(sink + 1, t, h, c, 0, sink) == expected


def test_strided_and_int32_input() -> None:
    rng = np.random.default_rng(3)
    tails, heads, capacities = multigraph(rng, 12, 80, 20)
    expected = scipy_value(12, tails, heads, capacities, 0, 11, "dinic")  # reference: scipy
    doubled = np.repeat(np.stack([tails, heads, capacities]), 2, axis=1)
    strided = max_flow(12, doubled[0, ::2], doubled[1, ::2], doubled[2, ::2], 0, 11)
    narrow = max_flow(12, tails.astype(np.int32), heads.astype(np.uint16),
                      capacities.astype(np.int8), 0, 11)
    assert strided.value == narrow.value == expected
    assert np.array_equal(strided.flow, narrow.flow)


def test_capacities_totalling_above_two_to_the_61() -> None:
    # The kernel leaves totals from 2**61 up to the exact check, then solves; networkx works on
    # Python integers, so it is a reference at this size.
    big = 2**59
    tails = np.array([0, 0, 1, 2, 1, 3])
    heads = np.array([1, 2, 3, 3, 2, 4])
    capacities = np.array([big, big, big - 5, big, 7, big + 3])
    value = certified_max_flow(5, tails, heads, capacities, 0, 4)
    assert value == networkx_value(5, tails, heads, capacities, 0, 4) == big + 3
    with pytest.raises(FlowInputError, match=r"^capacities add up to about"):
        max_flow(5, tails, heads, np.full(6, 2**60), 0, 4)


def test_refusals_keep_the_documented_order() -> None:
    # The scan stops at the first bad edge, whatever its kind; the message still follows the
    # order tails, heads, capacities (documented in review_alloc.flow.validate).
    tails = np.array([0, 1, 2, 9])
    heads = np.array([7, 2, 3, 3])
    capacities = np.array([-1, 1, 1, 1])
    with pytest.raises(FlowInputError, match=r"^tails\[3\] is 9; node ids must be between"):
        max_flow(4, tails, heads, capacities, 0, 3)
    with pytest.raises(FlowInputError, match=r"^heads\[0\] is 7; node ids must be between"):
        max_flow(4, tails[:3], heads[:3], capacities[:3], 0, 3)
    with pytest.raises(FlowInputError, match=r"^capacities\[0\] is -1; capacities must be"):
        max_flow(4, tails[:3], np.array([1, 2, 3]), capacities[:3], 0, 3)


def highs_max_flow_value(
    n: int, tails: np.ndarray, heads: np.ndarray, upper: np.ndarray, lower: np.ndarray,
    s: int, t: int,
) -> int | None:
    """Maximum s-t value with bounds on every edge, as an LP solved by HiGHS; None: infeasible."""
    m = len(tails)
    net_out = coo_matrix(
        (np.concatenate([np.ones(m), -np.ones(m)]),
         (np.concatenate([tails, heads]), np.concatenate([np.arange(m), np.arange(m)]))),
        shape=(n, m),
    ).tocsr()
    inner = np.array([v for v in range(n) if v not in (s, t)], dtype=int)
    result = linprog(
        -net_out[s].toarray().ravel(),
        A_eq=net_out[inner] if len(inner) else None,
        b_eq=np.zeros(len(inner)) if len(inner) else None,
        bounds=np.column_stack([lower, upper]).astype(float),
        method="highs",
    )
    if result.status == 2:
        return None
    assert result.status == 0, result.message
    return int(round(-result.fun))


def test_lower_bounds_match_highs() -> None:
    rng = np.random.default_rng(17)
    solved = refused = 0
    for _ in range(40):
        n = int(rng.integers(3, 9))
        tails, heads, upper = multigraph(rng, n, 18, 6)
        lower = np.where(rng.random(len(tails)) < 0.2, rng.integers(0, 3, len(tails)), 0)
        lower = np.minimum(lower, upper)
        expected = highs_max_flow_value(n, tails, heads, upper, lower, 0, n - 1)  # HiGHS LP
        if expected is None:
            with pytest.raises(InfeasibleError):
                max_flow(n, tails, heads, upper, 0, n - 1, lower=lower)
            refused += 1
        else:
            assert certified_max_flow(n, tails, heads, upper, 0, n - 1, lower=lower) == expected
            solved += 1
    assert solved >= 10 and refused >= 1
