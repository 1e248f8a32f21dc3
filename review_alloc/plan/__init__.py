"""Planning: session → network, solve, decode, check, and what the plan means."""

from review_alloc.plan.checker import check_plan
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.errors import PlanCheckError, PlanInputError
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.report import Gap, LoadIssue, find_gaps, load_issues, plan_summary
from review_alloc.plan.solve import PlanOutcome, make_plan
from review_alloc.plan.weights import SCORE_RESOLUTION

__all__ = [
    "SCORE_RESOLUTION",
    "ConflictSet",
    "Gap",
    "LoadIssue",
    "PlanCheckError",
    "PlanInputError",
    "PlanNetwork",
    "PlanOutcome",
    "build_network",
    "check_plan",
    "conflict_pairs",
    "find_gaps",
    "load_issues",
    "make_plan",
    "plan_summary",
]
