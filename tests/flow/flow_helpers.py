"""Shared helpers of the flow-engine tests: labelled graphs, reference solvers, certificates."""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from dataclasses import dataclass

import numpy as np
from ortools.graph.python import min_cost_flow as ortools_mcf
from scipy.optimize import linprog
from scipy.sparse import coo_matrix, csr_matrix
from scipy.sparse.csgraph import maximum_flow as scipy_maximum_flow

from review_alloc.flow import (
    check_cost_certificate,
    check_cut,
    check_flow,
    max_flow,
    min_cost_flow,
)


@dataclass(frozen=True)
class Labelled:
    """A graph given with node labels, turned into engine arrays."""

    index: dict[Hashable, int]
    tails: np.ndarray
    heads: np.ndarray
    capacities: np.ndarray
    costs: np.ndarray

    @property
    def n(self) -> int:
        """Number of nodes."""
        return len(self.index)

    def side(self, mask: np.ndarray) -> set[Hashable]:
        """Labels of the nodes where mask is True."""
        return {label for label, i in self.index.items() if mask[i]}

    def vector(self, values: dict[Hashable, int]) -> np.ndarray:
        """Per-node int64 array from a {label: value} mapping (others 0)."""
        out = np.zeros(self.n, dtype=np.int64)
        for label, value in values.items():
            out[self.index[label]] = value
        return out


def labelled(edges: Sequence[tuple]) -> Labelled:
    """Arrays of `(tail, head, capacity[, cost])` tuples, numbering labels by first appearance."""
    index: dict[Hashable, int] = {}
    for edge in edges:
        for label in edge[:2]:
            index.setdefault(label, len(index))
    return Labelled(
        index=index,
        tails=np.array([index[e[0]] for e in edges], dtype=np.int64),
        heads=np.array([index[e[1]] for e in edges], dtype=np.int64),
        capacities=np.array([e[2] for e in edges], dtype=np.int64),
        costs=np.array([e[3] if len(e) > 3 else 0 for e in edges], dtype=np.int64),
    )


def certified_max_flow(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    source: int,
    sink: int,
    lower: np.ndarray | None = None,
) -> int:
    """Solve with the engine, run the flow and cut certificates, return the value."""
    result = max_flow(n, tails, heads, capacities, source, sink, lower=lower)
    assert result.flow.dtype == np.int64
    value = check_flow(n, tails, heads, capacities, result.flow, source, sink, lower=lower)
    assert value == result.value
    check_cut(n, tails, heads, capacities, result.source_side, value, source, sink, lower=lower)
    return result.value


def certified_min_cost(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    costs: np.ndarray,
    supplies: np.ndarray | None = None,
    lower: np.ndarray | None = None,
) -> int:
    """Solve with the engine, run the reduced-cost certificate, return the optimal cost."""
    result = min_cost_flow(n, tails, heads, capacities, costs, supplies=supplies, lower=lower)
    checked = check_cost_certificate(
        n, tails, heads, capacities, costs, result.flow, result.potentials,
        supplies=supplies, lower=lower,
    )
    assert checked == result.cost
    assert isinstance(result.cost, int)
    assert result.potentials.dtype == np.int64 and result.potentials.shape == (n,)
    return result.cost


def scipy_value(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    s: int,
    t: int,
    method: str,
) -> int:
    """Max-flow value by scipy.sparse.csgraph.maximum_flow (parallel edges summed)."""
    keep = tails != heads  # scipy's CSR input has no use for self-loops
    graph = csr_matrix(
        (capacities[keep].astype(np.int32), (tails[keep], heads[keep])), shape=(n, n)
    )
    graph.sum_duplicates()
    return int(scipy_maximum_flow(graph, s, t, method=method).flow_value)


def networkx_value(
    n: int, tails: np.ndarray, heads: np.ndarray, capacities: np.ndarray, s: int, t: int
) -> int:
    """Max-flow value by networkx.maximum_flow_value on a DiGraph of summed capacities."""
    import networkx as nx

    graph = nx.DiGraph()
    graph.add_nodes_from(range(n))
    for u, v, c in zip(tails.tolist(), heads.tolist(), capacities.tolist(), strict=True):
        if u == v:
            continue
        if graph.has_edge(u, v):
            graph[u][v]["capacity"] += c
        else:
            graph.add_edge(u, v, capacity=c)
    return int(nx.maximum_flow_value(graph, s, t))


def ortools_cost(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    costs: np.ndarray,
    supplies: np.ndarray | None = None,
    lower: np.ndarray | None = None,
) -> int | None:
    """Optimal cost by OR-Tools SimpleMinCostFlow, or None when it reports infeasibility.

    OR-Tools has no lower bounds, so they are shifted out here: x = lower + y.
    """
    low = np.zeros(len(tails), np.int64) if lower is None else lower
    need = np.zeros(n, np.int64) if supplies is None else supplies.astype(np.int64).copy()
    np.subtract.at(need, tails, low)
    np.add.at(need, heads, low)
    solver = ortools_mcf.SimpleMinCostFlow()
    if len(tails):
        solver.add_arcs_with_capacity_and_unit_cost(tails, heads, capacities - low, costs)
    solver.set_nodes_supplies(np.arange(n), need)
    status = solver.solve()
    if status == solver.INFEASIBLE:
        return None
    assert status == solver.OPTIMAL, status
    return int(solver.optimal_cost()) + int(low @ costs)


def highs_cost(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    costs: np.ndarray,
    supplies: np.ndarray | None = None,
    lower: np.ndarray | None = None,
) -> int | None:
    """Optimal cost of the flow LP by HiGHS (scipy.optimize.linprog), None if infeasible."""
    m = len(tails)
    low = np.zeros(m, np.int64) if lower is None else lower
    need = np.zeros(n, np.int64) if supplies is None else supplies
    rows = np.concatenate([tails, heads])
    cols = np.concatenate([np.arange(m), np.arange(m)])
    vals = np.concatenate([np.ones(m), -np.ones(m)])
    incidence = coo_matrix((vals, (rows, cols)), shape=(n, m)).tocsr()
    result = linprog(
        costs.astype(float),
        A_eq=incidence,
        b_eq=need.astype(float),
        bounds=np.column_stack([low, capacities]).astype(float),
        method="highs",
    )
    if result.status == 2:
        return None
    assert result.status == 0, result.message
    return int(round(result.fun))
