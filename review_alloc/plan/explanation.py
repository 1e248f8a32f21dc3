"""The explanation of a session's gaps as one result: shortfall groups, fixes, and the report.

Both faces show the same `Explanation` (the app draws it, the command line prints it or its
JSON `report`); the Workspace computes it once per session and plan.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.cautions import FIX_CAUTIONS
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.explain import COVERAGE_TIERS as TIERS
from review_alloc.plan.explain import CoverageNetwork, ShortfallGroup, coverage_network
from review_alloc.plan.explain import shortfall_groups as groups_of
from review_alloc.plan.fixes import (
    CapRaiseFix,
    PairLoss,
    RecruitFix,
    pair_losses,
    raise_caps_fix,
    recruit_fix,
)
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.report import find_gaps, load_issues
from review_alloc.plan.whatif import apply_cap_fix, apply_recruit_fix

FIX_KINDS = ("raise-caps", "recruit")
"""The kinds of fix an explanation computes, in the order shown; conflicts are never a fix."""


@dataclass(frozen=True)
class Explanation:
    """The shortfall groups of both coverage tiers and the fixes, for one session object."""

    session: Session
    groups: tuple[ShortfallGroup, ...]
    caps: CapRaiseFix
    recruits: RecruitFix
    losses: tuple[PairLoss, ...]
    shortfall: dict[str, int]
    """Per coverage tier: total demand minus the maximum coverage."""
    best: dict[str, int]
    """Per coverage tier: the maximum coverage."""
    demand: dict[str, int]
    """Per coverage tier: the total demand."""
    exact: dict[str, bool] = field(default_factory=dict)
    """Per coverage tier: whether `best` is every optimal plan's coverage (the network states
    every rule above the tier), or only an upper bound (a senior rule ranks above the tier or
    binds it, and no flow states seniors and coverage together)."""

    def groups_of(self, tier: str) -> tuple[ShortfallGroup, ...]:
        """The groups of one coverage tier, in the order they are numbered."""
        return tuple(g for g in self.groups if g.tier == tier)

    def fix_copy(self, kind: str) -> tuple[Session, tuple[str, ...]]:
        """The session changed by one fix (a copy) and the change in words, one line each."""
        s = self.session
        if kind == "raise-caps":
            lines = tuple(
                f"raise cap of {r.reviewer} by {r.raise_by} ({r.cap} -> {r.new_cap})"
                for r in self.caps.raises
            )
            return apply_cap_fix(s, self.caps), lines
        if kind == "recruit":
            lines = tuple(f"add {n.recruits} reviewers in '{n.topic}'" for n in self.recruits.needs)
            return apply_recruit_fix(s, self.recruits), lines
        raise ValueError(f"fix {kind!r} must be one of {FIX_KINDS}")

    def offers(self, kind: str) -> bool:
        """Whether the fix of this kind changes anything."""
        return bool(self.caps.raises) if kind == "raise-caps" else bool(self.recruits.needs)


def explain(session: Session, network: PlanNetwork | None = None) -> Explanation:
    """Groups of both tiers and the best fixes, sharing one planner network (no plan is made)."""
    net = network if network is not None else build_network(session)
    covs: dict[str, CoverageNetwork] = {
        tier: coverage_network(session, tier, plan_net=net) for tier in TIERS
    }
    groups = tuple(g for tier in TIERS for g in groups_of(covs[tier]))
    caps, recruits, losses = best_fixes(covs["reviews"])
    return Explanation(
        session=session,
        groups=groups,
        caps=caps,
        recruits=recruits,
        losses=losses,
        shortfall={tier: cov.shortfall for tier, cov in covs.items()},
        best={tier: cov.value for tier, cov in covs.items()},
        demand={tier: int(cov.demand.sum()) for tier, cov in covs.items()},
        exact=exact_tiers(session, net),
    )


def exact_tiers(session: Session, net: PlanNetwork) -> dict[str, bool]:
    """Which coverage tiers the coverage network solves exactly for this session.

    The coverage network states caps, overload allowances, pins, eligibility and the
    institution limit, as the planner does. Seniors as a tier rank between the two coverage
    tiers, so the `reviews` tier's maximum flow may exceed what the plan can keep with its
    seniors; hard seniors restrict both tiers.
    """
    seniors = bool(len(net.senior_paper)) and bool(np.any(net.senior_need > 0))
    return {
        "min_reviews": not (seniors and net.senior_hard),
        "reviews": not seniors,
    }


def best_fixes(cov: CoverageNetwork) -> tuple[CapRaiseFix, RecruitFix, tuple[PairLoss, ...]]:
    """The least cap raise, the fewest recruits and the conflict/block information, together."""
    return raise_caps_fix(cov), recruit_fix(cov), pair_losses(cov)


def report(explanation: Explanation, plan: Plan) -> dict[str, Any]:
    """The whole explanation as one JSON-ready object: gaps, groups, loads, fixes, cautions.

    `plan` is an optimal plan of the same session; its coverage in both tiers must equal the
    maximum flows the groups come from, or the explanation is refused.
    """
    session = explanation.session
    got = {"min_reviews": plan.figures.required_coverage, "reviews": plan.figures.coverage}
    # A bound that the plan reaches is the optimum itself.
    exact = {
        tier: explanation.exact.get(tier, True) or got[tier] == explanation.best[tier]
        for tier in TIERS
    }
    # Where the maximum flow is only a bound (seniors), the plan may stay below it, never above.
    wrong = [
        f"{tier} coverage: plan {got[tier]}, maximum flow {explanation.best[tier]}"
        for tier in TIERS
        if got[tier] > explanation.best[tier]
        or (exact[tier] and got[tier] != explanation.best[tier])
    ]
    if wrong:
        raise PlanCheckError(wrong)
    group_of: dict[tuple[str, str], str] = {}
    group_rows: list[dict[str, Any]] = []
    for tier in TIERS:
        for k, g in enumerate(explanation.groups_of(tier), start=1):
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
    return {
        "session": session.name,
        "coverage": {
            tier: {
                "demand": explanation.demand[tier],
                "best": explanation.best[tier],
                "shortfall": explanation.shortfall[tier],
                "groups_shortfall": sum(g.shortfall for g in explanation.groups_of(tier)),
                "exact": exact[tier],
                "planned": got[tier],
                **(
                    {}
                    if exact[tier]
                    else {
                        "note": "best is an upper bound: the senior rule ranks above this tier "
                        "and may keep the plan below it; the groups explain the bound"
                    }
                ),
            }
            for tier in TIERS
        },
        "gaps": gap_rows,
        "groups": group_rows,
        "overloads": [asdict(x) for x in over],
        "underloads": [asdict(x) for x in under],
        "fixes": {
            # Under the senior rule the all-reviews figure is a bound, and so is each fix's
            # coverage_after; a what-if preview shows what a re-plan reaches.
            "coverage_after_exact": explanation.exact["reviews"],
            "raise_caps": asdict(explanation.caps),
            "recruit": asdict(explanation.recruits),
            "conflicts_and_blocks": {
                "note": "information only: what allowing these pairs would add; "
                "no fix lifts a conflict or a block",
                "pairs": [asdict(x) for x in explanation.losses],
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
