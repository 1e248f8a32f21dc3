"""The same network with its edges listed in different orders gives the same optima.

`max_flow` solves edges listed by tail as they are, edges listed by head as the reversed problem
and any other order on a copy sorted by head, as the reversed problem too, mapping the flow back
to the caller's edges;
`min_cost_flow` builds its residual network by tail whatever the order. Every order must give
the optimal value of the reference solvers, a valid flow in the caller's order (the engine's
certificate checks, which read the caller's arrays), and the same two minimal cut sides (unique
for a network, so a fixed answer).
"""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import certified_min_cost, networkx_value, ortools_cost, scipy_value
from test_flow_cut_sides import residual_sides
from test_flow_maxflow_fast import multigraph, networkx_minimal_source_side

from benchmarks.instances import ORDERS, edge_order, make_instance, max_flow_arrays
from review_alloc.flow import check_cut, check_flow, max_flow

ORDER_NAMES = ("given", "by tail", "by head", "shuffled", "reversed")


def reorder(tails: np.ndarray, heads: np.ndarray, name: str, seed: int) -> np.ndarray:
    """A permutation of the edges: as given, stably by tail or by head, shuffled, reversed."""
    if name == "given":
        return np.arange(len(tails))
    if name == "by tail":
        return np.argsort(tails, kind="stable")
    if name == "by head":
        return np.argsort(heads, kind="stable")
    if name == "shuffled":
        return np.random.default_rng(seed).permutation(len(tails))
    return np.arange(len(tails))[::-1]


@pytest.mark.parametrize("seed", range(40))
def test_max_flow_is_the_same_in_every_order(seed: int) -> None:
    rng = np.random.default_rng(9100 + seed)
    n = int(rng.integers(2, 16))
    tails, heads, caps = multigraph(rng, n, int(rng.integers(0, 60)), 9)
    s, t = 0, int(rng.integers(1, n))
    expected = scipy_value(n, tails, heads, caps, s, t, "dinic")  # reference: scipy Dinic
    assert expected == networkx_value(n, tails, heads, caps, s, t)  # reference: networkx
    # The smallest source side is unique; networkx finds it on the reversed graph, and the
    # smallest sink side is the smallest source side of the reversed graph, terminals swapped.
    source_side = networkx_minimal_source_side(n, tails, heads, caps, s, t)
    sink_side = networkx_minimal_source_side(n, heads, tails, caps, t, s)
    for name in ORDER_NAMES:
        order = reorder(tails, heads, name, seed)
        ot, oh, oc = tails[order], heads[order], caps[order]
        result = max_flow(n, ot, oh, oc, s, t)
        assert result.value == expected, name
        # The flow is one entry per edge in this order: the certificate reads these arrays.
        assert check_flow(n, ot, oh, oc, result.flow, s, t) == expected, name
        check_cut(n, ot, oh, oc, result.source_side, expected, s, t)
        check_cut(n, ot, oh, oc, ~result.sink_side, expected, s, t)
        assert result.source_side.tolist() == source_side.tolist(), name  # networkx
        # Reference: networkx reachability in the residual graph of the flow returned.
        reach, reaching = residual_sides(
            n, ot, oh, oc, np.zeros(len(ot), np.int64), result.flow, s, t
        )
        assert result.source_side.tolist() == reach.tolist(), name
        assert result.sink_side.tolist() == reaching.tolist(), name
        assert result.sink_side.tolist() == sink_side.tolist(), name  # networkx, reversed


def test_a_flow_on_a_sorted_copy_lands_on_the_callers_edges() -> None:
    # Two parallel edges 1 -> 3 listed far apart, out of tail and head order: the one with
    # capacity 0 must carry nothing in the caller's order.
    tails = np.array([1, 0, 2, 1, 0])
    heads = np.array([3, 1, 3, 3, 2])
    caps = np.array([0, 4, 1, 2, 5])
    result = max_flow(4, tails, heads, caps, 0, 3)
    assert result.value == scipy_value(4, tails, heads, caps, 0, 3, "dinic") == 3  # scipy
    assert result.flow.tolist() == [0, 2, 1, 2, 1]


@pytest.mark.parametrize("seed", range(12))
def test_capacities_beyond_32_bits_survive_the_sorted_copy(seed: int) -> None:
    # The sorted copy packs a capacity with its head and edge index into one word when it fits
    # in the bits the ids leave (here below about 2**52); larger ones take another way back.
    # Mixed sizes on both sides of that bound and of 2**31, listed in no order (neither by
    # tail nor by head).
    rng = np.random.default_rng(4400 + seed)
    n = int(rng.integers(3, 14))
    tails, heads, caps = multigraph(rng, n, int(rng.integers(4, 50)), 9)
    big = rng.random(len(caps)) < 0.5
    caps[big] = rng.integers(2**31 - 2, 2**55, int(big.sum()))
    order = np.random.default_rng(seed).permutation(len(tails))
    ot, oh, oc = tails[order], heads[order], caps[order]
    s, t = 0, n - 1
    result = max_flow(n, ot, oh, oc, s, t)
    # networkx (Python integers, no 32-bit limit) is the reference value.
    assert result.value == networkx_value(n, ot, oh, oc, s, t)
    assert check_flow(n, ot, oh, oc, result.flow, s, t) == result.value
    check_cut(n, ot, oh, oc, result.source_side, result.value, s, t)
    check_cut(n, ot, oh, oc, ~result.sink_side, result.value, s, t)


@pytest.mark.parametrize("family", ["tight", "scarce", "skewed"])
def test_benchmark_orders_give_scipys_max_flow(family: str) -> None:
    inst = make_instance(family, "S")
    n, tails, heads, caps, s, t = max_flow_arrays(inst)
    values = set()
    for order in ORDERS:
        perm = edge_order(tails, heads, order)
        ot, oh, oc = tails[perm], heads[perm], caps[perm]
        result = max_flow(n, ot, oh, oc, s, t)
        assert check_flow(n, ot, oh, oc, result.flow, s, t) == result.value
        assert result.value == scipy_value(n, ot, oh, oc, s, t, "dinic")  # reference: scipy
        values.add(result.value)
    assert len(values) == 1


@pytest.mark.parametrize("seed", range(25))
def test_min_cost_flow_is_the_same_in_every_order(seed: int) -> None:
    rng = np.random.default_rng(5300 + seed)
    n = int(rng.integers(2, 12))
    tails, heads, caps = multigraph(rng, n, int(rng.integers(1, 50)), 7)
    costs = rng.integers(-9, 10, len(tails))
    supplies = np.zeros(n, np.int64)
    amount = int(rng.integers(0, 6))
    supplies[0], supplies[n - 1] = amount, -amount
    expected = ortools_cost(n, tails, heads, caps, costs, supplies)  # reference: OR-Tools
    if expected is None:
        return
    for name in ORDER_NAMES:
        order = reorder(tails, heads, name, seed)
        # certified_min_cost checks the flow and the potentials against these arrays.
        cost = certified_min_cost(
            n, tails[order], heads[order], caps[order], costs[order], supplies
        )
        assert cost == expected, name


@pytest.mark.parametrize("family", ["loose", "skewed"])
def test_planner_sized_min_cost_in_every_order(family: str) -> None:
    # A reviewer network with scores as costs, caps on reviewers and demands on papers, in the
    # benchmark's orders; lower bounds on paper arcs make it a circulation with bounds.
    inst = make_instance(family, "S")
    n, tails, heads, caps, s, t = max_flow_arrays(inst)
    costs = np.concatenate([
        np.zeros(inst.n_reviewers, np.int64),
        -np.round(inst.pair_score * 100).astype(np.int64),
        np.full(inst.n_papers, -1000, np.int64),
    ])
    tails, heads = np.append(tails, t), np.append(heads, s)
    caps, costs = np.append(caps, int(caps.sum())), np.append(costs, 0)
    lower = np.zeros(len(tails), np.int64)
    lower[len(tails) - 1 - inst.n_papers: len(tails) - 1] = 1
    expected = ortools_cost(n, tails, heads, caps, costs, lower=lower)  # reference: OR-Tools
    assert expected is not None
    for order in ORDERS:
        perm = edge_order(tails, heads, order)
        cost = certified_min_cost(
            n, tails[perm], heads[perm], caps[perm], costs[perm], lower=lower[perm]
        )
        assert cost == expected, order
