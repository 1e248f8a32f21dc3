"""The record of an open session: revisions, their data and plans, undo, diffs and notices."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from review_alloc.model import Action, Plan
from review_alloc.model.history import Revision, SessionData, rebase_root_scores, restore_data
from review_alloc.model.plans import PlanFigures
from review_alloc.plan.diff import NotifyRow, PlanDiff, diff_plans, notify_rows
from review_alloc.workspace.base import ChangeRefused, WorkspaceBase, redoable, signals_between


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




class HistoryMixin(WorkspaceBase):
    """Revisions, undo, diffs and notices of a Workspace."""


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

    @redoable
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
        self._go_to(
            target,
            "undo",
            f"back to revision {target}"
            + (f" from {current.number}" if target != current.number else ", changes dropped"),
            reason,
        )
        return target

    def redo_target(self) -> int | None:
        """The revision `redo` would go forward to, or None when there is nothing to redo."""
        try:
            return self._redo_target()
        except ChangeRefused:
            return None

    @redoable
    def redo(self, reason: str = "") -> int:
        """Go forward again to the revision the last undo left: its plan and its data.

        Undos and redos pair off like a stack, so repeated redos retrace repeated undos. Any
        other change or plan after the undo ends the chance to redo it, and an undo that only
        dropped unplanned changes has no revision to go forward to (its changes stay listed in
        History)."""
        target = self._redo_target()
        current = self.session.revision
        self._go_to(target, "redo", f"forward to revision {target} from {current}", reason)
        return target

    def _redo_target(self) -> int:
        events = self.session.events
        pending = 0
        for k in range(len(events) - 1, -1, -1):
            event = events[k]
            if event.action == "redo":
                pending += 1
            elif event.action != "undo":
                break
            elif pending:
                pending -= 1
            else:
                before = self._current_before(k)
                if before is None or before == int(event.subject):
                    raise ChangeRefused(
                        [
                            f"the last undo dropped the changes made since revision "
                            f"{event.subject}; there is no revision to go forward to (the "
                            "changes are listed in History)"
                        ]
                    )
                return before
        raise ChangeRefused(["nothing to redo: no undo since the last change or plan"])

    def _current_before(self, k: int) -> int | None:
        """The revision that was current just before event `k`."""
        events = self.session.events
        for m in range(k - 1, -1, -1):
            action = events[m].action
            if action in ("undo", "redo"):
                return int(events[m].subject)
            if action == "plan":
                made = [r.number for r in self.session.revisions if r.event == m]
                return made[0] if made else None
        return None

    def _go_to(self, target: int, action: Action, detail: str, reason: str) -> None:
        """Make revision `target` current with its plan and data, recorded as one event."""
        s = self.session
        data = self.data_of(target)
        moved = s.model_copy(
            update={
                **data.fields(),
                "revisions": rebase_root_scores(s.revisions, s.scores, data.scores),
            }
        )
        self.session = moved.model_copy(update={"signals": signals_between(s, moved)})
        self.plan_problems = []
        self._record(
            action,
            str(target),
            detail,
            reason=reason,
            plan=self.plan_of(target),
            revision=target,
        )
        signals = self.session.signals
        if signals is not None and signals.set_aside and self.redo_target() is None:
            # An undo that only dropped unplanned changes has no redo to give rows back to.
            self.session = self.session.model_copy(
                update={"signals": signals.model_copy(update={"set_aside": []})}
            )

    def diff_from_parent(self, number: int) -> PlanDiff:
        """What revision `number` changed against the revision it was planned from."""
        parent = self._revision(number).parent
        if parent is None:
            return diff_plans(None, self.plan_of(number), new_number=number)
        return self.diff(parent, number)

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
        self.refuse_broken_plan()
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

