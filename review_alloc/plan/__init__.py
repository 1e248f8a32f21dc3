"""Planning: session → network, solve, decode, check, and what the plan means.

Importing this package has no side effects: the public names below load their modules on first
use (PEP 562), so a command that only reads a session (history, diff, export) does not import
the solver (numba) or scipy.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from review_alloc._lazy import lazy_names

if TYPE_CHECKING:
    from review_alloc.plan.checker import check_plan
    from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
    from review_alloc.plan.errors import PlanCheckError, PlanInputError
    from review_alloc.plan.network import PlanNetwork, build_network
    from review_alloc.plan.report import Gap, LoadIssue, find_gaps, load_issues, plan_summary
    from review_alloc.plan.solve import PlanOutcome, make_plan
    from review_alloc.plan.weights import SCORE_RESOLUTION

_HOMES = {
    "SCORE_RESOLUTION": "weights",
    "ConflictSet": "conflicts",
    "Gap": "report",
    "LoadIssue": "report",
    "PlanCheckError": "errors",
    "PlanInputError": "errors",
    "PlanNetwork": "network",
    "PlanOutcome": "solve",
    "build_network": "network",
    "check_plan": "checker",
    "conflict_pairs": "conflicts",
    "find_gaps": "report",
    "load_issues": "report",
    "make_plan": "solve",
    "plan_summary": "report",
}
"""The module each public name lives in."""

__all__ = [
    "ConflictSet",
    "Gap",
    "LoadIssue",
    "PlanCheckError",
    "PlanInputError",
    "PlanNetwork",
    "PlanOutcome",
    "SCORE_RESOLUTION",
    "build_network",
    "check_plan",
    "conflict_pairs",
    "find_gaps",
    "load_issues",
    "make_plan",
    "plan_summary",
]


__getattr__, __dir__ = lazy_names(
    __name__, {name: (home, name) for name, home in _HOMES.items()}, globals(), __all__
)
