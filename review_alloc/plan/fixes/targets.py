"""Fixes for both targets: every paper at its minimum, and every paper fully reviewed.

The `min_reviews` tier's coverage network answers the first target, the `reviews` tier's the
second; on each the cap-raise fix and the recruit fix are exact (see `caps` and `recruits`).
A fix aimed only at the minimum is often far smaller than the one for full coverage, which is
why the chair is offered both, each with its cost in people and caps.
"""

from __future__ import annotations

from dataclasses import dataclass

from review_alloc.model import Session
from review_alloc.plan.explain import CoverageNetwork, coverage_network
from review_alloc.plan.fixes.caps import CapRaiseFix, raise_caps_fix
from review_alloc.plan.fixes.recruits import RecruitFix, recruit_fix
from review_alloc.plan.network import PlanNetwork, build_network

TARGET_TIERS = {"minimum": "min_reviews", "full": "reviews"}
"""Each target and the coverage tier whose network computes its fixes, smaller target first."""

FIX_KEYS = ("raise-caps-min", "recruit-min", "raise-caps", "recruit")
"""Every fix a chair can preview or accept: the minimum target's first. The full target's
keys are the names `whatif --apply-fix` has always taken."""

_KEY = {
    ("minimum", "raise-caps"): "raise-caps-min",
    ("minimum", "recruit"): "recruit-min",
    ("full", "raise-caps"): "raise-caps",
    ("full", "recruit"): "recruit",
}


@dataclass(frozen=True)
class TargetFix:
    """One fix aimed at one target, with what it costs in people and in caps."""

    target: str
    """'minimum' (every paper at its required reviews) or 'full' (every paper fully reviewed)."""
    kind: str
    """'raise-caps' or 'recruit'."""
    people: int
    """Reviewers asked to take more (cap raises) or new reviewers to find (recruits)."""
    caps: int
    """Papers added to existing reviewers' caps in total (0 for recruits)."""
    coverage_before: int
    coverage_after: int
    demand: int
    """The target's total demand (required reviews, or all reviews)."""
    caps_fix: CapRaiseFix | None = None
    recruit_fix: RecruitFix | None = None

    @property
    def key(self) -> str:
        """The name a what-if takes this fix by (one of `FIX_KEYS`)."""
        return _KEY[(self.target, self.kind)]

    @property
    def reaches(self) -> bool:
        """Whether the target is met in full after this fix."""
        return self.coverage_after >= self.demand

    @property
    def offered(self) -> bool:
        """Whether the fix changes anything at all."""
        if self.caps_fix is not None:
            return bool(self.caps_fix.raises)
        return self.recruit_fix is not None and bool(self.recruit_fix.needs)

    def changes(self) -> tuple[str, ...]:
        """The fix in words, one change a line (as a what-if lists them)."""
        if self.caps_fix is not None:
            return tuple(
                f"raise cap of {r.reviewer} by {r.raise_by} ({r.cap} -> {r.new_cap})"
                for r in self.caps_fix.raises
            )
        assert self.recruit_fix is not None
        return tuple(f"add {n.recruits} reviewers in '{n.topic}'" for n in self.recruit_fix.needs)


@dataclass(frozen=True)
class FixMenu:
    """Every fix for both targets, for one session object."""

    session: Session
    fixes: tuple[TargetFix, ...]
    shortfall: dict[str, int]
    """Per target: its demand minus the best coverage the session allows as it is."""

    def get(self, key: str) -> TargetFix:
        """The fix of one key (`FIX_KEYS`); a KeyError names the keys there are."""
        for fix in self.fixes:
            if fix.key == key:
                return fix
        raise KeyError(f"fix {key!r} must be one of {', '.join(FIX_KEYS)}")

    def offered(self) -> tuple[TargetFix, ...]:
        """The fixes that change something, minimum target first."""
        return tuple(f for f in self.fixes if f.offered)


def cap_target_fix(target: str, fix: CapRaiseFix) -> TargetFix:
    """A cap-raise fix as one target's fix: people are the reviewers asked, caps the raise."""
    return TargetFix(
        target=target,
        kind="raise-caps",
        people=len(fix.raises),
        caps=fix.total,
        coverage_before=fix.coverage_before,
        coverage_after=fix.coverage_after,
        demand=fix.demand,
        caps_fix=fix,
    )


def recruit_target_fix(target: str, fix: RecruitFix) -> TargetFix:
    """A recruit fix as one target's fix: people are the recruits; no existing cap is raised."""
    return TargetFix(
        target=target,
        kind="recruit",
        people=fix.total,
        caps=0,
        coverage_before=fix.coverage_before,
        coverage_after=fix.coverage_after,
        demand=fix.demand,
        recruit_fix=fix,
    )


def target_fixes(cov: CoverageNetwork, target: str) -> tuple[TargetFix, TargetFix]:
    """The exact cap-raise and recruit fixes of one target, on that target's network."""
    if TARGET_TIERS.get(target) != cov.tier:
        raise ValueError(f"target {target!r} is computed on its own tier, not {cov.tier!r}")
    return cap_target_fix(target, raise_caps_fix(cov)), recruit_target_fix(
        target, recruit_fix(cov)
    )


def fix_menu(
    session: Session,
    *,
    network: PlanNetwork | None = None,
    full: tuple[CapRaiseFix, RecruitFix] | None = None,
) -> FixMenu:
    """Both fixes for both targets; `full` passes the full target's fixes when already known."""
    net = network if network is not None else build_network(session)
    fixes: list[TargetFix] = []
    shortfall: dict[str, int] = {}
    for target, tier in TARGET_TIERS.items():
        if target == "full" and full is not None:
            caps, recruits = full
            fixes += [cap_target_fix(target, caps), recruit_target_fix(target, recruits)]
            shortfall[target] = caps.demand - caps.coverage_before
            continue
        cov = coverage_network(session, tier, plan_net=net)
        shortfall[target] = cov.shortfall
        fixes += target_fixes(cov, target)
    return FixMenu(session=session, fixes=tuple(fixes), shortfall=shortfall)
