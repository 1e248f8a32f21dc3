"""The whole explanation of a session as one JSON-ready report: gaps, groups, loads, fixes.

The session is planned afresh and the plan's coverage checked against the maximum flows the
shortfall groups come from; the fixes are the three kinds in `plan.fixes`.
"""

from __future__ import annotations

from dataclasses import asdict
from typing import Any

from review_alloc.model import Session
from review_alloc.plan.cautions import FIX_CAUTIONS
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.explain import (
    COVERAGE_TIERS,
    CoverageNetwork,
    ShortfallGroup,
    coverage_network,
    shortfall_groups,
)
from review_alloc.plan.fixes import (
    CapRaiseFix,
    PairLoss,
    RecruitFix,
    pair_losses,
    raise_caps_fix,
    recruit_fix,
)
from review_alloc.plan.report import find_gaps, load_issues
from review_alloc.plan.solve import make_plan


def best_fixes(
    session: Session, cov: CoverageNetwork | None = None
) -> tuple[CapRaiseFix, RecruitFix, tuple[PairLoss, ...]]:
    """The cap-raise fix, the recruit fix and the conflict/block information, together."""
    cov = cov if cov is not None else coverage_network(session, "reviews")
    return raise_caps_fix(cov), recruit_fix(cov), pair_losses(cov)


def explain_session(session: Session) -> dict[str, Any]:
    """The whole explanation as one JSON-ready object: gaps, groups, loads, fixes, cautions.

    The session is planned afresh (nothing is saved), and the plan's coverage in both tiers is
    checked against the maximum flows the groups come from.
    """
    outcome = make_plan(session)
    plan, net = outcome.plan, outcome.network
    covs = {tier: coverage_network(session, tier, plan_net=net) for tier in COVERAGE_TIERS}
    got = {"min_reviews": plan.figures.required_coverage, "reviews": plan.figures.coverage}
    wrong = [
        f"{tier} coverage: plan {got[tier]}, maximum flow {cov.value}"
        for tier, cov in covs.items()
        if got[tier] != cov.value
    ]
    if wrong:
        raise PlanCheckError(wrong)
    groups = {tier: shortfall_groups(cov) for tier, cov in covs.items()}
    group_of: dict[tuple[str, str], str] = {}
    group_rows: list[dict[str, Any]] = []
    for tier in COVERAGE_TIERS:
        for k, g in enumerate(groups[tier], start=1):
            gid = f"{tier}-{k}"
            group_rows.append({"id": gid, **_group_row(g)})
            for pid in g.papers:
                group_of[(tier, pid)] = gid
    gap_rows = [
        {
            **asdict(g),
            "group": group_of.get(("reviews", g.paper)),
            "min_reviews_group": group_of.get(("min_reviews", g.paper)),
        }
        for g in find_gaps(session, plan)
    ]
    over, under = load_issues(session, plan)
    caps_fix, recruits, losses = best_fixes(session, covs["reviews"])
    return {
        "session": session.name,
        "coverage": {
            tier: {
                "demand": int(cov.demand.sum()),
                "best": cov.value,
                "shortfall": cov.shortfall,
                "groups_shortfall": sum(g.shortfall for g in groups[tier]),
            }
            for tier, cov in covs.items()
        },
        "gaps": gap_rows,
        "groups": group_rows,
        "overloads": [asdict(x) for x in over],
        "underloads": [asdict(x) for x in under],
        "fixes": {
            "raise_caps": asdict(caps_fix),
            "recruit": asdict(recruits),
            "conflicts_and_blocks": {
                "note": "information only: what allowing these pairs would add; "
                "no fix lifts a conflict or a block",
                "pairs": [asdict(x) for x in losses],
            },
        },
        "cautions": list(FIX_CAUTIONS),
    }


def _group_row(g: ShortfallGroup) -> dict[str, Any]:
    return {
        "tier": g.tier,
        "papers": list(g.papers),
        "reviewers": list(g.reviewers),
        "saturated_reviewers": list(g.saturated_reviewers),
        "topics": list(g.topics),
        "needed": g.needed,
        "available": g.available,
        "shortfall": g.shortfall,
        "cause": g.cause,
        "factors": dict(g.factors),
    }
