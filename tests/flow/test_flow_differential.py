"""Seeded and property-based comparisons with scipy, networkx, OR-Tools and HiGHS.

Every engine result also passes the certificate checks (bounds, conservation, cut capacity equal
to the value, reduced costs), so agreement is on certified optima, not on remembered answers.
Random graphs include parallel edges, self-loops and zero-capacity edges: self-loops are allowed,
carry no flow in a maximum flow and are saturated in a min-cost flow only when their cost is
negative, as in the reference solvers.
"""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import (
    certified_max_flow,
    certified_min_cost,
    highs_cost,
    networkx_value,
    ortools_cost,
    scipy_value,
)
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linprog
from scipy.sparse import coo_matrix

from review_alloc.flow import (
    InfeasibleError,
    check_violated_cut,
    feasible_circulation,
    max_flow,
    min_cost_flow,
)


def random_graph(
    rng: np.random.Generator, n: int, m: int, max_cap: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Random multigraph: about a fifth of the edges repeat an earlier pair, some are loops."""
    tails = rng.integers(0, n, m)
    heads = rng.integers(0, n, m)
    repeat = rng.integers(0, m, m // 5)
    tails, heads = np.append(tails, tails[repeat]), np.append(heads, heads[repeat])
    capacities = rng.integers(0, max_cap + 1, len(tails))
    capacities[rng.random(len(tails)) < 0.1] = 0
    return tails.astype(np.int64), heads.astype(np.int64), capacities.astype(np.int64)


def reviewer_graph(
    rng: np.random.Generator, n_reviewers: int, n_papers: int, density: float
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, int, int]:
    """Source -> reviewer (load cap) -> paper (unit, eligible pairs) -> sink (reviews)."""
    source, sink = 0, 1 + n_reviewers + n_papers
    pairs = np.argwhere(rng.random((n_reviewers, n_papers)) < density)
    tails = np.concatenate([np.zeros(n_reviewers), 1 + pairs[:, 0], 1 + n_reviewers +
                            np.arange(n_papers)])
    heads = np.concatenate([1 + np.arange(n_reviewers), 1 + n_reviewers + pairs[:, 1],
                            np.full(n_papers, sink)])
    capacities = np.concatenate([rng.integers(1, 7, n_reviewers), np.ones(len(pairs)),
                                 np.full(n_papers, 3)])
    return (sink + 1, tails.astype(np.int64), heads.astype(np.int64),
            capacities.astype(np.int64), source, sink)


@pytest.mark.parametrize("seed", range(40))
def test_max_flow_matches_scipy_and_networkx(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 40))
    tails, heads, capacities = random_graph(rng, n, int(rng.integers(0, 6 * n)), 25)
    s, t = (int(v) for v in rng.choice(n, 2, replace=False))
    value = certified_max_flow(n, tails, heads, capacities, s, t)
    # scipy.sparse.csgraph.maximum_flow, both of its methods; networkx.maximum_flow_value
    assert value == scipy_value(n, tails, heads, capacities, s, t, "dinic")
    assert value == scipy_value(n, tails, heads, capacities, s, t, "edmonds_karp")
    assert value == networkx_value(n, tails, heads, capacities, s, t)


@pytest.mark.parametrize("seed", range(5))
def test_larger_max_flow_matches_scipy(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    n = 800
    tails, heads, capacities = random_graph(rng, n, 8000, 1000)
    value = certified_max_flow(n, tails, heads, capacities, 0, n - 1)
    # scipy.sparse.csgraph.maximum_flow (Dinic)
    assert value == scipy_value(n, tails, heads, capacities, 0, n - 1, "dinic")


@pytest.mark.parametrize("seed", range(8))
def test_reviewer_like_bipartite_matches_scipy(seed: int) -> None:
    rng = np.random.default_rng(200 + seed)
    n, tails, heads, capacities, s, t = reviewer_graph(rng, 40, 90, 0.15)
    result = max_flow(n, tails, heads, capacities, s, t)
    assert result.value == certified_max_flow(n, tails, heads, capacities, s, t)
    # scipy.sparse.csgraph.maximum_flow (Edmonds-Karp) as the independent reference
    assert result.value == scipy_value(n, tails, heads, capacities, s, t, "edmonds_karp")


@st.composite
def small_networks(draw: st.DrawFn) -> tuple[int, np.ndarray, np.ndarray, np.ndarray]:
    n = draw(st.integers(2, 7))
    edges = draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1),
                                    st.integers(0, 9)), max_size=20))
    if not edges:
        return n, np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, np.int64)
    arr = np.array(edges, dtype=np.int64)
    return n, arr[:, 0], arr[:, 1], arr[:, 2]


@settings(max_examples=150, deadline=None)
@given(small_networks())
def test_max_flow_property_against_networkx(network: tuple) -> None:
    n, tails, heads, capacities = network
    value = certified_max_flow(n, tails, heads, capacities, 0, n - 1)
    assert value == networkx_value(n, tails, heads, capacities, 0, n - 1)  # networkx


def highs_max_flow_with_lower(
    n: int, tails: np.ndarray, heads: np.ndarray, lower: np.ndarray, upper: np.ndarray,
    s: int, t: int,
) -> int | None:
    """Maximum s-t flow value meeting lower bounds by HiGHS (scipy.optimize.linprog)."""
    m = len(tails)
    incidence = coo_matrix(
        (np.concatenate([np.ones(m), -np.ones(m)]),
         (np.concatenate([tails, heads]), np.concatenate([np.arange(m), np.arange(m)]))),
        shape=(n, m),
    ).toarray()
    inner = [v for v in range(n) if v not in (s, t)]
    result = linprog(-incidence[s], A_eq=incidence[inner], b_eq=np.zeros(len(inner)),
                     bounds=np.column_stack([lower, upper]), method="highs")
    if result.status == 2:
        return None
    assert result.status == 0, result.message
    return int(round(-result.fun))


@pytest.mark.parametrize("seed", range(30))
def test_max_flow_with_lower_bounds_matches_highs(seed: int) -> None:
    rng = np.random.default_rng(300 + seed)
    n = int(rng.integers(3, 12))
    tails, heads, upper = random_graph(rng, n, int(rng.integers(3, 4 * n)), 12)
    lower = np.where(rng.random(len(upper)) < 0.3, rng.integers(0, 5, len(upper)), 0)
    lower = np.minimum(lower, upper)
    expected = highs_max_flow_with_lower(n, tails, heads, lower, upper, 0, n - 1)  # HiGHS LP
    if expected is None:
        with pytest.raises(InfeasibleError) as caught:
            max_flow(n, tails, heads, upper, 0, n - 1, lower=lower)
        # Unbounded return edges between sink and source make the cut a Hoffman cut of the
        # given edges that holds both terminals or neither.
        side = caught.value.source_side
        assert side[0] == side[n - 1]
        check_violated_cut(n, tails, heads, upper, side, caught.value.deficit, lower=lower)
    else:
        assert certified_max_flow(n, tails, heads, upper, 0, n - 1, lower=lower) == expected


@pytest.mark.parametrize("seed", range(30))
def test_feasible_circulation_matches_highs(seed: int) -> None:
    rng = np.random.default_rng(400 + seed)
    n = int(rng.integers(2, 10))
    tails, heads, upper = random_graph(rng, n, int(rng.integers(1, 4 * n)), 10)
    lower = np.minimum(rng.integers(0, 6, len(upper)), upper)
    zero = np.zeros(len(tails), np.int64)
    feasible = highs_cost(n, tails, heads, upper, zero, lower=lower) is not None  # HiGHS LP
    if feasible:
        flow = feasible_circulation(n, tails, heads, lower, upper)
        assert np.all((lower <= flow) & (flow <= upper))
        balance = np.zeros(n, np.int64)
        np.add.at(balance, tails, flow)
        np.subtract.at(balance, heads, flow)
        assert not balance.any()
    else:
        with pytest.raises(InfeasibleError) as caught:
            feasible_circulation(n, tails, heads, lower, upper)
        error = caught.value
        assert error.deficit > 0
        check_violated_cut(n, tails, heads, upper, error.source_side, error.deficit, lower=lower)


def random_cost_instance(
    rng: np.random.Generator, feasible: bool
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    n = int(rng.integers(2, 16))
    tails, heads, upper = random_graph(rng, n, int(rng.integers(1, 5 * n)), 15)
    costs = rng.integers(-10, 21, len(tails))
    lower = np.where(rng.random(len(tails)) < 0.2, rng.integers(0, 4, len(tails)), 0)
    lower = np.minimum(lower, upper)
    if feasible:
        # Supplies of a random flow within the bounds can always be met.
        flow = rng.integers(lower, upper + 1)
        supplies = np.zeros(n, np.int64)
        np.add.at(supplies, tails, flow)
        np.subtract.at(supplies, heads, flow)
    else:
        supplies = rng.integers(-10, 11, n)
        supplies[-1] -= supplies.sum()
    return n, tails, heads, upper, costs.astype(np.int64), supplies, lower.astype(np.int64)


@pytest.mark.parametrize("seed", range(60))
def test_min_cost_matches_ortools_and_highs(seed: int) -> None:
    rng = np.random.default_rng(500 + seed)
    n, tails, heads, upper, costs, supplies, lower = random_cost_instance(rng, seed % 3 != 0)
    expected = ortools_cost(n, tails, heads, upper, costs, supplies, lower)  # OR-Tools
    assert expected == highs_cost(n, tails, heads, upper, costs, supplies, lower)  # HiGHS LP
    if expected is None:
        with pytest.raises(InfeasibleError) as caught:
            min_cost_flow(n, tails, heads, upper, costs, supplies=supplies, lower=lower)
        error = caught.value
        check_violated_cut(n, tails, heads, upper, error.source_side, error.deficit,
                           supplies=supplies, lower=lower)
    else:
        assert certified_min_cost(n, tails, heads, upper, costs, supplies, lower) == expected


@pytest.mark.parametrize("seed", range(25))
def test_circulation_with_negative_cycles_matches_ortools(seed: int) -> None:
    rng = np.random.default_rng(600 + seed)
    n = int(rng.integers(2, 30))
    tails, heads, upper = random_graph(rng, n, int(rng.integers(1, 6 * n)), 20)
    costs = rng.integers(-25, 15, len(tails)).astype(np.int64)
    cost = certified_min_cost(n, tails, heads, upper, costs)
    assert cost == ortools_cost(n, tails, heads, upper, costs)  # OR-Tools SimpleMinCostFlow
    assert cost == highs_cost(n, tails, heads, upper, costs)  # HiGHS LP
    assert cost <= 0  # the zero circulation is always available


@pytest.mark.parametrize("seed", range(10))
def test_reviewer_like_circulation_matches_ortools(seed: int) -> None:
    # Floors as lower bounds, rewarded coverage (negative paper -> sink costs), pair costs from
    # scores and a return edge: the planner's shape, with negative cycles through the return.
    rng = np.random.default_rng(700 + seed)
    n_r, n_p = 25, 60
    n, tails, heads, upper, s, t = reviewer_graph(rng, n_r, n_p, 0.2)
    n_pairs = len(tails) - n_r - n_p
    lower = np.zeros(len(tails), np.int64)
    lower[:n_r] = np.minimum(1, upper[:n_r])
    lower[n_r: n_r + n_pairs] = rng.random(n_pairs) < 0.02  # a few pinned pairs
    costs = np.concatenate([np.zeros(n_r), rng.integers(0, 1000, n_pairs),
                            np.full(n_p, -5000)]).astype(np.int64)
    tails, heads = np.append(tails, t), np.append(heads, s)
    upper, lower = np.append(upper, 3 * n_p), np.append(lower, 0)
    costs = np.append(costs, 0)
    expected = ortools_cost(n, tails, heads, upper, costs, None, lower)  # OR-Tools
    if expected is None:
        with pytest.raises(InfeasibleError):
            min_cost_flow(n, tails, heads, upper, costs, lower=lower)
    else:
        assert certified_min_cost(n, tails, heads, upper, costs, None, lower) == expected


@st.composite
def small_cost_networks(draw: st.DrawFn) -> tuple:
    n = draw(st.integers(1, 6))
    edges = draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1),
                                    st.integers(0, 6), st.integers(-8, 8), st.integers(0, 3)),
                          min_size=1, max_size=15))
    arr = np.array(edges, dtype=np.int64)
    lower = np.minimum(arr[:, 4], arr[:, 2])
    supplies = np.array(draw(st.lists(st.integers(-4, 4), min_size=n, max_size=n)), np.int64)
    supplies[-1] -= supplies.sum()
    return n, arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], supplies, lower


@settings(max_examples=150, deadline=None)
@given(small_cost_networks())
def test_min_cost_property_against_highs(instance: tuple) -> None:
    n, tails, heads, upper, costs, supplies, lower = instance
    expected = highs_cost(n, tails, heads, upper, costs, supplies, lower)  # HiGHS LP
    if expected is None:
        with pytest.raises(InfeasibleError) as caught:
            min_cost_flow(n, tails, heads, upper, costs, supplies=supplies, lower=lower)
        check_violated_cut(n, tails, heads, upper, caught.value.source_side,
                           caught.value.deficit, supplies=supplies, lower=lower)
    else:
        assert certified_min_cost(n, tails, heads, upper, costs, supplies, lower) == expected


@pytest.mark.parametrize("seed", range(4))
def test_medium_min_cost_matches_ortools(seed: int) -> None:
    # Enough nodes and distinct path lengths for many Dijkstra rounds and blocking phases.
    rng = np.random.default_rng(800 + seed)
    n = 300
    tails, heads, upper = random_graph(rng, n, 3000, 50)
    costs = rng.integers(-30, 100, len(tails)).astype(np.int64)
    flow = rng.integers(0, upper + 1)
    supplies = np.zeros(n, np.int64)
    np.add.at(supplies, tails, flow)
    np.subtract.at(supplies, heads, flow)
    cost = certified_min_cost(n, tails, heads, upper, costs, supplies)
    assert cost == ortools_cost(n, tails, heads, upper, costs, supplies)  # OR-Tools


def planner_like(
    n_reviewers: int, n_papers: int, seed: int
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Complete bipartite reviewer-paper network with floors, tiered coverage and a return edge."""
    rng = np.random.default_rng(seed)
    r_nodes = 1 + np.arange(n_reviewers)
    p_nodes = 1 + n_reviewers + np.arange(n_papers)
    sink = 1 + n_reviewers + n_papers
    reviewer = np.repeat(r_nodes, n_papers)
    paper = np.tile(p_nodes, n_reviewers)
    score = rng.integers(0, 10_001, len(reviewer))
    cap = int(np.ceil(3 * n_papers / n_reviewers)) + 1
    tails = np.concatenate([np.zeros(n_reviewers), reviewer, p_nodes, p_nodes, [sink]])
    heads = np.concatenate([r_nodes, paper, np.full(2 * n_papers, sink), [0]])
    upper = np.concatenate(
        [np.full(n_reviewers, cap), np.ones(len(reviewer)), np.full(n_papers, 2),
         np.ones(n_papers), [3 * n_papers]]
    )
    lower = np.zeros(len(tails))
    lower[:n_reviewers] = 1  # a floor of one paper per reviewer
    big = 10_001 * 2 * n_reviewers
    costs = np.concatenate(
        [np.zeros(n_reviewers), 10_000 - score, np.full(n_papers, -4 * big),
         np.full(n_papers, -big), [0]]
    )
    return (sink + 1, tails.astype(np.int64), heads.astype(np.int64), upper.astype(np.int64),
            costs.astype(np.int64), lower.astype(np.int64))


def test_planner_like_circulation_matches_ortools() -> None:
    n, tails, heads, upper, costs, lower = planner_like(30, 90, 5)
    cost = certified_min_cost(n, tails, heads, upper, costs, None, lower)
    assert cost == ortools_cost(n, tails, heads, upper, costs, None, lower)  # OR-Tools


@pytest.mark.large
def test_large_planner_like_circulation_matches_ortools() -> None:
    n, tails, heads, upper, costs, lower = planner_like(600, 1800, 6)
    cost = certified_min_cost(n, tails, heads, upper, costs, None, lower)
    assert cost == ortools_cost(n, tails, heads, upper, costs, None, lower)  # OR-Tools
