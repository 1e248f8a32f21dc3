"""Bad input is refused at the front door, in a fixed order, with a message giving the range."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.flow import (
    FlowInputError,
    feasible_circulation,
    max_flow,
    min_cost_flow,
)

T = np.array([0, 1, 2, 0])
H = np.array([1, 2, 5, 5])
C = np.array([3, 2, 4, 1])


def test_input_error_is_a_value_error() -> None:
    assert issubclass(FlowInputError, ValueError)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"source": 7}, r"^source 7 must be between 0 and 5$"),
        ({"sink": -1}, r"^sink -1 must be between 0 and 5$"),
        ({"source": 2, "sink": 2}, r"^source and sink must differ \(both 2\)$"),
        ({"source": 1.0}, r"^source 1\.0 must be between 0 and 5$"),
        ({"source": True}, r"^source True must be between 0 and 5$"),
        ({"n": 1, "source": 0, "sink": 0}, r"^n is 1; n must be an integer >= 2$"),
        ({"n": 6.0}, r"^n is 6\.0; n must be an integer >= 2$"),
        ({"capacities": np.array([3, 2, -2, 1])},
         r"^capacities\[2\] is -2; capacities must be >= 0$"),
        ({"capacities": np.array([3.0, 2.0, 4.0, 1.0])},
         r"^capacities must hold integers, not float64; scale the values to integers first$"),
        ({"capacities": np.array([True, False, True, True])},
         r"^capacities must hold integers; got dtype bool$"),
        ({"capacities": np.array(["3", "2", "4", "1"])},
         r"^capacities must hold integers; got dtype <U1$"),
        ({"capacities": np.array([3, 2, 4, 2**63], dtype=np.uint64)},
         r"^capacities\[3\] is 9223372036854775808; values must fit in int64$"),
        ({"capacities": np.array([2**61, 2**61, 1, 1])},
         r"^capacities add up to about 4\.612e\+18; the total must stay below 2\*\*62"),
        ({"heads": np.array([1, 2, 5])},
         r"^heads has 3 entries but tails has 4; every edge array needs one entry per edge$"),
        ({"capacities": np.array([1, 2])},
         r"^capacities has 2 entries but tails has 4; every edge array needs one entry per"),
        ({"lower": np.array([0, 0])},
         r"^lower has 2 entries but tails has 4; every edge array needs one entry per edge$"),
        ({"tails": np.array([0, 9, 2, 0])},
         r"^tails\[1\] is 9; node ids must be between 0 and 5$"),
        ({"heads": np.array([1, 2, -3, 5])},
         r"^heads\[2\] is -3; node ids must be between 0 and 5$"),
        ({"tails": np.array([[0, 1], [2, 0]])}, r"^tails must be a 1-D array; got shape \(2, 2\)$"),
        ({"lower": np.array([0, 3, 0, 0])},
         r"^lower\[1\] is 3 but capacities\[1\] is 2; lower must be <= capacities$"),
        ({"lower": np.array([0, -1, 0, 0])}, r"^lower\[1\] is -1; lower must be >= 0$"),
        ({"method": "push_relabel"},
         r"^method 'push_relabel' is not available; choose one of 'dinic'$"),
    ],
)
def test_max_flow_refuses(kwargs: dict, message: str) -> None:
    args = {"n": 6, "tails": T, "heads": H, "capacities": C, "source": 0, "sink": 5}
    args.update(kwargs)
    extra = {k: args.pop(k) for k in ("lower", "method") if k in args}
    with pytest.raises(FlowInputError, match=message):
        max_flow(**args, **extra)


def test_checks_run_in_the_documented_order() -> None:
    # The method first, then n, the source, the arrays' types, their lengths, the node ids.
    with pytest.raises(FlowInputError, match="^method"):
        max_flow(1, T, H, C.astype(float), 9, 9, method="other")
    with pytest.raises(FlowInputError, match="^n is 1"):
        max_flow(1, T, H, C.astype(float), 9, 9)
    with pytest.raises(FlowInputError, match="^source 9"):
        max_flow(6, T, H[:2], C.astype(float), 9, 9)
    with pytest.raises(FlowInputError, match="^capacities must hold integers"):
        max_flow(6, T, H[:2], C.astype(float), 0, 5)
    with pytest.raises(FlowInputError, match="^heads has 2 entries"):
        max_flow(6, T + 10, H[:2], -C, 0, 5)
    with pytest.raises(FlowInputError, match=r"^tails\[0\] is 10"):
        max_flow(6, T + 10, H, -C, 0, 5)


def test_lists_and_empty_edge_sets_are_accepted() -> None:
    assert max_flow(6, [0, 1, 2, 0], [1, 2, 5, 5], [3, 2, 4, 1], 0, 5).value == 3
    empty = max_flow(2, [], [], [], 0, 1)
    assert empty.value == 0 and empty.flow.shape == (0,)
    assert list(empty.source_side) == [True, False]


def test_feasible_circulation_names_upper() -> None:
    with pytest.raises(FlowInputError, match=r"^upper\[0\] is -1; upper must be >= 0$"):
        feasible_circulation(3, [0, 1], [1, 0], [0, 0], [-1, 2])
    with pytest.raises(FlowInputError, match=r"^lower\[1\] is 4 but upper\[1\] is 2; lower must"):
        feasible_circulation(3, [0, 1], [1, 0], [0, 4], [1, 2])
    with pytest.raises(FlowInputError, match=r"^n is 0; n must be an integer >= 1$"):
        feasible_circulation(0, [], [], [], [])


def test_min_cost_flow_refuses() -> None:
    t, h, c, k = [0, 1], [1, 2], [4, 4], [1, 2]
    with pytest.raises(FlowInputError, match=r"^supplies sum to 1; they must sum to 0"):
        min_cost_flow(3, t, h, c, k, supplies=[2, 0, -1])
    with pytest.raises(FlowInputError, match=r"^supplies has 2 entries but n is 3; supplies needs"):
        min_cost_flow(3, t, h, c, k, supplies=[2, -2])
    with pytest.raises(FlowInputError, match=r"^supplies must hold integers, not float64"):
        min_cost_flow(3, t, h, c, k, supplies=[2.0, 0.0, -2.0])
    with pytest.raises(FlowInputError, match=r"^costs must hold integers, not float64"):
        min_cost_flow(3, t, h, c, [1.5, 2.0])
    with pytest.raises(FlowInputError, match=r"^costs has 1 entries but tails has 2"):
        min_cost_flow(3, t, h, c, [1])
    limit = 2**62 // (4 * 3 + 8)
    with pytest.raises(
        FlowInputError,
        match=rf"^costs\[1\] is {-limit - 1}; on a network of 3 nodes costs must be between "
        rf"{-limit} and {limit}$",
    ):
        min_cost_flow(3, t, h, c, [1, -limit - 1])
    # At the limit itself the solve is exact: the cycle 0 -> 1 -> 2 -> 0 runs full.
    result = min_cost_flow(3, t + [2], h + [0], c + [4], [1, -limit, 0])
    assert result.cost == 4 * (1 - limit)


def test_rejected_input_leaves_caller_arrays_alone() -> None:
    capacities = np.array([3, 2, 4, 1])
    before = capacities.copy()
    result = max_flow(6, T, H, capacities, 0, 5)
    assert np.array_equal(capacities, before)
    with pytest.raises(ValueError, match="read-only"):
        result.flow[0] = 1
