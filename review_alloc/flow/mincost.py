"""Minimum-cost flow: the front door, which validates and picks the method.

Two methods, one module each: cost scaling (`cost_scaling.py`, with the tier pre-pass of
`tier_start.py` and exact potentials from `potentials.py`) solves cold; the primal-dual method
(`primal_dual.py`) restarts from a previous flow and potentials, and is the fallback where cost
scaling's prices could overflow int64. `method=` picks the cold method (`COST_METHODS`); a warm
start always tries the primal-dual method first and hands a large change to the cold method.
Whichever solves, the result carries potentials that certify optimality.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, cast

import numpy as np

from review_alloc.flow.cost_scaling import solve_cost_scaling
from review_alloc.flow.primal_dual import solve_primal_dual as _primal_dual
from review_alloc.flow.primal_dual import solve_warm_primal_dual
from review_alloc.flow.results import CostFlowResult, FlowInputError
from review_alloc.flow.sums import exact_dot
from review_alloc.flow.validate import as_int_array, check_edges, check_n, check_supplies

COST_METHODS = ("auto", "cost-scaling", "primal-dual")
"""Algorithms `min_cost_flow(method=...)` accepts for a cold solve; "auto" is cost scaling
(primal-dual where scaled prices could overflow int64). A warm start always tries the
primal-dual method first."""


def _total_cost(flow: np.ndarray, costs: np.ndarray) -> int:
    """Exact total cost as a Python int (int64 products could overflow on extreme inputs)."""
    return exact_dot(flow, costs)


@dataclass(frozen=True, eq=False)
class WarmStart:
    """A previous flow (one value per edge) and potentials (one per node) to restart from.

    They need not fit the new bounds: flows are clipped into them, and arcs whose reduced cost
    says they are on the wrong side are moved to the right bound before re-routing.
    """

    flow: np.ndarray
    potentials: np.ndarray


def _check_warm(warm: WarmStart, m: int, n: int) -> tuple[np.ndarray, np.ndarray]:
    flow = as_int_array("warm.flow", warm.flow)
    pot = as_int_array("warm.potentials", warm.potentials)
    if len(flow) != m:
        raise FlowInputError(f"warm.flow has {len(flow)} entries but there are {m} edges")
    if len(pot) != n:
        raise FlowInputError(f"warm.potentials has {len(pot)} entries but n is {n}")
    # Potentials are differences of path costs; keep them where reduced costs cannot overflow.
    limit = 2**60
    if len(pot) and int(np.abs(pot).max()) >= limit:
        raise FlowInputError(f"warm.potentials must lie between {-limit} and {limit}")
    return flow, pot


def min_cost_flow(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    costs: Any,
    *,
    supplies: Any = None,
    lower: Any = None,
    method: str = "auto",
    warm: WarmStart | None = None,
) -> CostFlowResult:
    """A flow of least total cost meeting the supplies (`out - in = supplies[v]`) and the bounds.

    Costs are integers and may be negative; `supplies=None` asks for a circulation. Self-loops
    are allowed (a negative one is optimally saturated). The result's potentials certify
    optimality (see `CostFlowResult`). Raises `InfeasibleError` with a cut when the supplies
    cannot be met. `method` picks the algorithm (`COST_METHODS`); `warm` restarts the
    primal-dual method from a previous flow and potentials, which pays off after small changes
    (after a large one it gives up early and the cold `method` solves instead).
    """
    if method not in COST_METHODS:
        choices = ", ".join(repr(m) for m in COST_METHODS)
        raise FlowInputError(f"method {method!r} is not available; choose one of {choices}")
    n = check_n(n, 1)
    edges = check_edges(n, tails, heads, capacities, lower=lower, costs=costs)
    need = np.zeros(n, dtype=np.int64) if supplies is None else check_supplies(supplies, n)
    costs_in = cast(np.ndarray, edges.costs)  # check_edges returns the costs it was given

    solved = None
    if warm is not None:
        flow, pot = _check_warm(warm, len(edges.tails), n)
        solved = solve_warm_primal_dual(
            edges, need, np.clip(flow, edges.lower, edges.upper), pot
        )
    if solved is None and method != "primal-dual":
        solved = solve_cost_scaling(edges, need)
    if solved is None:
        # Looked up in this module at call time, so a test can remove the fallback to prove
        # that cost scaling solves a network alone.
        solved = _primal_dual(edges, need, edges.lower, np.zeros(n, dtype=np.int64))
    if solved is None:  # only a budget makes the primal-dual method give up, and none was set
        raise AssertionError("the primal-dual method gave up without a work budget")
    net, potentials = solved
    flow = net.edge_flow(edges.lower)
    return CostFlowResult(flow=flow, cost=_total_cost(flow, costs_in), potentials=potentials)
