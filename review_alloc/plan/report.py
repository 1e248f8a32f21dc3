"""What a plan means for the chair: gaps, loads against caps and floors, the JSON summary."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.figures import active_demands, assignment_indices, loads_and_counts


@dataclass(frozen=True)
class Gap:
    """A paper short of its reviews: `missing` below `reviews`, `missing_required` below min."""

    paper: str
    title: str
    assigned: int
    reviews: int
    min_reviews: int
    missing: int
    missing_required: int


@dataclass(frozen=True)
class LoadIssue:
    """A reviewer whose load is above cap (`excess` > 0) or below floor (`excess` < 0)."""

    reviewer: str
    name: str
    load: int
    cap: int
    floor: int
    excess: int


def find_gaps(session: Session, plan: Plan) -> list[Gap]:
    """Every active paper with fewer reviews than it should have, in session order."""
    reviewer, paper, _ = assignment_indices(session, plan.assignments)
    _, counts = loads_and_counts(session, reviewer, paper)
    reviews, minimum, _, _ = active_demands(session)
    return [
        Gap(
            paper=session.papers[i].id,
            title=session.papers[i].title,
            assigned=int(counts[i]),
            reviews=int(reviews[i]),
            min_reviews=int(minimum[i]),
            missing=int(reviews[i] - counts[i]),
            missing_required=int(max(minimum[i] - counts[i], 0)),
        )
        for i in np.flatnonzero(counts < reviews)
    ]


def load_issues(session: Session, plan: Plan) -> tuple[list[LoadIssue], list[LoadIssue]]:
    """(overloads, underloads): reviewers above cap, and active reviewers below their floor."""
    reviewer, paper, _ = assignment_indices(session, plan.assignments)
    loads, _ = loads_and_counts(session, reviewer, paper)
    _, _, cap, floor = active_demands(session)

    def issue(j: int) -> LoadIssue:
        r = session.reviewers[j]
        excess = int(loads[j] - cap[j]) if loads[j] > cap[j] else int(loads[j] - floor[j])
        return LoadIssue(r.id, r.name, int(loads[j]), int(cap[j]), int(floor[j]), excess)

    over = [issue(j) for j in np.flatnonzero(loads > cap)]
    under = [issue(j) for j in np.flatnonzero(loads < floor)]
    return over, under


def load_spread(session: Session, plan: Plan) -> dict[str, float]:
    """Min, max and mean load over active reviewers (withdrawn ones do not count)."""
    reviewer, paper, _ = assignment_indices(session, plan.assignments)
    loads, _ = loads_and_counts(session, reviewer, paper)
    active = ~np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    if not active.any():
        return {"min": 0, "max": 0, "mean": 0.0}
    chosen = loads[active]
    return {
        "min": int(chosen.min()),
        "max": int(chosen.max()),
        "mean": round(float(chosen.mean()), 3),
    }


def plan_summary(session: Session, plan: Plan) -> dict[str, Any]:
    """The JSON object of `review-alloc plan --json` (keys are a contract, see DESIGN.md)."""
    from review_alloc.plan.rules_report import load_distribution, paper_details, rule_report

    f = plan.figures
    over, under = load_issues(session, plan)
    reviewer, paper, _ = assignment_indices(session, plan.assignments)
    loads, _ = loads_and_counts(session, reviewer, paper)
    load = {**load_spread(session, plan), **load_distribution(session, loads)}
    before = plan.loads_before_balance
    if before is not None and len(before) == len(session.reviewers):
        load["before"] = load_distribution(session, np.array(before, dtype=np.int64))
    rules = rule_report(session, plan)
    gap_reasons = rules.pop("gap_reasons")
    lowest = {key: rules.pop(key) for key in ("lowest_score", "lowest_unpinned_score")}
    policy = session.policy
    return {
        "session": session.name,
        "created_at": plan.created_at.isoformat(),
        "checked": plan.checked,
        "method": plan.method,
        "papers": sum(not p.withdrawn for p in session.papers),
        "reviewers": sum(not r.withdrawn for r in session.reviewers),
        "assignments": [
            {"paper": a.paper, "reviewer": a.reviewer, "score": a.score} for a in plan.assignments
        ],
        "coverage": f.coverage,
        "demand": f.demand,
        "required_coverage": f.required_coverage,
        "required_demand": f.required_demand,
        "floors_met": f.floors_met,
        "floors_demand": f.floors_demand,
        "total_score": f.total_score,
        "mean_score": round(f.total_score / f.assigned, 6) if f.assigned else 0.0,
        "load": load,
        "gaps": [
            {**asdict(g), "reason": gap_reasons.get(g.paper, "")} for g in find_gaps(session, plan)
        ],
        "overloads": [asdict(x) for x in over],
        "underloads": [asdict(x) for x in under],
        "rules": {
            "senior_min": policy.senior_min,
            "senior_hard": policy.senior_hard,
            "max_per_institution": policy.max_per_institution,
            "require_shared_topic": policy.require_shared_topic,
            "min_score": policy.min_score,
            "balance": policy.balance,
            "bottleneck": policy.bottleneck,
            "max_leads": policy.max_leads,
        },
        # The bottleneck option raises the lowest score of the unpinned pairs (`bottleneck` is
        # the threshold it found); `lowest_score` is the lowest of every assigned pair, pins
        # included, which a pinned pair may hold below the threshold.
        "bottleneck": plan.bottleneck,
        **lowest,
        "optimality": {"proven": plan.bound is None, "bound": plan.bound},
        "per_paper": paper_details(session, plan),
        **rules,
    }
