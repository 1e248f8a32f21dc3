"""The flow engine: maximum flows, lower bounds, minimum cuts and min-cost flows on integer arrays.

Nodes are 0..n-1 and edge e runs `tails[e] -> heads[e]`; capacities, lower bounds, supplies and
costs are integers (int64 inside; scale fractional data to integers before calling). Kernels are
compiled by numba and cached per user; call `warm_up()` early (for example in a background
thread) to pay the compile or cache load once.

Importing this package has no side effects: the public names below load their modules on first
use (PEP 562), so numba is imported, and pointed at the per-user cache folder, only when a solver
or a check is first needed. The modules: `maxflow` and `mincost` are the front doors; `dinic`,
`cost_scaling`, `primal_dual`, `tier_start` (the pre-pass of cost scaling) and `potentials`
(Bellman-Ford) hold one algorithm each; `circulation` reduces lower bounds; `residual` builds the
residual network the kernels share; `checks` holds the certificate checks; `compile` warms the
kernels up; `kept` keeps a solved flow to patch and re-solve locally (`KeptFlow`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from review_alloc._lazy import lazy_names

if TYPE_CHECKING:
    from review_alloc.flow.checks import (
        check_cost_certificate,
        check_cut,
        check_flow,
        check_violated_cut,
    )
    from review_alloc.flow.circulation import feasible_circulation
    from review_alloc.flow.compile import kernels_ready, solver_cache_ready, warm_up
    from review_alloc.flow.kept import KeptFlow
    from review_alloc.flow.maxflow import METHODS, max_flow
    from review_alloc.flow.mincost import COST_METHODS, WarmStart, min_cost_flow
    from review_alloc.flow.results import (
        CostFlowResult,
        FlowCheckError,
        FlowError,
        FlowInputError,
        FlowResult,
        InfeasibleError,
    )

_HOMES = {
    "COST_METHODS": "mincost",
    "METHODS": "maxflow",
    "CostFlowResult": "results",
    "FlowCheckError": "results",
    "FlowError": "results",
    "FlowInputError": "results",
    "FlowResult": "results",
    "InfeasibleError": "results",
    "KeptFlow": "kept",
    "WarmStart": "mincost",
    "check_cost_certificate": "checks",
    "check_cut": "checks",
    "check_flow": "checks",
    "check_violated_cut": "checks",
    "feasible_circulation": "circulation",
    "kernels_ready": "compile",
    "max_flow": "maxflow",
    "min_cost_flow": "mincost",
    "solver_cache_ready": "compile",
    "warm_up": "compile",
}
"""The module each public name lives in."""

__all__ = [
    "COST_METHODS",
    "METHODS",
    "CostFlowResult",
    "FlowCheckError",
    "FlowError",
    "FlowInputError",
    "FlowResult",
    "InfeasibleError",
    "KeptFlow",
    "WarmStart",
    "check_cost_certificate",
    "check_cut",
    "check_flow",
    "check_violated_cut",
    "feasible_circulation",
    "kernels_ready",
    "max_flow",
    "min_cost_flow",
    "solver_cache_ready",
    "warm_up",
]


__getattr__, __dir__ = lazy_names(
    __name__, {name: (home, name) for name, home in _HOMES.items()}, globals(), __all__
)
