"""The residual network's arc order against a plain numpy construction of the same order.

Every kernel (and the warm-start benchmarks' reproducibility) depends on the exact arc order:
the arcs leaving a node are its forward arcs in edge order, then its reverse arcs in edge order.
"""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.flow.residual import build_residual


def _reference(
    n: int, tails: np.ndarray, heads: np.ndarray, upper: np.ndarray, lower: np.ndarray,
    flow: np.ndarray, costs: np.ndarray,
) -> dict[str, np.ndarray]:
    """The same arrays built with numpy's stable lexsort (tail, forward first, edge index)."""
    m = len(tails)
    edge = np.concatenate([np.arange(m), np.arange(m)])
    backward = np.concatenate([np.zeros(m, np.int64), np.ones(m, np.int64)])
    tail = np.concatenate([tails, heads])
    order = np.lexsort((edge, backward, tail))
    position = np.empty(2 * m, dtype=np.int64)
    position[order] = np.arange(2 * m)
    arc_of_edge = position[:m]
    rev = np.empty(2 * m, dtype=np.int64)
    rev[position[:m]] = position[m:]
    rev[position[m:]] = position[:m]
    return {
        "start": np.concatenate([[0], np.cumsum(np.bincount(tail, minlength=n))]),
        "head": np.concatenate([heads, tails])[order],
        "cap": np.concatenate([upper - flow, flow - lower])[order],
        "rev": rev,
        "arc_of_edge": arc_of_edge,
        "cost": np.concatenate([costs, -costs])[order],
    }


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("costed", [True, False])
def test_arc_order_matches_a_numpy_lexsort(seed: int, costed: bool) -> None:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 30))
    m = int(rng.integers(0, 120))
    tails, heads = rng.integers(0, n, m), rng.integers(0, n, m)
    lower = rng.integers(0, 3, m)
    upper = lower + rng.integers(0, 5, m)
    flow = lower + (rng.random(m) * (upper - lower + 1)).astype(np.int64).clip(0, upper - lower)
    costs = rng.integers(-9, 10, m)
    net = build_residual(n, tails, heads, upper, lower, flow, costs if costed else None)
    # Reference: numpy.lexsort (stable) over (tail, reverse-after-forward, edge index).
    want = _reference(n, tails, heads, upper, lower, flow, costs)
    for name in ("start", "head", "cap", "rev", "arc_of_edge"):
        assert np.array_equal(getattr(net, name), want[name]), name
    if costed:
        assert np.array_equal(net.cost, want["cost"])
    else:
        assert net.cost.size == 0
