"""What-if: apply changes (raised caps, recruits, an overload allowance) to a copy of a session.

Nothing here writes files: the caller decides whether the changed session is saved. A change
never lifts a conflict of interest or a block.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from review_alloc.model import Plan, Reviewer, Session
from review_alloc.plan.diff import PlanDiff, diff_plans
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.fixes import CapRaiseFix, RecruitFix
from review_alloc.plan.report import Gap, LoadIssue, find_gaps, load_issues
from review_alloc.plan.solve import PlanOutcome, make_plan

RECRUIT_PREFIX = "NEW-"
"""Ids of the placeholder reviewers a recruit fix adds start with this."""

RECRUIT_SCORE = 0.0
"""Score given to a recruit's pairs with their topic's papers: the fit is unknown until they bid."""


@dataclass(frozen=True)
class WhatIf:
    """A changed copy of a session with its new plan, beside the plan of the session as it is."""

    session: Session
    """The changed copy, carrying its new plan."""
    changes: tuple[str, ...]
    before: Plan
    after: Plan
    gaps_before: tuple[Gap, ...]
    gaps_after: tuple[Gap, ...]
    base: Session | None = None
    """The session object the copy was made from (a what-if of an older state is refused)."""
    outcome: PlanOutcome | None = None
    """The checked outcome of the changed copy's plan, so that accepting needs no new solve."""
    overloads: tuple[LoadIssue, ...] = ()
    """Reviewers above cap in the changed copy's plan."""
    underloads: tuple[LoadIssue, ...] = ()
    """Active reviewers below their floor in the changed copy's plan."""
    request: object = None
    """What the caller asked for, in its own terms (the Workspace keeps its change set here,
    so that an accepted what-if can be made again on a newer copy of the file)."""
    moves: PlanDiff | None = None
    """The pairs that move from the earlier plan (the one reviewers may have been sent) to the
    changed copy's plan, by reviewer: whom the chair must tell. None without an earlier plan:
    nobody has been told anything yet."""

    def to_tell(self) -> tuple[str, ...]:
        """Reviewers already in the session whose papers change (recruits are new people)."""
        if self.moves is None:
            return ()
        known = {r.id for r in self.base.reviewers} if self.base is not None else None
        return tuple(r for r in self.moves.by_reviewer if known is None or r in known)

    def recruits(self) -> tuple[str, ...]:
        """Reviewers the changed copy adds (placeholders until a real person is named)."""
        if self.base is None:
            return ()
        known = {r.id for r in self.base.reviewers}
        return tuple(r.id for r in self.session.reviewers if r.id not in known)


def raise_caps(session: Session, raises: Mapping[str, int], *, label: str = "raise cap") -> Session:
    """A copy with each named reviewer's cap raised by the given amount."""
    reviewer_at = session.reviewer_index()
    problems = [
        f"{label} {rid}={amount}: no reviewer has the id {rid!r}"
        for rid, amount in raises.items()
        if rid not in reviewer_at
    ]
    problems += [
        f"{label} {rid}={amount}: the raise must be a whole number >= 1"
        for rid, amount in raises.items()
        if amount < 1
    ]
    problems += [
        f"{label} {rid}={amount}: reviewer {rid} has withdrawn"
        for rid, amount in raises.items()
        if rid in reviewer_at and session.reviewers[reviewer_at[rid]].withdrawn
    ]
    if problems:
        raise PlanInputError(problems)
    reviewers = list(session.reviewers)
    for rid, amount in raises.items():
        j = reviewer_at[rid]
        reviewers[j] = reviewers[j].model_copy(update={"cap": session.reviewer_cap(j) + amount})
    return session.model_copy(update={"reviewers": reviewers, "plan": None})


def is_recruit_placeholder(reviewer: Reviewer) -> bool:
    """Whether a reviewer is a placeholder a recruit fix added ('recruit k for TOPIC')."""
    return reviewer.id.startswith(RECRUIT_PREFIX) and reviewer.name.startswith("recruit ")


def _slug(topic: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", topic.casefold()).strip("-") or "topic"


def add_recruits(
    session: Session, counts: Mapping[str, int], *, label: str = "add reviewers"
) -> Session:
    """A copy with new reviewers per topic: the policy's cap, no conflicts, eligible for the topic.

    Under `unscored = "exclude"` each recruit gets a score row for every paper of their topic
    (score `RECRUIT_SCORE`), so that the unscored rule does not leave them out.
    """
    known = {t for p in session.papers for t in p.topics} | {
        t for r in session.reviewers for t in r.topics
    }
    problems = [
        f"{label} {topic}={n}: no paper or reviewer has the topic {topic!r}"
        for topic, n in counts.items()
        if topic not in known
    ]
    problems += [
        f"{label} {topic}={n}: the number of reviewers must be a whole number >= 1"
        for topic, n in counts.items()
        if n < 1
    ]
    if problems:
        raise PlanInputError(problems)
    taken = set(session.reviewer_index())
    reviewers = list(session.reviewers)
    new_r: list[int] = []
    new_p: list[int] = []
    for topic, n in counts.items():
        papers = [i for i, p in enumerate(session.papers) if topic in p.topics and not p.withdrawn]
        k = 0
        for _ in range(n):
            k += 1
            while f"{RECRUIT_PREFIX}{_slug(topic)}-{k}" in taken:
                k += 1
            rid = f"{RECRUIT_PREFIX}{_slug(topic)}-{k}"
            taken.add(rid)
            reviewers.append(Reviewer(id=rid, name=f"recruit {k} for {topic}", topics=[topic]))
            new_r += [len(reviewers) - 1] * len(papers)
            new_p += papers
    scores = session.scores
    if session.policy.unscored == "exclude" and new_r:
        scores = scores.updated(
            np.array(new_r, dtype=np.int32),
            np.array(new_p, dtype=np.int32),
            np.full(len(new_r), RECRUIT_SCORE),
        )
    return session.model_copy(update={"reviewers": reviewers, "scores": scores, "plan": None})


def allow_overload(session: Session, allowance: int) -> Session:
    """A copy whose policy lets every reviewer go up to `allowance` papers above their cap."""
    if allowance < 0:
        raise PlanInputError([f"allow overload {allowance}: must be a whole number >= 0"])
    policy = session.policy.model_copy(update={"overload_allowance": allowance})
    return session.model_copy(update={"policy": policy, "plan": None})


def apply_cap_fix(session: Session, fix: CapRaiseFix) -> Session:
    """A copy with the cap raises of a computed fix."""
    return (
        raise_caps(session, {r.reviewer: r.raise_by for r in fix.raises})
        if fix.raises
        else (session.model_copy(update={"plan": None}))
    )


def apply_recruit_fix(session: Session, fix: RecruitFix) -> Session:
    """A copy with the recruits of a computed fix."""
    counts = {need.topic: need.recruits for need in fix.needs}
    return add_recruits(session, counts) if counts else session.model_copy(update={"plan": None})


def what_if(
    session: Session,
    changed: Session,
    changes: tuple[str, ...],
    *,
    before: Plan | None = None,
    earlier: Plan | None = None,
    warm: PlanOutcome | None = None,
) -> WhatIf:
    """Plan the session as it is (unless `before` is its current plan) and as changed.

    The changed copy is planned as a re-plan of `earlier` (the pairs a chair already sent
    keep their place where coverage allows) and carries its new plan.
    """
    if before is None:
        before = make_plan(session, earlier=earlier, fresh=earlier is None, warm=warm).plan
    outcome = make_plan(changed, earlier=earlier, fresh=earlier is None, warm=warm)
    planned = changed.model_copy(update={"plan": outcome.plan})
    over, under = load_issues(planned, outcome.plan)
    return WhatIf(
        session=planned,
        changes=changes,
        before=before,
        after=outcome.plan,
        gaps_before=tuple(find_gaps(session, before)),
        gaps_after=tuple(find_gaps(planned, outcome.plan)),
        base=session,
        outcome=outcome,
        overloads=tuple(over),
        underloads=tuple(under),
        moves=diff_plans(earlier, outcome.plan) if earlier is not None else None,
    )
