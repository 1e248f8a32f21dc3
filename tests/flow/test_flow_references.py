"""Published worked examples (values and sources as listed in ../shared/REFERENCES.md)."""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import certified_max_flow, certified_min_cost, labelled

from review_alloc.flow import (
    InfeasibleError,
    check_violated_cut,
    feasible_circulation,
    max_flow,
    min_cost_flow,
)

# CLRS, *Introduction to Algorithms*, 2nd ed., §26.1, Fig. 26.1 (also scipy's `maximum_flow` docs)
CLRS_2ND = [
    ("s", "v1", 16), ("s", "v2", 13), ("v1", "v2", 10), ("v2", "v1", 4), ("v1", "v3", 12),
    ("v3", "v2", 9), ("v2", "v4", 14), ("v4", "v3", 7), ("v3", "t", 20), ("v4", "t", 4),
]
# Wikipedia, "Dinic's algorithm", worked example (also networkx's flow tests)
WIKIPEDIA_DINIC = [
    ("s", 1, 10), ("s", 2, 10), (1, 3, 4), (1, 4, 8), (1, 2, 2), (2, 4, 9), (3, "t", 10),
    (4, 3, 6), (4, "t", 10),
]
# Taha, *Introduction to Operations Research*, Example 6.4-2 (also the OR-Tools max-flow guide)
TAHA = [
    (0, 1, 20), (0, 2, 30), (0, 3, 10), (1, 2, 40), (1, 4, 30), (2, 3, 10), (2, 4, 20),
    (3, 2, 5), (3, 4, 20),
]
# DIMACS max-flow format sample (lp_solve's DIMACS page)
DIMACS = [(1, 2, 5), (1, 3, 15), (2, 4, 5), (2, 5, 5), (3, 4, 5), (3, 5, 5), (4, 6, 15), (5, 6, 5)]
# networkx `maximum_flow` docstring graph (TopCoder tutorial)
NETWORKX_MAXFLOW = [
    ("x", "a", 3), ("x", "b", 1), ("a", "c", 3), ("b", "c", 5), ("b", "d", 4), ("d", "e", 2),
    ("c", "y", 2), ("e", "y", 3),
]


@pytest.mark.parametrize(
    ("edges", "source", "sink", "expected"),
    [
        (CLRS_2ND, "s", "t", 23),  # CLRS 2nd ed., Fig. 26.1: 23
        (TAHA, 0, 4, 60),  # Taha, Example 6.4-2: 60
        (DIMACS, 1, 6, 15),  # DIMACS max-flow format sample: 15
        (NETWORKX_MAXFLOW, "x", "y", 3),  # networkx `maximum_flow` docstring graph: 3
        (WIKIPEDIA_DINIC, "s", "t", 19),  # Wikipedia, "Dinic's algorithm": 19
    ],
)
def test_published_max_flow_values(
    edges: list, source: object, sink: object, expected: int
) -> None:
    g = labelled(edges)
    value = certified_max_flow(
        g.n, g.tails, g.heads, g.capacities, g.index[source], g.index[sink]
    )
    assert value == expected


def test_clrs_unique_min_cut() -> None:
    # CLRS, *Introduction to Algorithms*, 2nd ed., §26.1, Fig. 26.1: 23, unique cut {s, v1, v2, v4}
    g = labelled(CLRS_2ND)
    result = max_flow(g.n, g.tails, g.heads, g.capacities, g.index["s"], g.index["t"])
    assert result.value == 23
    assert g.side(result.source_side) == {"s", "v1", "v2", "v4"}


def test_clrs_third_edition_figure() -> None:
    # CLRS 3rd ed. figure drops ("v1","v2",10): still 23
    g = labelled([e for e in CLRS_2ND if e[:2] != ("v1", "v2")])
    assert len(g.tails) == 9
    assert certified_max_flow(g.n, g.tails, g.heads, g.capacities, g.index["s"], g.index["t"]) == 23


def test_wikipedia_dinic_unique_min_cut() -> None:
    # Wikipedia, "Dinic's algorithm", worked example: 19, unique cut S = {s, 2}
    g = labelled(WIKIPEDIA_DINIC)
    result = max_flow(g.n, g.tails, g.heads, g.capacities, g.index["s"], g.index["t"])
    assert result.value == 19
    assert g.side(result.source_side) == {"s", 2}
    assert result.phases >= 1


def test_networkx_min_cost_flow_docstring() -> None:
    # networkx `min_cost_flow` docstring: demands a = -5, d = +5 -> cost 24
    g = labelled([("a", "b", 4, 3), ("a", "c", 10, 6), ("b", "d", 9, 1), ("c", "d", 5, 2)])
    supplies = g.vector({"a": 5, "d": -5})  # networkx demand -5 means the node sends 5
    assert certified_min_cost(g.n, g.tails, g.heads, g.capacities, g.costs, supplies) == 24


def test_bradley_hax_magnanti_fig_8_1() -> None:
    # Bradley, Hax & Magnanti, *Applied Mathematical Programming* (1977), Fig. 8.1
    # (also the OR-Tools min-cost-flow guide): 150
    edges = np.array(
        [(0, 1, 15, 4), (0, 2, 8, 4), (1, 2, 20, 2), (1, 3, 4, 2), (1, 4, 10, 6), (2, 3, 15, 1),
         (2, 4, 4, 3), (3, 4, 20, 2), (4, 2, 5, 3)]
    )
    supplies = np.array([20, 0, 0, -5, -15])
    cost = certified_min_cost(5, edges[:, 0], edges[:, 1], edges[:, 2], edges[:, 3], supplies)
    assert cost == 150


# networkx `test_mincost.py::test_digraph2`: max flow 32 at min cost 193
DIGRAPH2 = [
    ("s", 1, 12, 0), ("s", 2, 6, 0), ("s", 3, 14, 0), (1, 2, 11, 4), (2, 3, 9, 6), (1, 4, 5, 5),
    (1, 5, 2, 12), (2, 5, 4, 4), (2, 6, 2, 6), (3, 6, 31, 3), (4, 5, 18, 4), (5, 6, 9, 5),
    (4, "t", 3, 0), (5, "t", 7, 0), (6, "t", 22, 0),
]


def test_digraph2_max_flow_then_fixed_supplies() -> None:
    # networkx `test_mincost.py::test_digraph2`: max flow 32 at min cost 193
    g = labelled(DIGRAPH2)
    s, t = g.index["s"], g.index["t"]
    value = certified_max_flow(g.n, g.tails, g.heads, g.capacities, s, t)
    assert value == 32
    supplies = g.vector({"s": value, "t": -value})
    assert certified_min_cost(g.n, g.tails, g.heads, g.capacities, g.costs, supplies) == 193


def test_digraph2_as_circulation_with_rewarded_return_edge() -> None:
    # networkx `test_mincost.py::test_digraph2`: max flow 32 at min cost 193.
    # A return edge t -> s with cost -BIG makes the cheapest circulation a maximum flow.
    g = labelled(DIGRAPH2)
    s, t = g.index["s"], g.index["t"]
    big = 10_000
    tails, heads = np.append(g.tails, t), np.append(g.heads, s)
    capacities, costs = np.append(g.capacities, 1000), np.append(g.costs, -big)
    cost = certified_min_cost(g.n, tails, heads, capacities, costs)
    assert cost == 193 - 32 * big


def test_dantzig_transportation() -> None:
    # Dantzig, *Linear Programming and Extensions* (1963), §3.3: 153 675
    supply, demand = [350, 600], [325, 300, 275]
    cost = [[225, 153, 162], [225, 162, 126]]
    # Unbalanced (950 supplied, 900 demanded): a dummy market takes the 50 spare cases for free.
    plants, markets, dummy = [0, 1], [2, 3, 4], 5
    tails, heads, costs = [], [], []
    for i, plant in enumerate(plants):
        for j, market in enumerate(markets):
            tails.append(plant)
            heads.append(market)
            costs.append(cost[i][j])
        tails.append(plant)
        heads.append(dummy)
        costs.append(0)
    capacities = np.full(len(tails), sum(supply), dtype=np.int64)
    supplies = np.array(supply + [-d for d in demand] + [sum(demand) - sum(supply)])
    total = certified_min_cost(
        6, np.array(tails), np.array(heads), capacities, np.array(costs), supplies
    )
    assert total == 153_675


# LEMON graph library, `test/circulation_test.cc`: arcs (u, v, lower, upper)
LEMON = np.array(
    [(0, 1, 2, 10), (0, 2, 2, 6), (1, 3, 4, 7), (1, 4, 0, 5), (2, 4, 1, 3), (3, 5, 3, 8),
     (4, 5, 3, 7)]
)


@pytest.mark.parametrize("value", range(5, 16))
def test_lemon_exact_flow_value(value: int) -> None:
    # LEMON graph library, `test/circulation_test.cc`: an exact 0 -> 5 flow of value F is
    # feasible iff 7 <= F <= 13 (F = 6 and F = 14 are infeasible)
    tails, heads = np.append(LEMON[:, 0], 5), np.append(LEMON[:, 1], 0)
    lower, upper = np.append(LEMON[:, 2], value), np.append(LEMON[:, 3], value)
    if 7 <= value <= 13:
        flow = feasible_circulation(6, tails, heads, lower, upper)
        assert flow[-1] == value
        assert np.all((lower <= flow) & (flow <= upper))
        balance = np.zeros(6, np.int64)
        np.add.at(balance, tails, flow)
        np.subtract.at(balance, heads, flow)
        assert not balance.any()
    else:
        with pytest.raises(InfeasibleError) as caught:
            feasible_circulation(6, tails, heads, lower, upper)
        error = caught.value
        deficit = check_violated_cut(6, tails, heads, upper, error.source_side, error.deficit,
                                     lower=lower)
        assert deficit == (7 - value if value < 7 else value - 13)


def test_lemon_max_and_min_flow_with_lower_bounds() -> None:
    # LEMON graph library, `test/circulation_test.cc`: feasible iff 7 <= F <= 13, so the maximum
    # flow meeting the lower bounds is 13 and the smallest is 7
    tails, heads, lower, upper = LEMON.T
    assert certified_max_flow(6, tails, heads, upper, 0, 5, lower=lower) == 13
    cost = certified_min_cost(
        6, np.append(tails, 5), np.append(heads, 0), np.append(upper, 100),
        np.append(np.zeros(7, np.int64), 1), lower=np.append(lower, 0),
    )
    assert cost == 7
    with pytest.raises(InfeasibleError):
        min_cost_flow(6, tails, heads, upper, np.zeros(7, np.int64), lower=lower,
                      supplies=[6, 0, 0, 0, 0, -6])
