"""The flow engine: maximum flows, lower bounds, minimum cuts and min-cost flows on integer arrays.

Nodes are 0..n-1 and edge e runs `tails[e] -> heads[e]`; capacities, lower bounds, supplies and
costs are integers (int64 inside; scale fractional data to integers before calling). The engine
knows nothing of papers or reviewers. Kernels are compiled by numba and cached per user; call
`warm_up()` early (for example in a background thread) to pay the compile or cache load once.
"""

from review_alloc.flow._cache import configure_numba_cache

configure_numba_cache()

# The numba-backed modules must be imported after the cache folder is configured.
from review_alloc.flow.checks import (  # noqa: E402
    check_cost_certificate,
    check_cut,
    check_flow,
    check_violated_cut,
)
from review_alloc.flow.circulation import feasible_circulation  # noqa: E402
from review_alloc.flow.maxflow import METHODS, max_flow  # noqa: E402
from review_alloc.flow.mincost import COST_METHODS, WarmStart, min_cost_flow  # noqa: E402
from review_alloc.flow.results import (  # noqa: E402
    CostFlowResult,
    FlowCheckError,
    FlowError,
    FlowInputError,
    FlowResult,
    InfeasibleError,
)
from review_alloc.flow.warm import kernels_ready, solver_cache_ready, warm_up  # noqa: E402

__all__ = [
    "COST_METHODS",
    "METHODS",
    "CostFlowResult",
    "FlowCheckError",
    "FlowError",
    "FlowInputError",
    "FlowResult",
    "InfeasibleError",
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
