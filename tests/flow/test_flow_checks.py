"""The certificate checks reject what they should, and extreme inputs stay exact."""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import certified_max_flow, certified_min_cost

from review_alloc.flow import (
    CostFlowResult,
    FlowCheckError,
    FlowResult,
    check_cost_certificate,
    check_cut,
    check_flow,
    check_violated_cut,
    max_flow,
    min_cost_flow,
)

# Bradley, Hax & Magnanti, *Applied Mathematical Programming* (1977), Fig. 8.1: 150
BHM = np.array(
    [(0, 1, 15, 4), (0, 2, 8, 4), (1, 2, 20, 2), (1, 3, 4, 2), (1, 4, 10, 6), (2, 3, 15, 1),
     (2, 4, 4, 3), (3, 4, 20, 2), (4, 2, 5, 3)]
)
BHM_SUPPLIES = np.array([20, 0, 0, -5, -15])
T, H, C, K = BHM.T


def test_check_flow_rejects_capacity_and_conservation_errors() -> None:
    result = max_flow(5, T, H, C, 0, 4)
    flow = result.flow.copy()
    assert check_flow(5, T, H, C, flow, 0, 4) == result.value
    over = flow.copy()
    over[0] = C[0] + 1
    with pytest.raises(FlowCheckError, match=r"^flow\[0\] is 16 but capacities\[0\] is 15$"):
        check_flow(5, T, H, C, over, 0, 4)
    leak = flow.copy()
    leak[3] -= 1
    with pytest.raises(FlowCheckError, match=r"^node [123]: out - in is -?1, but flow must be"):
        check_flow(5, T, H, C, leak, 0, 4)
    with pytest.raises(FlowCheckError, match=r"^flow\[2\] is 0 but lower\[2\] is 1$"):
        check_flow(5, T, H, C, np.zeros(9, np.int64), 0, 4, lower=np.eye(9, dtype=np.int64)[2])
    with pytest.raises(FlowCheckError, match=r"^flow must be a 1-D array of 9 entries"):
        check_flow(5, T, H, C, flow[:3], 0, 4)


def test_check_cut_rejects_a_cut_that_is_not_minimum() -> None:
    result = max_flow(5, T, H, C, 0, 4)
    check_cut(5, T, H, C, result.source_side, result.value, 0, 4)
    all_but_sink = np.array([True, True, True, True, False])
    with pytest.raises(FlowCheckError, match=r"^the cut has capacity 34 but the flow value is 23$"):
        check_cut(5, T, H, C, all_but_sink, result.value, 0, 4)
    with pytest.raises(FlowCheckError, match="^the sink 4 is on the source side"):
        check_cut(5, T, H, C, np.ones(5, bool), result.value, 0, 4)
    with pytest.raises(FlowCheckError, match="^the source 0 is not on the source side"):
        check_cut(5, T, H, C, np.zeros(5, bool), result.value, 0, 4)


def test_check_cost_certificate_rejects_a_costlier_flow() -> None:
    result = min_cost_flow(5, T, H, C, K, supplies=BHM_SUPPLIES, method="primal-dual")
    assert check_cost_certificate(5, T, H, C, K, result.flow, result.potentials,
                                  supplies=BHM_SUPPLIES) == 150
    with pytest.raises(FlowCheckError, match="reduced cost"):
        check_cost_certificate(5, T, H, C, K, result.flow, np.zeros(5, np.int64),
                               supplies=BHM_SUPPLIES)
    with pytest.raises(FlowCheckError, match=r"^node 0: out - in is 0 but its supply is 20$"):
        check_cost_certificate(5, T, H, C, K, np.zeros(9, np.int64), result.potentials,
                               supplies=BHM_SUPPLIES)
    # Reroute one unit 1 -> 2 -> 3 instead of 1 -> 3: still feasible, one more in cost.
    costly = result.flow.copy()
    costly[[2, 5]] += 1
    costly[3] -= 1
    assert np.all((costly >= 0) & (costly <= C)) and int(costly @ K) == 151
    with pytest.raises(FlowCheckError, match=r"^edge 3 \(1 -> 3\) has flow 3 below capacity 4 but "
                       r"reduced cost -1 < 0"):
        check_cost_certificate(5, T, H, C, K, costly, result.potentials, supplies=BHM_SUPPLIES)


def test_check_violated_cut_rejects_a_satisfied_cut() -> None:
    with pytest.raises(FlowCheckError, match="^the cut is not violated"):
        check_violated_cut(5, T, H, C, np.array([True, False, False, False, False]), 1,
                           supplies=BHM_SUPPLIES)
    # Node 0 must send 20 but only 23 can leave it: supply 30 is short by 7.
    supplies = np.array([30, 0, 0, -15, -15])
    with pytest.raises(FlowCheckError, match="^the cut is short by 7 but the deficit reported"):
        check_violated_cut(5, T, H, C, np.array([True, False, False, False, False]), 3,
                           supplies=supplies)


def test_results_are_frozen() -> None:
    result = max_flow(5, T, H, C, 0, 4)
    assert isinstance(result, FlowResult)
    with pytest.raises(AttributeError):
        result.value = 0  # type: ignore[misc]
    with pytest.raises(ValueError, match="read-only"):
        result.source_side[0] = False
    cost = min_cost_flow(5, T, H, C, K, supplies=BHM_SUPPLIES)
    assert isinstance(cost, CostFlowResult)
    with pytest.raises(ValueError, match="read-only"):
        cost.potentials[0] = 1


@pytest.mark.parametrize("seed", range(6))
def test_extreme_costs_and_capacities_stay_exact(seed: int) -> None:
    # Magnitudes near the documented limits: the certificate (exact integer arithmetic) must
    # hold, which no overflow inside the solver would survive.
    rng = np.random.default_rng(900 + seed)
    n, m = 12, 60
    tails, heads = rng.integers(0, n, m), rng.integers(0, n, m)
    limit = 2**62 // (4 * n + 8)
    costs = rng.integers(-limit, limit + 1, m)
    capacities = rng.integers(0, 2**62 // (2 * m), m)
    cost = certified_min_cost(n, tails, heads, capacities, costs)
    assert cost <= 0
    certified_max_flow(n, tails, heads, capacities, 0, n - 1)
