"""Changes to the open session: withdrawals, additions, limits, conflicts, pins and blocks.

Each is refused with `ChangeRefused` when a hard rule forbids it (the reasons come from the
planner's one rule module, `plan.rules`, so a refused pin reads as the planner would put it),
and otherwise recorded as one event.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from review_alloc.model import (
    Action,
    Conflict,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.workspace.base import DATA_FIELDS, ChangeRefused, WorkspaceBase, redoable


class ChangesMixin(WorkspaceBase):
    """The change operations of a Workspace."""

    @redoable
    def withdraw_reviewer(self, reviewer_id: str, reason: str = "") -> None:
        """Withdraw a reviewer; their assignments leave the plan at once."""
        j = self._reviewer(reviewer_id)
        if self.session.reviewers[j].withdrawn:
            raise ChangeRefused([f"reviewer {reviewer_id} has already withdrawn"])
        pins = [p for p in self.session.pins if p.reviewer == reviewer_id]
        self._apply(
            "withdraw-reviewer",
            reviewer_id,
            f"{len(pins)} pins released" if pins else "",
            reason,
            reviewers=self._with_reviewer(j, withdrawn=True),
            pins=[p for p in self.session.pins if p.reviewer != reviewer_id],
        )

    @redoable
    def reinstate_reviewer(self, reviewer_id: str, reason: str = "") -> None:
        """Bring a withdrawn reviewer back."""
        j = self._reviewer(reviewer_id)
        if not self.session.reviewers[j].withdrawn:
            raise ChangeRefused([f"reviewer {reviewer_id} has not withdrawn"])
        self._apply(
            "reinstate-reviewer",
            reviewer_id,
            "",
            reason,
            reviewers=self._with_reviewer(j, withdrawn=False),
        )

    @redoable
    def withdraw_paper(self, paper_id: str, reason: str = "") -> None:
        """Withdraw a paper; its reviews leave the plan at once."""
        i = self._paper(paper_id)
        if self.session.papers[i].withdrawn:
            raise ChangeRefused([f"{self.noun} {paper_id} has already been withdrawn"])
        self._apply(
            "withdraw-paper",
            paper_id,
            "",
            reason,
            papers=self._with_paper(i, withdrawn=True),
            pins=[p for p in self.session.pins if p.paper != paper_id],
        )

    @redoable
    def reinstate_paper(self, paper_id: str, reason: str = "") -> None:
        """Bring a withdrawn paper back."""
        i = self._paper(paper_id)
        if not self.session.papers[i].withdrawn:
            raise ChangeRefused([f"{self.noun} {paper_id} has not been withdrawn"])
        self._apply(
            "reinstate-paper", paper_id, "", reason, papers=self._with_paper(i, withdrawn=False)
        )

    @redoable
    def add_reviewer(
        self, reviewer: Reviewer, reason: str = "", *, scores: dict[str, float] | None = None
    ) -> None:
        """Add a new reviewer, with fit scores by paper id (ids in use are refused)."""
        if reviewer.id in self.session.reviewer_index():
            raise ChangeRefused([f"reviewer {reviewer.id} already exists"])
        self._check_limits(reviewer.cap, reviewer.floor, f"reviewer {reviewer.id}")
        j = len(self.session.reviewers)
        rows = [(j, self._paper(pid), value) for pid, value in (scores or {}).items()]
        self._apply(
            "add-reviewer",
            reviewer.id,
            reviewer.name + (f", {len(rows)} scores" if rows else ""),
            reason,
            reviewers=[*self.session.reviewers, reviewer],
            scores=self._scores_with(rows),
        )

    @redoable
    def add_paper(
        self, paper: Paper, reason: str = "", *, scores: dict[str, float] | None = None
    ) -> None:
        """Add a new paper, with fit scores by reviewer id (ids in use are refused)."""
        if paper.id in self.session.paper_index():
            raise ChangeRefused([f"{self.noun} {paper.id} already exists"])
        i = len(self.session.papers)
        rows = [(self._reviewer(rid), i, value) for rid, value in (scores or {}).items()]
        self._apply(
            "add-paper",
            paper.id,
            paper.title + (f", {len(rows)} scores" if rows else ""),
            reason,
            papers=[*self.session.papers, paper],
            scores=self._scores_with(rows),
        )

    def _scores_with(self, rows: list[tuple[int, int, float]]) -> ScoreTable:
        """The score table with rows for a new entity added (it has none yet)."""
        table = self.session.scores
        if not rows:
            return table
        for _, _, value in rows:
            if not np.isfinite(value) or value < 0:
                raise ChangeRefused([f"score {value!r}: a score must be a finite number >= 0"])
        return ScoreTable.from_arrays(
            np.concatenate([table.reviewer, np.array([r[0] for r in rows], dtype=np.int32)]),
            np.concatenate([table.paper, np.array([r[1] for r in rows], dtype=np.int32)]),
            np.concatenate([table.value, np.array([r[2] for r in rows], dtype=np.float64)]),
        )

    @redoable
    def set_reviewer(
        self,
        reviewer_id: str,
        *,
        cap: int | None = None,
        floor: int | None = None,
        reason: str = "",
    ) -> None:
        """Change a reviewer's cap or floor; a lowered cap drops their weakest reviews."""
        j = self._reviewer(reviewer_id)
        old = self.session.reviewers[j]
        new_cap = old.cap if cap is None else cap
        new_floor = old.floor if floor is None else floor
        self._check_limits(new_cap, new_floor, f"reviewer {reviewer_id}")
        effective_cap = new_cap if new_cap is not None else self.session.policy.cap
        pins = sum(p.reviewer == reviewer_id for p in self.session.pins)
        if pins > effective_cap:
            raise ChangeRefused(
                [f"reviewer {reviewer_id}: cap {effective_cap} is below their {pins} pins"]
            )
        reviewers = self._with_reviewer(j, cap=new_cap, floor=new_floor)
        detail = ", ".join(
            f"{name} {before} -> {after}"
            for name, before, after in (("cap", old.cap, new_cap), ("floor", old.floor, new_floor))
            if before != after
        )
        self._apply("set-reviewer", reviewer_id, detail, reason, reviewers=reviewers)

    @redoable
    def set_policy(self, changes: dict[str, object], reason: str = "") -> None:
        """Change policy fields (validated as a whole); recorded so that undo can restore them."""
        old = self.session.policy
        try:
            policy = Policy.model_validate({**old.model_dump(), **changes})
        except ValueError as error:
            raise ChangeRefused([f"policy: {error}"]) from None
        detail = ", ".join(
            f"{name} {getattr(old, name)!r} -> {getattr(policy, name)!r}"
            for name in changes
            if getattr(old, name) != getattr(policy, name)
        )
        if not detail:
            return
        self._apply("set-policy", "policy", detail, reason, policy=policy)

    @redoable
    def set_paper(
        self,
        paper_id: str,
        *,
        reviews: int | None = None,
        min_reviews: int | None = None,
        reason: str = "",
    ) -> None:
        """Change a paper's review targets; a lowered target drops its weakest reviews."""
        i = self._paper(paper_id)
        old = self.session.papers[i]
        new_reviews = old.reviews if reviews is None else reviews
        new_min = old.min_reviews if min_reviews is None else min_reviews
        if new_reviews is not None and new_reviews < 1:
            raise ChangeRefused([f"{self.noun} {paper_id}: reviews must be >= 1"])
        if new_min is not None and new_min < 0:
            raise ChangeRefused([f"{self.noun} {paper_id}: min_reviews must be >= 0"])
        effective = new_reviews if new_reviews is not None else self.session.policy.reviews
        if new_min is not None and new_min > effective:
            raise ChangeRefused(
                [f"{self.noun} {paper_id}: min_reviews {new_min} exceeds reviews {effective}"]
            )
        pins = sum(p.paper == paper_id for p in self.session.pins)
        if pins > effective:
            raise ChangeRefused(
                [f"{self.noun} {paper_id}: {effective} reviews is below its {pins} pins"]
            )
        papers = self._with_paper(i, reviews=new_reviews, min_reviews=new_min)
        detail = ", ".join(
            f"{name} {before} -> {after}"
            for name, before, after in (
                ("reviews", old.reviews, new_reviews),
                ("min_reviews", old.min_reviews, new_min),
            )
            if before != after
        )
        self._apply("set-paper", paper_id, detail, reason, papers=papers)

    @redoable
    def declare_conflict(self, reviewer_id: str, paper_id: str, reason: str = "declared") -> None:
        """Declare a conflict; any assignment of the pair leaves the plan at once."""
        self._reviewer(reviewer_id)
        self._paper(paper_id)
        if any(c.reviewer == reviewer_id and c.paper == paper_id for c in self.session.conflicts):
            raise ChangeRefused([f"({reviewer_id}, {paper_id}) is already a declared conflict"])
        pinned = any(p.reviewer == reviewer_id and p.paper == paper_id for p in self.session.pins)
        self._apply(
            "declare-conflict",
            f"{reviewer_id}/{paper_id}",
            # A conflict outranks a pin: the pin goes, and the record says so.
            "its pin released" if pinned else "",
            reason,
            conflicts=[
                *self.session.conflicts,
                Conflict(reviewer=reviewer_id, paper=paper_id, reason=reason or "declared"),
            ],
            pins=[
                p
                for p in self.session.pins
                if not (p.reviewer == reviewer_id and p.paper == paper_id)
            ],
        )

    @redoable
    def pin(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Pin a pair so every later plan keeps it; refused where any planner rule forbids it."""
        self._reviewer(reviewer_id)
        self._paper(paper_id)
        s = self.session
        pair = f"({reviewer_id}, {paper_id})"
        if any(p.reviewer == reviewer_id and p.paper == paper_id for p in s.pins):
            raise ChangeRefused([f"{pair} is already pinned"])
        pin = PairRule(reviewer=reviewer_id, paper=paper_id, reason=reason)
        # The planner's own pin rules, asked for the pins with and without this one: only
        # what the new pin adds is its refusal (older pins may break a rule changed since).
        rules = self.rules()
        before = set(rules.pin_problems(s.pins))
        added = [line for line in rules.pin_problems([*s.pins, pin]) if line not in before]
        if added:
            raise ChangeRefused(added)
        self._apply("pin", f"{reviewer_id}/{paper_id}", "", reason, pins=[*s.pins, pin])

    @redoable
    def unpin(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Release a pin (the pair may stay in the plan; it is no longer forced)."""
        rest = [
            p for p in self.session.pins if not (p.reviewer == reviewer_id and p.paper == paper_id)
        ]
        if len(rest) == len(self.session.pins):
            raise ChangeRefused([f"({reviewer_id}, {paper_id}) is not pinned"])
        self._apply("unpin", f"{reviewer_id}/{paper_id}", "", reason, pins=rest)

    @redoable
    def block(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Block a pair so no plan uses it; it leaves the current plan at once."""
        self._reviewer(reviewer_id)
        self._paper(paper_id)
        s = self.session
        pair = f"({reviewer_id}, {paper_id})"
        if any(p.reviewer == reviewer_id and p.paper == paper_id for p in s.pins):
            raise ChangeRefused([f"{pair} is pinned; unpin it before blocking it"])
        if any(b.reviewer == reviewer_id and b.paper == paper_id for b in s.blocks):
            raise ChangeRefused([f"{pair} is already blocked"])
        self._apply(
            "block",
            f"{reviewer_id}/{paper_id}",
            "",
            reason,
            blocks=[*s.blocks, PairRule(reviewer=reviewer_id, paper=paper_id, reason=reason)],
        )

    @redoable
    def unblock(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Allow a blocked pair again."""
        rest = [
            b
            for b in self.session.blocks
            if not (b.reviewer == reviewer_id and b.paper == paper_id)
        ]
        if len(rest) == len(self.session.blocks):
            raise ChangeRefused([f"({reviewer_id}, {paper_id}) is not blocked"])
        self._apply("unblock", f"{reviewer_id}/{paper_id}", "", reason, blocks=rest)

    def _check_limits(self, cap: int | None, floor: int | None, who: str) -> None:
        policy = self.session.policy
        if cap is not None and cap < 0:
            raise ChangeRefused([f"{who}: cap must be >= 0, not {cap}"])
        if floor is not None and floor < 0:
            raise ChangeRefused([f"{who}: floor must be >= 0, not {floor}"])
        eff_cap = policy.cap if cap is None else cap
        eff_floor = policy.floor if floor is None else floor
        if eff_floor > eff_cap:
            raise ChangeRefused([f"{who}: floor {eff_floor} exceeds cap {eff_cap}"])


    def _take_over(
        self,
        changed: Session,
        *,
        action: Action,
        subject: str,
        changes: Sequence[str],
        reason: str = "",
    ) -> None:
        """Take over the data of a changed copy (a fix, a what-if) as one recorded change.

        One event however many caps, reviewers or policy fields it touches, so that undo
        takes it back as one step.
        """
        base = self.session
        fields = {
            name: getattr(changed, name)
            for name in DATA_FIELDS
            if getattr(changed, name) is not getattr(base, name)
        }
        if not fields:
            raise ChangeRefused([f"{subject}: it changes nothing in the session"])
        detail = "; ".join(changes)
        self._apply(action, subject, detail, reason, **fields)
