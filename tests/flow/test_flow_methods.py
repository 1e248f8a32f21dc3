"""Every min-cost method, cold and warm-started, against OR-Tools, HiGHS and published values.

Each result also passes the reduced-cost certificate, so agreement is on certified optima.
"""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import highs_cost, labelled, ortools_cost
from test_flow_differential import planner_like, random_graph

from review_alloc.flow import (
    COST_METHODS,
    FlowInputError,
    InfeasibleError,
    WarmStart,
    check_cost_certificate,
    check_violated_cut,
    min_cost_flow,
)
from review_alloc.flow.validate import cost_limit

# Bradley, Hax & Magnanti, *Applied Mathematical Programming* (1977), Fig. 8.1
# (also the OR-Tools min-cost-flow guide): optimal cost 150.
BHM = [(0, 1, 15, 4), (0, 2, 8, 4), (1, 2, 20, 2), (1, 3, 4, 2), (1, 4, 10, 6), (2, 3, 15, 1),
       (2, 4, 4, 3), (3, 4, 20, 2), (4, 2, 5, 3)]
BHM_SUPPLIES = [20, 0, 0, -5, -15]
# networkx `min_cost_flow` docstring: demands a = -5, d = +5; optimal cost 24.
NETWORKX_MCF = [("a", "b", 4, 3), ("a", "c", 10, 6), ("b", "d", 9, 1), ("c", "d", 5, 2)]


def solve_certified(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    upper: np.ndarray,
    costs: np.ndarray,
    *,
    supplies: np.ndarray | None = None,
    lower: np.ndarray | None = None,
    method: str = "auto",
    warm: WarmStart | None = None,
) -> tuple[int, np.ndarray, np.ndarray]:
    """Solve, check the certificate, return (cost, flow, potentials)."""
    result = min_cost_flow(n, tails, heads, upper, costs, supplies=supplies, lower=lower,
                           method=method, warm=warm)
    checked = check_cost_certificate(n, tails, heads, upper, costs, result.flow,
                                     result.potentials, supplies=supplies, lower=lower)
    assert checked == result.cost
    return result.cost, np.array(result.flow), np.array(result.potentials)


@pytest.mark.parametrize("method", COST_METHODS)
def test_published_examples_with_every_method(method: str) -> None:
    t, h, c, k = (np.array(col, dtype=np.int64) for col in zip(*BHM, strict=True))
    supplies = np.array(BHM_SUPPLIES, dtype=np.int64)
    # Bradley, Hax & Magnanti, Fig. 8.1: 150
    assert solve_certified(5, t, h, c, k, supplies=supplies, method=method)[0] == 150
    g = labelled(NETWORKX_MCF)
    demand = g.vector({"a": 5, "d": -5})
    # networkx `min_cost_flow` docstring: 24
    assert solve_certified(g.n, g.tails, g.heads, g.capacities, g.costs, supplies=demand,
                           method=method)[0] == 24


@pytest.mark.parametrize("seed", range(25))
def test_cost_scaling_and_primal_dual_match_ortools(seed: int) -> None:
    rng = np.random.default_rng(1200 + seed)
    n = int(rng.integers(2, 60))
    tails, heads, upper = random_graph(rng, n, int(rng.integers(1, 8 * n)), 30)
    costs = rng.integers(-50, 200, len(tails)).astype(np.int64)
    lower = np.minimum(upper, rng.integers(0, 3, len(tails)) * (rng.random(len(tails)) < 0.2))
    flow = rng.integers(lower, upper + 1)
    supplies = np.zeros(n, np.int64)
    np.add.at(supplies, tails, flow)
    np.subtract.at(supplies, heads, flow)
    expected = ortools_cost(n, tails, heads, upper, costs, supplies, lower)  # OR-Tools
    for method in ("cost-scaling", "primal-dual"):
        got = solve_certified(n, tails, heads, upper, costs, supplies=supplies, lower=lower,
                              method=method)[0]
        assert got == expected, method


@pytest.mark.parametrize("seed", range(6))
def test_infeasible_supplies_give_a_cut_with_cost_scaling(seed: int) -> None:
    rng = np.random.default_rng(1300 + seed)
    n = 20
    tails, heads, upper = random_graph(rng, n, 40, 5)
    costs = rng.integers(-10, 10, len(tails)).astype(np.int64)
    supplies = rng.integers(-30, 31, n).astype(np.int64)
    supplies[-1] -= supplies.sum()
    expected = highs_cost(n, tails, heads, upper, costs, supplies)  # HiGHS LP
    if expected is not None:
        assert solve_certified(n, tails, heads, upper, costs, supplies=supplies,
                               method="cost-scaling")[0] == expected
        return
    with pytest.raises(InfeasibleError) as caught:
        min_cost_flow(n, tails, heads, upper, costs, supplies=supplies, method="cost-scaling")
    check_violated_cut(n, tails, heads, upper, caught.value.source_side, caught.value.deficit,
                       supplies=supplies)


def test_costs_at_the_limit_stay_exact() -> None:
    # Scaled prices could leave int64 here; the solver must fall back, not overflow.
    rng = np.random.default_rng(1400)
    n = 40
    tails, heads, upper = random_graph(rng, n, 200, 9)
    limit = cost_limit(n)
    costs = rng.choice([-limit, limit, limit // 3, -(limit // 7), 0], len(tails))
    costs = costs.astype(np.int64)
    expected = ortools_cost(n, tails, heads, upper, costs)  # OR-Tools
    assert solve_certified(n, tails, heads, upper, costs)[0] == expected


def test_planner_shape_matches_ortools_with_both_methods() -> None:
    n, tails, heads, upper, costs, lower = planner_like(20, 70, 9)
    expected = ortools_cost(n, tails, heads, upper, costs, None, lower)  # OR-Tools
    for method in ("cost-scaling", "primal-dual"):
        assert solve_certified(n, tails, heads, upper, costs, lower=lower,
                               method=method)[0] == expected


def _change(rng: np.random.Generator, upper: np.ndarray, costs: np.ndarray, lower: np.ndarray,
            n_reviewers: int, n_pairs: int) -> None:
    """One small edit of a planner-shaped network, in place: the kinds a chair makes."""
    kind = rng.integers(0, 4)
    if kind == 0:  # a reviewer withdraws: no floor, no capacity
        j = rng.integers(0, n_reviewers)
        upper[j] = lower[j] = 0
    elif kind == 1:  # a cap is lowered (not below the floor)
        j = rng.integers(0, n_reviewers)
        upper[j] = max(lower[j], upper[j] - 2)
    elif kind == 2:  # a new conflict: a pair arc disappears
        e = n_reviewers + rng.integers(0, n_pairs)
        upper[e] = lower[e] = 0
    else:  # a rescored pair
        e = n_reviewers + rng.integers(0, n_pairs)
        costs[e] = rng.integers(0, 10_001)


@pytest.mark.parametrize("seed", range(8))
def test_warm_starts_match_cold_solves_over_random_changes(seed: int) -> None:
    rng = np.random.default_rng(1500 + seed)
    n_r, n_p = 15, 40
    n, tails, heads, upper, costs, lower = planner_like(n_r, n_p, 1600 + seed)
    n_pairs = n_r * n_p
    _, flow, pot = solve_certified(n, tails, heads, upper, costs, lower=lower)
    for _ in range(6):
        _change(rng, upper, costs, lower, n_r, n_pairs)
        cold = solve_certified(n, tails, heads, upper, costs, lower=lower)[0]
        warm_cost, flow, pot = solve_certified(n, tails, heads, upper, costs, lower=lower,
                                               warm=WarmStart(flow=flow, potentials=pot))
        assert warm_cost == cold
        assert cold == ortools_cost(n, tails, heads, upper, costs, None, lower)  # OR-Tools


@pytest.mark.parametrize("seed", range(10))
def test_warm_start_from_any_flow_and_potentials_is_still_optimal(seed: int) -> None:
    # Nothing about the warm start is trusted: random flows and potentials must still give
    # the optimum (with supplies and lower bounds, against OR-Tools).
    rng = np.random.default_rng(1700 + seed)
    n = 30
    tails, heads, upper = random_graph(rng, n, 150, 12)
    costs = rng.integers(-20, 60, len(tails)).astype(np.int64)
    lower = np.minimum(upper, (rng.random(len(tails)) < 0.1).astype(np.int64))
    flow = rng.integers(lower, upper + 1)
    supplies = np.zeros(n, np.int64)
    np.add.at(supplies, tails, flow)
    np.subtract.at(supplies, heads, flow)
    warm = WarmStart(flow=rng.integers(-3, 15, len(tails)),
                     potentials=rng.integers(-500, 500, n))
    expected = ortools_cost(n, tails, heads, upper, costs, supplies, lower)  # OR-Tools
    assert solve_certified(n, tails, heads, upper, costs, supplies=supplies, lower=lower,
                           warm=warm)[0] == expected


def test_warm_start_on_infeasible_supplies_reports_the_cut() -> None:
    t, h, c, k = (np.array(col, dtype=np.int64) for col in zip(*BHM, strict=True))
    supplies = np.array([30, 0, 0, -15, -15], dtype=np.int64)
    warm = WarmStart(flow=np.zeros(9, np.int64), potentials=np.zeros(5, np.int64))
    with pytest.raises(InfeasibleError) as caught:
        min_cost_flow(5, t, h, c, k, supplies=supplies, warm=warm)
    # Node 0 must send 30 but only 23 can leave it (Bradley, Hax & Magnanti's capacities).
    assert check_violated_cut(5, t, h, c, caught.value.source_side, caught.value.deficit,
                              supplies=supplies) == 7


def test_bad_warm_start_and_method_are_refused() -> None:
    t, h, c, k = (np.array(col, dtype=np.int64) for col in zip(*BHM, strict=True))
    supplies = np.array(BHM_SUPPLIES, dtype=np.int64)
    with pytest.raises(FlowInputError, match="^warm.flow has 3 entries but there are 9 edges$"):
        min_cost_flow(5, t, h, c, k, supplies=supplies,
                      warm=WarmStart(flow=np.zeros(3, np.int64),
                                     potentials=np.zeros(5, np.int64)))
    with pytest.raises(FlowInputError, match="^warm.potentials has 2 entries but n is 5$"):
        min_cost_flow(5, t, h, c, k, supplies=supplies,
                      warm=WarmStart(flow=np.zeros(9, np.int64),
                                     potentials=np.zeros(2, np.int64)))
    with pytest.raises(FlowInputError, match="must hold integers"):
        min_cost_flow(5, t, h, c, k, supplies=supplies,
                      warm=WarmStart(flow=np.zeros(9), potentials=np.zeros(5, np.int64)))
    with pytest.raises(FlowInputError, match="^method 'simplex' is not available"):
        min_cost_flow(5, t, h, c, k, supplies=supplies, method="simplex")
