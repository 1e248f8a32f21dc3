"""Front-door validation of the engine's inputs, in one fixed order.

Every public solver checks, in this order: the method name; the node count `n`; `source`, then
`sink`, then that they differ; each array's shape and integer dtype in parameter order; that
every edge array has one entry per edge; node ids in `tails`, then `heads`; capacities (or
`upper`) >= 0; lower bounds within [0, capacity]; the range of costs; that the capacities' total
fits in int64; last the supplies (one per node, a total that fits, summing to zero).
The first problem found raises `FlowInputError` with a message that states the valid range.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from review_alloc.flow.results import FlowInputError

TOTAL_LIMIT = 2**62
"""Totals of capacities and supplies stay below this, so no flow or residual overflows int64."""

MAX_EDGES = 2**30 - 1
"""Arc ids are int32 in the kernels: two arcs per edge must fit."""

_INT64_MAX = np.iinfo(np.int64).max


@dataclass(frozen=True, eq=False)
class EdgeArrays:
    """Validated edge arrays, all int64 and one entry per edge."""

    n: int
    tails: np.ndarray
    heads: np.ndarray
    upper: np.ndarray
    lower: np.ndarray
    costs: np.ndarray | None


def _is_integer(value: Any) -> bool:
    return isinstance(value, int | np.integer) and not isinstance(value, bool | np.bool_)


def check_n(n: Any, minimum: int) -> int:
    """Check the node count and return it as an int."""
    if not _is_integer(n) or int(n) < minimum:
        raise FlowInputError(f"n is {n!r}; n must be an integer >= {minimum}")
    return int(n)


def check_node(name: str, value: Any, n: int) -> int:
    """Check a scalar node id such as the source or the sink."""
    if not _is_integer(value) or not 0 <= int(value) < n:
        raise FlowInputError(f"{name} {value!r} must be between 0 and {n - 1}")
    return int(value)


def as_int_array(name: str, values: Any) -> np.ndarray:
    """Turn array-like input into a 1-D int64 array, refusing floats and other non-integers."""
    array = np.asarray(values)
    if array.ndim != 1:
        raise FlowInputError(f"{name} must be a 1-D array; got shape {array.shape}")
    if array.size == 0:
        return np.zeros(0, dtype=np.int64)
    if array.dtype.kind == "f":
        raise FlowInputError(
            f"{name} must hold integers, not {array.dtype}; scale the values to integers first"
        )
    if array.dtype.kind not in "iu":
        raise FlowInputError(f"{name} must hold integers; got dtype {array.dtype}")
    if array.dtype.kind == "u" and array.max() > _INT64_MAX:
        index = int(np.argmax(array > _INT64_MAX))
        raise FlowInputError(f"{name}[{index}] is {array[index]}; values must fit in int64")
    return array.astype(np.int64, copy=False)


def check_lengths(arrays: Sequence[tuple[str, np.ndarray]]) -> int:
    """Check that every edge array has as many entries as the first; return that count."""
    first_name, first = arrays[0]
    for name, array in arrays[1:]:
        if len(array) != len(first):
            raise FlowInputError(
                f"{name} has {len(array)} entries but {first_name} has {len(first)}; "
                "every edge array needs one entry per edge"
            )
    if len(first) > MAX_EDGES:
        raise FlowInputError(f"{len(first)} edges given; at most {MAX_EDGES} are supported")
    return len(first)


def check_node_ids(name: str, array: np.ndarray, n: int) -> None:
    """Check that every node id in an edge array lies in [0, n - 1]."""
    bad = (array < 0) | (array >= n)
    if bad.any():
        index = int(np.argmax(bad))
        raise FlowInputError(
            f"{name}[{index}] is {array[index]}; node ids must be between 0 and {n - 1}"
        )


def check_nonnegative(name: str, array: np.ndarray) -> None:
    """Check that every entry is >= 0."""
    bad = array < 0
    if bad.any():
        index = int(np.argmax(bad))
        raise FlowInputError(f"{name}[{index}] is {array[index]}; {name} must be >= 0")


def check_lower(lower: np.ndarray, upper: np.ndarray, upper_name: str) -> None:
    """Check 0 <= lower <= upper edge by edge."""
    check_nonnegative("lower", lower)
    bad = lower > upper
    if bad.any():
        index = int(np.argmax(bad))
        raise FlowInputError(
            f"lower[{index}] is {lower[index]} but {upper_name}[{index}] is {upper[index]}; "
            f"lower must be <= {upper_name}"
        )


def cost_limit(n: int) -> int:
    """Largest |cost| for which potentials and reduced costs on n nodes cannot overflow int64."""
    # Potentials are path lengths over at most n + 2 nodes (super source and sink included) and
    # Dijkstra adds a reduced cost to a distance: 4n + 8 path lengths bound every sum.
    return TOTAL_LIMIT // (4 * n + 8)


def check_costs(costs: np.ndarray, n: int) -> None:
    """Check that every cost lies within `cost_limit(n)` in absolute value."""
    limit = cost_limit(n)
    bad = (costs < -limit) | (costs > limit)
    if bad.any():
        index = int(np.argmax(bad))
        raise FlowInputError(
            f"costs[{index}] is {costs[index]}; on a network of {n} nodes costs must be "
            f"between {-limit} and {limit}"
        )


def check_total(name: str, array: np.ndarray) -> None:
    """Check that the entries' absolute values add up to less than TOTAL_LIMIT."""
    # A float sum is exact enough to decide; below the limit the int64 sums cannot overflow.
    total = float(np.abs(array.astype(np.float64)).sum())
    if total >= TOTAL_LIMIT * (1 - 1e-9):
        raise FlowInputError(
            f"{name} add up to about {total:.3e}; the total must stay below 2**62 "
            "so that flows fit in int64"
        )


def check_supplies(supplies: Any, n: int) -> np.ndarray:
    """Check the node supplies (one per node, summing to zero) and return them as int64."""
    array = as_int_array("supplies", supplies)
    if len(array) != n:
        raise FlowInputError(
            f"supplies has {len(array)} entries but n is {n}; supplies needs one entry per node"
        )
    check_total("supplies", array)
    total = int(array.sum())
    if total != 0:
        raise FlowInputError(
            f"supplies sum to {total}; they must sum to 0 (each node's out - in = supplies[v])"
        )
    return array


def check_edges(
    n: int,
    tails: Any,
    heads: Any,
    upper: Any,
    *,
    upper_name: str = "capacities",
    lower: Any = None,
    costs: Any = None,
) -> EdgeArrays:
    """Validate the edge arrays of a network on n (already checked) nodes."""
    named = [
        ("tails", as_int_array("tails", tails)),
        ("heads", as_int_array("heads", heads)),
        (upper_name, as_int_array(upper_name, upper)),
    ]
    if costs is not None:
        named.append(("costs", as_int_array("costs", costs)))
    if lower is not None:
        named.append(("lower", as_int_array("lower", lower)))
    check_lengths(named)
    arrays = dict(named)
    check_node_ids("tails", arrays["tails"], n)
    check_node_ids("heads", arrays["heads"], n)
    check_nonnegative(upper_name, arrays[upper_name])
    low = arrays.get("lower")
    if low is None:
        low = np.zeros(len(arrays["tails"]), dtype=np.int64)
    else:
        check_lower(low, arrays[upper_name], upper_name)
    if costs is not None:
        check_costs(arrays["costs"], n)
    check_total(upper_name, arrays[upper_name])
    return EdgeArrays(
        n=n,
        tails=arrays["tails"],
        heads=arrays["heads"],
        upper=arrays[upper_name],
        lower=low,
        costs=arrays.get("costs"),
    )
