"""The state every part of the Workspace shares: the open session, its file, and the event log.

Every change is validated as a whole, recorded as one `Event`, and applied to the current plan
at once: pairs the rules now forbid leave it, and the plan is marked stale (not checked) until
the next plan, so that no plan on screen or on disk ever holds a forbidden pair.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import numpy as np
from pydantic import ValidationError

from review_alloc.model import (
    Action,
    Event,
    InputError,
    Paper,
    Plan,
    Reviewer,
    ScoreTable,
    Session,
    Signals,
)
from review_alloc.model.history import SessionData, rebase_root_scores
from review_alloc.model.signals import SetAsideRow
from review_alloc.plan.figures import assignment_indices, plan_figures
from review_alloc.plan.rules import PairRules

if TYPE_CHECKING:
    from review_alloc.plan.solve import PlanOutcome

MARKS = ("plan", "undo", "redo")
"""Events after which the plan and the data agree again."""

STALE_NOTE = " (stale: the data changed since it was made; plan again)"
"""Appended to a plan's method when a change leaves it standing but no longer checked."""


class ChangeRefused(InputError):
    """A change that a hard rule forbids (a conflicted pin, an unknown id, a cap below pins)."""


@dataclass(frozen=True)
class Step:
    """One change, plan or undo made through the Workspace since its last save, as called."""

    name: str
    args: tuple[Any, ...]
    kwargs: dict[str, Any]


F = TypeVar("F", bound=Callable[..., Any])


def redoable(method: F) -> F:
    """Note a successful call in the workspace's unsaved steps (the outermost call only), so
    that the same steps can be made again on a newer copy of the file."""

    @functools.wraps(method)
    def run(self: WorkspaceBase, *args: Any, **kwargs: Any) -> Any:
        self._nesting += 1
        try:
            result = method(self, *args, **kwargs)
        finally:
            self._nesting -= 1
        if self._nesting == 0:
            self.unsaved.append(Step(method.__name__, args, kwargs))
        return result

    return run  # type: ignore[return-value]


class WorkspaceBase:
    """An open session with its file path and its unsaved-changes mark."""

    def __init__(self, session: Session, path: Path | None = None) -> None:
        self.session = session
        self.path = path
        self.dirty = False
        # Rebuilt revision data by number; revisions never change, so this never goes stale.
        self._data: dict[int, SessionData] = {}
        self.last_outcome: PlanOutcome | None = None
        """The latest plan's outcome: its flow and potentials warm-start the next solve."""
        self.disk_identity: tuple[int, int, int] | None = None
        """The file as this workspace last read or wrote it (see `files.file_identity`)."""
        self.plan_problems: list[str] = []
        """Pairs of the plan as stored in the file that the rules forbid (found when opened);
        they are not shown and the plan is stale until the next plan."""
        self.unsaved: list[Step] = []
        """The changes, plans and undos made since the file was read or written, in order."""
        self._nesting = 0
        self._rules: PairRules | None = None

    def rules(self) -> PairRules:
        """The rules of the session as it is now, keeping what the last ones derived from the
        very same lists (the conflicts of a large venue take a fraction of a second, and every
        change and screen asks for them)."""
        last = self._rules
        if last is not None and last.session is self.session:
            return last
        self._rules = PairRules.renewed(self.session, last)
        return self._rules

    @property
    def noun(self) -> str:
        """'proposal' for a grant panel, 'paper' otherwise."""
        return self.session.noun

    def data_changed_since_plan(self) -> bool:
        """True when a change was recorded after the current plan was made or restored."""
        events = self.session.events
        return bool(events) and events[-1].action not in MARKS

    def plan_is_current(self) -> bool:
        """True when there is a plan, no change was recorded after it, and it kept every rule
        when the file was opened."""
        return (
            self.session.plan is not None
            and not self.data_changed_since_plan()
            and not self.plan_problems
        )

    def refuse_broken_plan(self) -> None:
        """Raise, naming the first offending pairs, when the stored plan broke a rule."""
        if self.plan_problems:
            shown = self.plan_problems[:10]
            more = len(self.plan_problems) - len(shown)
            raise InputError(
                [
                    *shown,
                    *([f"... and {more} more"] if more else []),
                    "the stored plan breaks the session's rules (the file was changed after the "
                    "plan was made); plan again before exporting it",
                ]
            )

    # -- ids ------------------------------------------------------------------------------

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

    # -- recording ------------------------------------------------------------------------

    def _apply(
        self, action: Action, subject: str, detail: str, reason: str, **fields: object
    ) -> None:
        """Validate the changed session as a whole, prune the plan, record the event."""
        candidate = self.session.model_copy(update=fields)
        given = _given_with_new_rows(self.session, candidate) if "scores" in fields else None
        if given is not None:
            candidate = candidate.model_copy(update={"signals": given})
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
        signals = self.session.signals
        if action not in ("undo", "redo") and signals is not None and signals.set_aside:
            # Any other change ends the chance to redo, and with it the rows kept for one.
            self.session = self.session.model_copy(
                update={"signals": signals.model_copy(update={"set_aside": []})}
            )
        self.dirty = True

    def _recheck_stored_plan(self) -> None:
        """Hold a plan read from a file to the rules as they are: a pair they forbid (a conflict,
        block, withdrawal or lower cap written into the file after the plan was made) leaves
        it, is listed in `plan_problems`, and the plan is stale until the next plan."""
        s = self.session
        plan = s.plan
        if plan is None or not plan.assignments:
            return
        rules = self.rules()
        reviewer, paper, score = assignment_indices(s, plan.assignments)
        keep = rules.plan_keep(reviewer, paper, score, self._pinned(plan))
        if keep.all():
            return
        for k in np.flatnonzero(~keep).tolist():
            j, i = int(reviewer[k]), int(paper[k])
            why = rules.why_not(j, i) or "over a cap, a paper's reviews or the institution limit"
            self.plan_problems.append(
                f"({s.reviewers[j].id}, {s.papers[i].id}) is in the stored plan but {why}"
            )
        self.session = s.model_copy(update={"plan": self._stale(plan, keep)})

    def _pinned(self, plan: Plan) -> np.ndarray:
        pinned = {(p.reviewer, p.paper) for p in self.session.pins}
        return np.fromiter(
            ((a.reviewer, a.paper) in pinned for a in plan.assignments),
            dtype=bool,
            count=len(plan.assignments),
        )

    def _pruned_plan(self) -> Plan | None:
        """The current plan without the pairs the rules now forbid, marked stale (unchecked)."""
        s = self.session
        plan = s.plan
        if plan is None:
            return None
        if not plan.assignments:
            return self._stale(plan, np.zeros(0, dtype=bool))
        reviewer, paper, score = assignment_indices(s, plan.assignments)
        return self._stale(plan, self.rules().plan_keep(reviewer, paper, score, self._pinned(plan)))

    def _stale(self, plan: Plan, keep: np.ndarray) -> Plan:
        """The plan with only the `keep` pairs, its figures recomputed, marked not checked."""
        s = self.session
        method = plan.method if plan.method.endswith(STALE_NOTE) else plan.method + STALE_NOTE
        if not plan.assignments:
            return plan.model_copy(update={"checked": False, "method": method})
        reviewer, paper, score = assignment_indices(s, plan.assignments)
        kept = (
            plan.assignments
            if keep.all()
            else [a for a, ok in zip(plan.assignments, keep, strict=True) if ok]
        )
        return plan.model_copy(
            update={
                "assignments": kept,
                "figures": plan_figures(s, reviewer[keep], paper[keep], score[keep]),
                "checked": False,
                "method": method,
            }
        )

    # -- copies of entity lists -----------------------------------------------------------

    def _with_reviewer(self, j: int, **changes: object) -> list[Reviewer]:
        reviewers = list(self.session.reviewers)
        reviewers[j] = _validated(reviewers[j], f"reviewer {reviewers[j].id}", changes)
        return reviewers

    def _with_paper(self, i: int, **changes: object) -> list[Paper]:
        papers = list(self.session.papers)
        papers[i] = _validated(papers[i], f"{self.noun} {papers[i].id}", changes)
        return papers


E = TypeVar("E", Reviewer, Paper)


def _validated(entity: E, who: str, changes: dict[str, object]) -> E:
    """The entity with `changes`, validated like a loaded one (bounds, text rules), so that a
    change can never save a file that would not load again."""
    try:
        return type(entity).model_validate({**entity.model_dump(), **changes})
    except ValidationError as error:
        raise ChangeRefused(
            [
                f"{who}: {'.'.join(str(x) for x in e['loc'])}: {e['msg']}"
                for e in error.errors(include_url=False)
            ]
        ) from None


def data_of(session: Session) -> SessionData:
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


DATA_FIELDS = ("policy", "papers", "reviewers", "conflicts", "pins", "blocks", "scores")
"""The session fields a change may replace; plans, events and revisions are the record."""


def same_data(a: Session, b: Session) -> bool:
    """Whether two session objects hold the very same data lists (so one plan fits both)."""
    return all(getattr(a, name) is getattr(b, name) for name in DATA_FIELDS)


def _given_with_new_rows(before: Session, after: Session) -> Signals | None:
    """The signals with the score rows of reviewers and papers new in `after` added to the
    given expertise, when the session's scores come from a recipe (it has signals); None when
    nothing changes.

    Scores typed in with a new reviewer or paper are the chair's given expertise, like the
    scores file's: kept only in the score table, the next `score` would make the table anew
    from the signals without them.
    """
    signals = before.signals
    if signals is None:
        # Without signals the score table itself is the given expertise (`session_signals`).
        return None
    table = after.scores
    new = (table.reviewer >= len(before.reviewers)) | (table.paper >= len(before.papers))
    if not new.any():
        return None
    given = signals.expertise
    expertise = ScoreTable.from_arrays(
        np.concatenate([given.reviewer, table.reviewer[new]]),
        np.concatenate([given.paper, table.paper[new]]),
        np.concatenate([given.value, table.value[new]]),
    )
    return signals.model_copy(update={"expertise": expertise})


def signals_between(before: Session, after: Session) -> Signals | None:
    """`after`'s signals when an undo or redo changed the lists from `before`'s: rows of
    reviewers or papers the lists no longer hold are set aside by id, and rows set aside
    earlier whose reviewer and paper are back return at their new positions."""
    signals = before.signals
    if signals is None:
        return None
    old_reviewers = [r.id for r in before.reviewers]
    old_papers = [p.id for p in before.papers]
    reviewer_at = after.reviewer_index()
    paper_at = after.paper_index()
    # Positions of the old lists in the new ones (-1: gone); ids are unique within a list.
    reviewer_map = np.array([reviewer_at.get(i, -1) for i in old_reviewers] or [0], np.int64)
    paper_map = np.array([paper_at.get(i, -1) for i in old_papers] or [0], np.int64)
    set_aside = list(signals.set_aside)
    tables: dict[str, ScoreTable] = {}
    for name in ("expertise", "bids"):
        table: ScoreTable = getattr(signals, name)
        reviewer = reviewer_map[table.reviewer] if len(table) else table.reviewer
        paper = paper_map[table.paper] if len(table) else table.paper
        keep = (reviewer >= 0) & (paper >= 0)
        for r, p, v in zip(
            table.reviewer[~keep].tolist(), table.paper[~keep].tolist(),
            table.value[~keep].tolist(), strict=True,
        ):
            set_aside.append(
                SetAsideRow(table=name, reviewer=old_reviewers[r], paper=old_papers[p], value=v)
            )
        kept = set((reviewer[keep].astype(np.int64) << 32 | paper[keep]).tolist())
        back = [
            row for row in set_aside
            if row.table == name and row.reviewer in reviewer_at and row.paper in paper_at
            # A hand-edited file may set aside a pair the table holds: the table's row wins.
            and (reviewer_at[row.reviewer] << 32 | paper_at[row.paper]) not in kept
        ]
        back_reviewer = np.array([reviewer_at[row.reviewer] for row in back], np.int64)
        back_paper = np.array([paper_at[row.paper] for row in back], np.int64)
        back_value = np.array([row.value for row in back], np.float64)
        tables[name] = ScoreTable.from_arrays(
            np.concatenate([reviewer[keep].astype(np.int64), back_reviewer]),
            np.concatenate([paper[keep].astype(np.int64), back_paper]),
            np.concatenate([table.value[keep], back_value]),
        )
    remaining = [
        row for row in set_aside if row.reviewer not in reviewer_at or row.paper not in paper_at
    ]
    return signals.model_copy(update={**tables, "set_aside": remaining})
