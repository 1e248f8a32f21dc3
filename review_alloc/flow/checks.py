"""Certificate checks for flows, cuts and optimality, written once and independent of the solvers.

They use nothing but numpy on the input arrays, so a wrong solver cannot vouch for itself. Each
returns the certified number (flow value, cut capacity, total cost or deficit) and raises
`FlowCheckError` naming the first offending edge or node.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from review_alloc.flow.results import FlowCheckError
from review_alloc.flow.sums import exact_dot


def _int_array(name: str, values: Any, length: int) -> np.ndarray:
    array = np.asarray(values)
    if array.ndim != 1 or len(array) != length:
        raise FlowCheckError(f"{name} must be a 1-D array of {length} entries; got {array.shape}")
    if array.size and array.dtype.kind not in "iu":
        raise FlowCheckError(f"{name} must hold integers; got dtype {array.dtype}")
    return array.astype(np.int64, copy=False)


def _edges(
    n: int, tails: Any, heads: Any, capacities: Any, flow: Any, lower: Any
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    t = np.asarray(tails)
    m = len(t)
    t = _int_array("tails", t, m)
    h = _int_array("heads", heads, m)
    for name, ids in (("tails", t), ("heads", h)):
        bad = (ids < 0) | (ids >= n)
        if bad.any():
            i = int(np.argmax(bad))
            raise FlowCheckError(f"{name}[{i}] is {ids[i]}; node ids must be between 0 and {n - 1}")
    upper = _int_array("capacities", capacities, m)
    low = np.zeros(m, np.int64) if lower is None else _int_array("lower", lower, m)
    x = _int_array("flow", flow, m) if flow is not None else np.zeros(m, np.int64)
    return t, h, upper, low, x


def _check_bounds(x: np.ndarray, low: np.ndarray, upper: np.ndarray) -> None:
    below = x < low
    if below.any():
        i = int(np.argmax(below))
        raise FlowCheckError(f"flow[{i}] is {x[i]} but lower[{i}] is {low[i]}")
    above = x > upper
    if above.any():
        i = int(np.argmax(above))
        raise FlowCheckError(f"flow[{i}] is {x[i]} but capacities[{i}] is {upper[i]}")


def _balance(n: int, t: np.ndarray, h: np.ndarray, x: np.ndarray) -> np.ndarray:
    out_minus_in = np.zeros(n, np.int64)
    np.add.at(out_minus_in, t, x)
    np.subtract.at(out_minus_in, h, x)
    return out_minus_in


def _side(n: int, source_side: Any) -> np.ndarray:
    side = np.asarray(source_side)
    if side.shape != (n,) or side.dtype != np.bool_:
        raise FlowCheckError(f"source_side must be a boolean array of {n} entries")
    return side


def check_flow(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    flow: Any,
    source: int,
    sink: int,
    *,
    lower: Any = None,
) -> int:
    """Check bounds and conservation of a source-sink flow; return its value."""
    t, h, upper, low, x = _edges(n, tails, heads, capacities, flow, lower)
    _check_bounds(x, low, upper)
    balance = _balance(n, t, h, x)
    inner = np.ones(n, dtype=bool)
    inner[[source, sink]] = False
    leaking = inner & (balance != 0)
    if leaking.any():
        v = int(np.argmax(leaking))
        raise FlowCheckError(f"node {v}: out - in is {balance[v]}, but flow must be conserved")
    value = int(balance[source])
    if int(balance[sink]) != -value:
        raise FlowCheckError(
            f"the source sends {value} but the sink receives {-int(balance[sink])}"
        )
    return value


def check_cut(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    source_side: Any,
    value: int,
    source: int,
    sink: int,
    *,
    lower: Any = None,
) -> int:
    """Check that source_side separates source from sink with capacity equal to value.

    The capacity of a cut S is `sum(capacities on edges leaving S) - sum(lower on edges entering
    S)`; a flow whose value equals it is maximum and the cut is minimum. Returns the capacity.
    """
    t, h, upper, low, _ = _edges(n, tails, heads, capacities, None, lower)
    side = _side(n, source_side)
    if not side[source]:
        raise FlowCheckError(f"the source {source} is not on the source side of the cut")
    if side[sink]:
        raise FlowCheckError(f"the sink {sink} is on the source side of the cut")
    leaving = side[t] & ~side[h]
    entering = ~side[t] & side[h]
    capacity = int(upper[leaving].sum()) - int(low[entering].sum())
    if capacity != int(value):
        raise FlowCheckError(f"the cut has capacity {capacity} but the flow value is {value}")
    return capacity


def check_cost_certificate(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    costs: Any,
    flow: Any,
    potentials: Any,
    *,
    supplies: Any = None,
    lower: Any = None,
) -> int:
    """Check a min-cost flow: bounds, `out - in = supplies`, and reduced-cost optimality.

    With `rc = costs + potentials[tail] - potentials[head]`, optimality needs `rc >= 0` on edges
    with `flow < capacity` and `rc <= 0` on edges with `flow > lower`. Returns the total cost.
    """
    t, h, upper, low, x = _edges(n, tails, heads, capacities, flow, lower)
    c = _int_array("costs", costs, len(t))
    pot = _int_array("potentials", potentials, n)
    need = np.zeros(n, np.int64) if supplies is None else _int_array("supplies", supplies, n)
    _check_bounds(x, low, upper)
    balance = _balance(n, t, h, x)
    wrong = balance != need
    if wrong.any():
        v = int(np.argmax(wrong))
        raise FlowCheckError(f"node {v}: out - in is {balance[v]} but its supply is {need[v]}")
    reduced = c + pot[t] - pot[h]
    can_rise = (x < upper) & (reduced < 0)
    if can_rise.any():
        e = int(np.argmax(can_rise))
        raise FlowCheckError(
            f"edge {e} ({t[e]} -> {h[e]}) has flow {x[e]} below capacity {upper[e]} "
            f"but reduced cost {reduced[e]} < 0: more flow there would cost less"
        )
    can_fall = (x > low) & (reduced > 0)
    if can_fall.any():
        e = int(np.argmax(can_fall))
        raise FlowCheckError(
            f"edge {e} ({t[e]} -> {h[e]}) has flow {x[e]} above lower bound {low[e]} "
            f"but reduced cost {reduced[e]} > 0: less flow there would cost less"
        )
    return exact_dot(x, c)


def check_violated_cut(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    source_side: Any,
    deficit: int,
    *,
    supplies: Any = None,
    lower: Any = None,
) -> int:
    """Check an infeasibility certificate (Hoffman's and Gale's theorems); return the deficit.

    For S = source_side, `sum(supplies[S]) + sum(lower on edges entering S) - sum(capacities on
    edges leaving S)` must be > 0 (no flow can leave S fast enough) and equal `deficit`.
    """
    t, h, upper, low, _ = _edges(n, tails, heads, capacities, None, lower)
    side = _side(n, source_side)
    need = np.zeros(n, np.int64) if supplies is None else _int_array("supplies", supplies, n)
    leaving = side[t] & ~side[h]
    entering = ~side[t] & side[h]
    shortfall = int(need[side].sum()) + int(low[entering].sum()) - int(upper[leaving].sum())
    if shortfall <= 0:
        raise FlowCheckError(
            f"the cut is not violated: its edges can carry out {-shortfall} more than required"
        )
    if shortfall != int(deficit):
        raise FlowCheckError(
            f"the cut is short by {shortfall} but the deficit reported is {deficit}"
        )
    return shortfall
