"""The maximum-flow front door: validation, lower bounds, the chosen algorithm, one result shape."""

from __future__ import annotations

from typing import Any

import numpy as np

from review_alloc.flow.circulation import route_lower_bounds
from review_alloc.flow.dinic import dinic, max_flow_kernel, reachable, reaching
from review_alloc.flow.results import FlowInputError, FlowResult
from review_alloc.flow.validate import (
    EdgeArrays,
    as_int_array,
    check_edges,
    check_lengths,
    check_n,
    check_node,
)

METHODS = ("dinic",)
"""Algorithms `max_flow(method=...)` accepts."""


def max_flow(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    source: int,
    sink: int,
    *,
    lower: Any = None,
    method: str = "dinic",
) -> FlowResult:
    """A maximum source-sink flow on integer capacities, with both sides of a minimum cut.

    Edges are `tails[e] -> heads[e]` with `lower[e] <= flow[e] <= capacities[e]` (lower bounds
    default to 0). Parallel edges, edges into the source and self-loops are allowed; a self-loop
    carries its lower bound. With lower bounds, raises `InfeasibleError` when no flow meets them
    (its cut holds the source and the sink together or neither); the value of a maximum flow is
    negative when the lower bounds force more flow from the sink back to the source.

    In the residual graph of the flow returned (an edge's forward residual is `capacities -
    flow`, its backward residual `flow - lower`), `source_side` marks the nodes the source can
    reach and `sink_side` those that can reach the sink: the smallest source side and the
    smallest sink side of a minimum cut. Both `source_side` and the complement of `sink_side`
    are source sides of minimum cuts, and every minimum cut's source side contains the first
    and avoids the second.
    """
    if method not in METHODS:
        choices = ", ".join(repr(m) for m in METHODS)
        raise FlowInputError(f"method {method!r} is not available; choose one of {choices}")
    n = check_n(n, 2)
    source = check_node("source", source, n)
    sink = check_node("sink", sink, n)
    if source == sink:
        raise FlowInputError(f"source and sink must differ (both {source})")
    if lower is None:
        # The kernel checks node ids, signs and the total in its first pass; on a problem the
        # full checks below run in their documented order and raise the message.
        arrays = [
            ("tails", as_int_array("tails", tails)),
            ("heads", as_int_array("heads", heads)),
            ("capacities", as_int_array("capacities", capacities)),
        ]
        check_lengths(arrays)
        result = _solve_without_lower(n, *(array for _, array in arrays), source, sink, False)
        if result is not None:
            return result
    edges = check_edges(n, tails, heads, capacities, lower=lower)
    if not edges.lower.any():
        result = _solve_without_lower(n, edges.tails, edges.heads, edges.upper, source, sink, True)
        if result is None:
            raise AssertionError("the edge scan refused edges that passed every check")
        return result

    # Return edges sink -> source and source -> sink turn any s-t flow, whatever the sign of its
    # value, into a circulation; above the total capacity, they never limit it.
    unlimited = int(edges.upper.sum()) + 1
    with_return = EdgeArrays(
        n=n,
        tails=np.append(edges.tails, [sink, source]),
        heads=np.append(edges.heads, [source, sink]),
        upper=np.append(edges.upper, [unlimited, unlimited]),
        lower=np.append(edges.lower, [0, 0]),
        costs=None,
    )
    net, phases = route_lower_bounds(with_return)
    for edge in (len(edges.tails), len(edges.tails) + 1):
        arc = net.arc_of_edge[edge]
        net.cap[arc] = 0
        net.cap[net.rev[arc]] = 0
    _, more_phases = dinic(net, source, sink)

    flow = net.edge_flow(edges.lower)
    value = int(flow[edges.tails == source].sum() - flow[edges.heads == source].sum())
    return FlowResult(
        value=value,
        flow=flow,
        source_side=reachable(net, source)[:n].copy(),
        phases=phases + more_phases,
        # Every arc out of the super source and into the super sink is saturated, so no residual
        # path between original nodes passes through them: both sides ignore those two nodes.
        sink_side=reaching(net, sink)[:n].copy(),
    )


def _solve_without_lower(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    source: int,
    sink: int,
    checked: bool,
) -> FlowResult | None:
    """Solve in the fused kernel; None when its scan found something for the full checks."""
    m = len(tails)
    flow = np.zeros(m, dtype=np.int64)
    status, value, phases, source_side, sink_side = max_flow_kernel(
        np.int64(n),
        np.ascontiguousarray(tails),
        np.ascontiguousarray(heads),
        np.ascontiguousarray(capacities),
        np.int64(source),
        np.int64(sink),
        checked,
        flow,
        np.zeros(m, dtype=np.bool_),
        # The solve fills the front of the pool, as far as edges carry flow; the rest of its
        # pages (and of the next two arrays, touched only for edges out of tail and head
        # order) are never written and so cost nothing.
        np.empty(2 * m, dtype=np.int64),
        np.empty(m, dtype=np.int32),
        np.zeros((2, m), dtype=np.int64),
    )
    if status != 0:
        return None
    # No path of a level graph re-enters the source, so the pushed total is the net outflow.
    return FlowResult(
        value=int(value), flow=flow, source_side=source_side, phases=int(phases),
        sink_side=sink_side,
    )
