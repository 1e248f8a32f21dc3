"""Lower bounds: the textbook reduction of a bounded flow to a feasible circulation.

Start every edge at its lower bound; a node then has an excess (more forced in than out) or a
deficit. A super source feeds the excesses, a super sink drains the deficits, and Dinic's
algorithm finds whether all of it can be routed. If not, the nodes still reachable from the super
source form a violated cut (Hoffman's circulation theorem): the lower bounds force more flow into
that set than the upper bounds let out.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from review_alloc.flow.dinic import dinic, reachable
from review_alloc.flow.residual import ResidualNetwork, build_with_terminals, net_outflow
from review_alloc.flow.results import InfeasibleError
from review_alloc.flow.validate import EdgeArrays, check_edges, check_n


def violated_cut(net: ResidualNetwork, n: int) -> np.ndarray:
    """Original nodes reachable from the super source (node n) once routing is stuck."""
    return reachable(net, n)[:n].copy()


def unmet_supplies(net: ResidualNetwork, n: int, demand: int, routed: int) -> InfeasibleError:
    """The error for supplies that routing from super source n could not meet, with its cut."""
    side = violated_cut(net, n)
    return InfeasibleError(
        f"the supplies cannot be met: {int(side.sum())} nodes must send out {demand - routed} "
        "more units than the upper bounds of their outgoing edges allow",
        source_side=side,
        deficit=demand - routed,
    )


def route_lower_bounds(edges: EdgeArrays) -> tuple[ResidualNetwork, int]:
    """Residual network of a flow meeting every lower bound with zero net flow at every node.

    Returns the network (super source n and super sink n + 1 included, their arcs saturated) and
    the number of Dinic phases used; raises `InfeasibleError` if no such circulation exists.
    """
    excess = -net_outflow(edges.n, edges.tails, edges.heads, edges.lower)
    net, total = build_with_terminals(
        edges.n, edges.tails, edges.heads, edges.upper, edges.lower, edges.lower, excess
    )
    routed, phases = dinic(net, edges.n, edges.n + 1)
    if routed < total:
        side = violated_cut(net, edges.n)
        raise InfeasibleError(
            f"no flow meets the lower bounds: {int(side.sum())} nodes receive {total - routed} "
            "more units through lower bounds than their upper bounds let out",
            source_side=side,
            deficit=total - routed,
        )
    return net, phases


def feasible_circulation(n: int, tails: Any, heads: Any, lower: Any, upper: Any) -> np.ndarray:
    """A circulation with lower <= flow <= upper on every edge, or `InfeasibleError` with a cut.

    The cut `S = error.source_side` satisfies
    `sum(lower on edges entering S) - sum(upper on edges leaving S) == error.deficit > 0`.
    Self-loops are allowed and carry their lower bound.
    """
    n = check_n(n, 1)
    edges = check_edges(n, tails, heads, upper, upper_name="upper", lower=lower)
    net, _ = route_lower_bounds(edges)
    return net.edge_flow(edges.lower)
