"""The Workspace: the one owner of an open session, its changes, its plan and its file.

The command line and the terminal app talk only to a Workspace. Every change is validated,
refused with a clear reason when a hard rule forbids it, recorded as an `Event`, and applied to
the current plan at once where it invalidates assignments (a withdrawn reviewer, a new conflict,
a block, a lowered cap), so that no plan on screen or on disk ever holds a forbidden pair.

Planning and history (stable names, used by the terminal app):

- `Workspace.solve(fresh=False, *, progress=None) -> PlanOutcome`: a re-plan keeps the pairs
  of the current revision's plan as a tier below floors (`plan --fresh` ignores them); every
  plan becomes a new `Revision` (`model.history`) whose parent is the current one.
- `Workspace.install_plan(outcome, planned) -> None`: the same, for a plan made elsewhere
  (a worker thread) from the session object `planned`.
- `Workspace.revisions -> list[Revision]`, `Workspace.history() -> list[HistoryEntry]`.
- `Workspace.undo(reason="") -> int`: back to the current revision's parent, plan *and* data
  (or, with changes made since the current revision, back to the current revision itself),
  recorded as an `undo` event; returns the revision number now current.
- `Workspace.diff(a=None, b=None) -> PlanDiff`: defaults to the last two revisions.
- `Workspace.notify_rows(since) -> list[NotifyRow]`: reviewers whose list changed from
  revision `since` to the current one.
- `Workspace.plan_of(number) -> Plan`, `Workspace.data_of(number) -> SessionData`.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from review_alloc.model import (
    Action,
    Conflict,
    Event,
    InputError,
    PairRule,
    Paper,
    Plan,
    Reviewer,
    ScoreTable,
    Session,
    load_session,
    save_session,
)
from review_alloc.model.history import (
    DataDelta,
    Revision,
    SessionData,
    assignment_table,
    rebase_root_scores,
    restore_data,
)
from review_alloc.model.plans import PlanFigures
from review_alloc.plan import PlanOutcome, conflict_pairs, make_plan
from review_alloc.plan.diff import NotifyRow, PlanDiff, diff_plans, notify_rows
from review_alloc.plan.figures import assignment_indices, plan_figures

_MARKS = ("plan", "undo")
"""Events after which the plan and the data agree again."""


@dataclass(frozen=True)
class HistoryEntry:
    """One revision as a history view shows it."""

    number: int
    parent: int | None
    created_at: datetime
    current: bool
    fresh: bool
    kept: int | None
    parent_pairs: int | None
    figures: PlanFigures
    changes: tuple[str, ...]
    """The changes made since the revision before, one line each."""

    def to_json(self) -> dict[str, object]:
        """Plain JSON form."""
        return {
            "number": self.number,
            "parent": self.parent,
            "created_at": self.created_at.isoformat(),
            "current": self.current,
            "fresh": self.fresh,
            "kept": self.kept,
            "parent_pairs": self.parent_pairs,
            "figures": self.figures.model_dump(),
            "changes": list(self.changes),
        }


class ChangeRefused(InputError):
    """A change that a hard rule forbids (a conflicted pin, an unknown id, a cap below pins)."""


class Workspace:
    """An open session with its file path, its unsaved-changes mark and its change operations."""

    def __init__(self, session: Session, path: Path | None = None) -> None:
        self.session = session
        self.path = path
        self.dirty = False
        # Rebuilt revision data by number; revisions never change, so this never goes stale.
        self._data: dict[int, SessionData] = {}

    @classmethod
    def open(cls, path: Path) -> Workspace:
        """Load a session file (InputError with file and field on bad input)."""
        return cls(load_session(path), path)

    def save(self, path: Path | None = None) -> Path:
        """Write the session atomically to `path` (or where it came from) and clear the mark."""
        target = path or self.path
        if target is None:
            raise InputError(["this session has no file yet; choose where to save it"])
        save_session(self.session, target)
        self.path = target
        self.dirty = False
        return target

    # -- planning -------------------------------------------------------------------------

    @property
    def noun(self) -> str:
        """'proposal' for a grant panel, 'paper' otherwise."""
        return "proposal" if self.session.kind == "panel" else "paper"

    def data_changed_since_plan(self) -> bool:
        """True when a change was recorded after the current plan was made or restored."""
        events = self.session.events
        return bool(events) and events[-1].action not in _MARKS

    def solve(
        self, fresh: bool = False, *, progress: Callable[[str], None] | None = None
    ) -> PlanOutcome:
        """Make the optimal, checked plan of the session as it is now and install it.

        It keeps as many pairs of the current revision's plan as coverage and floors allow,
        unless `fresh`.
        """
        snapshot = self.session
        if progress:
            progress("building the network and solving")
        outcome = make_plan(snapshot, fresh=fresh, earlier=self.earlier_plan())
        self.install_plan(outcome, snapshot)
        return outcome

    def earlier_plan(self) -> Plan | None:
        """The plan a re-plan keeps pairs of: the current revision's, else the session's."""
        if self.session.revision is not None:
            return self.plan_of(self.session.revision)
        return self.session.plan

    def install_plan(self, outcome: PlanOutcome, planned: Session) -> None:
        """Install a plan made from `planned` as a new revision; refused if the session changed."""
        if planned is not self.session:
            raise ChangeRefused(["the session changed while the plan was being made; plan again"])
        s = self.session
        plan = outcome.plan
        data = _data_of(s)
        parent = s.revision
        earlier = self.plan_of(parent) if parent is not None else None
        kept = None
        if earlier is not None:
            before = {(a.reviewer, a.paper) for a in earlier.assignments}
            kept = sum((a.reviewer, a.paper) in before for a in plan.assignments)
        number = max((r.number for r in s.revisions), default=0) + 1
        event_at = len(s.events)
        # The changes since the data last agreed with a plan; an undo that set it counts.
        marks = [k for k, e in enumerate(s.events) if e.action in _MARKS]
        if marks and s.events[marks[-1]].action == "undo":
            marks[-1] -= 1
        revision = Revision(
            number=number,
            parent=parent,
            created_at=plan.created_at,
            changes_from=marks[-1] + 1 if marks else 0,
            event=event_at,
            fresh=outcome.network.kept is None and self.earlier_plan() is not None,
            kept=kept,
            parent_pairs=len(earlier.assignments) if earlier is not None else None,
            figures=plan.figures,
            method=plan.method,
            checked=plan.checked,
            assignments=assignment_table(plan, data),
            data=DataDelta.between(
                self.data_of(parent) if parent is not None else None, data, s.scores
            ),
        )
        self._data[number] = data
        f = plan.figures
        detail = (
            f"revision {number}: coverage {f.coverage}/{f.demand}, required "
            f"{f.required_coverage}/{f.required_demand}, score {f.total_score:.2f}"
        )
        if kept is not None:
            detail += f", kept {kept}/{revision.parent_pairs} of revision {parent}"
        self._record(
            "plan",
            str(number),
            detail,
            plan=plan,
            revisions=[*s.revisions, revision],
            revision=number,
        )

    # -- history --------------------------------------------------------------------------

    @property
    def revisions(self) -> list[Revision]:
        """Every revision, oldest first."""
        return self.session.revisions

    def history(self) -> list[HistoryEntry]:
        """The revisions with the changes made before each, oldest first."""
        s = self.session
        return [
            HistoryEntry(
                number=r.number,
                parent=r.parent,
                created_at=r.created_at,
                current=r.number == s.revision,
                fresh=r.fresh,
                kept=r.kept,
                parent_pairs=r.parent_pairs,
                figures=r.figures,
                changes=tuple(e.describe() for e in s.events[r.changes_from : r.event]),
            )
            for r in s.revisions
        ]

    def _revision(self, number: int) -> Revision:
        for r in self.session.revisions:
            if r.number == number:
                return r
        known = ", ".join(str(r.number) for r in self.session.revisions) or "none yet"
        raise ChangeRefused([f"unknown revision {number} (revisions: {known})"])

    def data_of(self, number: int) -> SessionData:
        """The data revision `number` was planned from."""
        self._revision(number)
        if number not in self._data:
            try:
                self._data[number] = restore_data(
                    self.session.revisions, number, self.session.scores
                )
            except ValueError as error:
                raise ChangeRefused([f"revision {number}: {error}"]) from None
        return self._data[number]

    def plan_of(self, number: int) -> Plan:
        """The plan of revision `number`, exactly as it was made."""
        return self._revision(number).plan(self.data_of(number))

    def undo(self, reason: str = "") -> int:
        """Go back one step: its plan and the data it had.

        With changes made since the current revision, that step is the current revision
        itself (the changes are dropped, and stay listed as events); otherwise it is the
        revision the current one was planned from.
        """
        s = self.session
        if s.revision is None:
            raise ChangeRefused(["there is no plan in the history to go back from"])
        current = self._revision(s.revision)
        if self.data_changed_since_plan():
            target = current.number
        elif current.parent is None:
            raise ChangeRefused([f"revision {current.number} is the first; nothing to go back to"])
        else:
            target = current.parent
        data = self.data_of(target)
        self.session = s.model_copy(
            update={
                **data.fields(),
                "revisions": rebase_root_scores(s.revisions, s.scores, data.scores),
            }
        )
        self._record(
            "undo",
            str(target),
            f"back to revision {target}"
            + (f" from {current.number}" if target != current.number else ", changes dropped"),
            reason=reason,
            plan=self.plan_of(target),
            revision=target,
        )
        return target

    def diff(self, a: int | None = None, b: int | None = None) -> PlanDiff:
        """Pairs added and removed from revision `a` to `b` (default: the last two)."""
        numbers = [r.number for r in self.session.revisions]
        if not numbers:
            raise ChangeRefused(["there are no revisions yet; make a plan first"])
        if b is None:
            b = numbers[-1] if a is None or a != numbers[-1] else a
        if a is None:
            earlier = [n for n in numbers if n < b]
            if not earlier:
                raise ChangeRefused([f"revision {b} is the first; name two revisions to compare"])
            a = earlier[-1]
        return diff_plans(self.plan_of(a), self.plan_of(b), old_number=a, new_number=b)

    def notify_rows(self, since: int) -> list[NotifyRow]:
        """Reviewers whose list changed from revision `since` to the current revision."""
        current = self.session.revision
        if current is None:
            raise ChangeRefused(["the current plan is not a revision; make a plan first"])
        change = self.diff(since, current)
        return notify_rows(
            change,
            self.plan_of(since),
            self.plan_of(current),
            self.data_of(since),
            self.data_of(current),
        )

    # -- changes --------------------------------------------------------------------------

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

    def reinstate_paper(self, paper_id: str, reason: str = "") -> None:
        """Bring a withdrawn paper back."""
        i = self._paper(paper_id)
        if not self.session.papers[i].withdrawn:
            raise ChangeRefused([f"{self.noun} {paper_id} has not been withdrawn"])
        self._apply(
            "reinstate-paper", paper_id, "", reason, papers=self._with_paper(i, withdrawn=False)
        )

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

    def declare_conflict(self, reviewer_id: str, paper_id: str, reason: str = "declared") -> None:
        """Declare a conflict; any assignment of the pair leaves the plan at once."""
        self._reviewer(reviewer_id)
        self._paper(paper_id)
        if any(c.reviewer == reviewer_id and c.paper == paper_id for c in self.session.conflicts):
            raise ChangeRefused([f"({reviewer_id}, {paper_id}) is already a declared conflict"])
        self._apply(
            "declare-conflict",
            f"{reviewer_id}/{paper_id}",
            "",
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

    def pin(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Pin a pair so every later plan keeps it; refused where a hard rule forbids it."""
        j, i = self._reviewer(reviewer_id), self._paper(paper_id)
        s = self.session
        pair = f"({reviewer_id}, {paper_id})"
        if any(p.reviewer == reviewer_id and p.paper == paper_id for p in s.pins):
            raise ChangeRefused([f"{pair} is already pinned"])
        reasons = conflict_pairs(s).reason_of()
        if (j, i) in reasons:
            raise ChangeRefused([f"{pair} is a conflict of interest ({reasons[(j, i)]})"])
        if any(b.reviewer == reviewer_id and b.paper == paper_id for b in s.blocks):
            raise ChangeRefused([f"{pair} is blocked; unblock it first"])
        if s.reviewers[j].withdrawn:
            raise ChangeRefused([f"reviewer {reviewer_id} has withdrawn"])
        if s.papers[i].withdrawn:
            raise ChangeRefused([f"{self.noun} {paper_id} has been withdrawn"])
        pins_r = sum(p.reviewer == reviewer_id for p in s.pins) + 1
        if pins_r > s.reviewer_cap(j):
            raise ChangeRefused(
                [
                    f"{pair}: reviewer {reviewer_id} would have {pins_r} pins, above cap "
                    f"{s.reviewer_cap(j)}"
                ]
            )
        pins_p = sum(p.paper == paper_id for p in s.pins) + 1
        if pins_p > s.paper_reviews(i):
            raise ChangeRefused(
                [
                    f"{pair}: {self.noun} {paper_id} would have {pins_p} pins but wants only "
                    f"{s.paper_reviews(i)} reviews"
                ]
            )
        self._apply(
            "pin",
            f"{reviewer_id}/{paper_id}",
            "",
            reason,
            pins=[*s.pins, PairRule(reviewer=reviewer_id, paper=paper_id, reason=reason)],
        )

    def unpin(self, reviewer_id: str, paper_id: str, reason: str = "") -> None:
        """Release a pin (the pair may stay in the plan; it is no longer forced)."""
        rest = [
            p for p in self.session.pins if not (p.reviewer == reviewer_id and p.paper == paper_id)
        ]
        if len(rest) == len(self.session.pins):
            raise ChangeRefused([f"({reviewer_id}, {paper_id}) is not pinned"])
        self._apply("unpin", f"{reviewer_id}/{paper_id}", "", reason, pins=rest)

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

    # -- internals ------------------------------------------------------------------------

    def _reviewer(self, reviewer_id: str) -> int:
        index = self.session.reviewer_index()
        if reviewer_id not in index:
            raise ChangeRefused([f"unknown reviewer {reviewer_id!r}"])
        return index[reviewer_id]

    def _paper(self, paper_id: str) -> int:
        index = self.session.paper_index()
        if paper_id not in index:
            raise ChangeRefused([f"unknown {self.noun} {paper_id!r}"])
        return index[paper_id]

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

    def _with_reviewer(self, j: int, **changes: object) -> list[Reviewer]:
        reviewers = list(self.session.reviewers)
        reviewers[j] = reviewers[j].model_copy(update=changes)
        return reviewers

    def _with_paper(self, i: int, **changes: object) -> list[Paper]:
        papers = list(self.session.papers)
        papers[i] = papers[i].model_copy(update=changes)
        return papers

    def _apply(
        self, action: Action, subject: str, detail: str, reason: str, **fields: object
    ) -> None:
        """Validate the changed session as a whole, prune the plan, record the event."""
        candidate = self.session.model_copy(update=fields)
        problems = candidate.validation_problems()
        if problems:
            raise ChangeRefused(problems)
        if "scores" in fields:
            # The first revision's scores are kept relative to the session's: retake them.
            candidate = candidate.model_copy(
                update={
                    "revisions": rebase_root_scores(
                        candidate.revisions, self.session.scores, candidate.scores
                    )
                }
            )
        self.session = candidate
        self._record(action, subject, detail, reason=reason, plan=self._pruned_plan())

    def _record(
        self,
        action: Action,
        subject: str,
        detail: str,
        *,
        reason: str = "",
        plan: Plan | None = None,
        **fields: object,
    ) -> None:
        event = Event(
            at=datetime.now(UTC), action=action, subject=subject, detail=detail, reason=reason
        )
        self.session = self.session.model_copy(
            update={"events": [*self.session.events, event], "plan": plan, **fields}
        )
        self.dirty = True

    def _pruned_plan(self) -> Plan | None:
        """The current plan without the assignments the session now forbids."""
        s = self.session
        plan = s.plan
        if plan is None or not plan.assignments:
            return plan
        reviewer, paper, score = assignment_indices(s, plan.assignments)
        keep = np.ones(len(reviewer), dtype=bool)
        gone_r = np.array([r.withdrawn for r in s.reviewers], dtype=bool)
        gone_p = np.array([p.withdrawn for p in s.papers], dtype=bool)
        keep &= ~gone_r[reviewer] & ~gone_p[paper]
        n_p = max(len(s.papers), 1)
        keys = reviewer * n_p + paper
        conflicts = conflict_pairs(s)
        banned = conflicts.keys(n_p)
        if s.blocks:
            rid, pid = s.reviewer_index(), s.paper_index()
            blocked = np.array([rid[b.reviewer] * n_p + pid[b.paper] for b in s.blocks])
            banned = np.union1d(banned, blocked)
        keep &= ~np.isin(keys, banned)
        # Over a lowered cap or review target: keep the strongest pairs, pins first.
        pinned = {(p.reviewer, p.paper) for p in s.pins}
        strength = score + np.array(
            [1e9 if (a.reviewer, a.paper) in pinned else 0.0 for a in plan.assignments]
        )
        cap, reviews = s.reviewer_cap_array(), s.paper_reviews_array()
        for owner, limit in ((reviewer, cap), (paper, reviews)):
            order = np.lexsort((-strength, owner))
            rank = np.zeros(len(owner), dtype=np.int64)
            running: dict[int, int] = {}
            for k in order:
                if keep[k]:
                    rank[k] = running.get(int(owner[k]), 0)
                    running[int(owner[k])] = rank[k] + 1
            keep &= rank < limit[owner]
        if keep.all():
            return plan
        kept = [a for a, ok in zip(plan.assignments, keep, strict=True) if ok]
        return plan.model_copy(
            update={
                "assignments": kept,
                "figures": plan_figures(s, reviewer[keep], paper[keep], score[keep]),
                "checked": False,
                "method": plan.method
                + " (edited since: forbidden pairs removed; plan again for the optimum)",
            }
        )


def _data_of(session: Session) -> SessionData:
    """The session's changeable data, sharing its lists (they are replaced, never edited)."""
    return SessionData(
        policy=session.policy,
        papers=session.papers,
        reviewers=session.reviewers,
        conflicts=session.conflicts,
        pins=session.pins,
        blocks=session.blocks,
        scores=session.scores,
    )
