"""Plan history: each plan is a `Revision` that gives back its plan and the data it came from.

Storage is compact because a large venue has tens of thousands of assignments per revision:

- the assignments are a `ScoreTable` of reviewer and paper positions, stored like the
  session's scores (little-endian arrays, zlib-compressed, base64-encoded); its value column
  is all zeros, since each pair's score is read back from the revision's own score data;
- the data the plan was made from (policy, papers, reviewers, conflicts, pins, blocks, scores)
  is a `DataDelta` against the revision's `parent` (the first revision holds it whole): each
  list stores its new length and the positions whose entry changed, which suits lists that
  grow at the end and change in place, as papers and reviewers do; scores store the rows
  added or changed and the pairs removed.

The first (root) revision's scores are a delta against the session's *current* score table
rather than held whole, since a large venue has millions of score rows and they rarely change
after import; whoever changes `Session.scores` rebases the root (`rebase_root_scores`).

A revision's data is rebuilt by applying the deltas along its parent chain, from the root.
A hand-edited or damaged history is refused at load where a cheap check can tell
(`history_problems`: positions and lengths that do not fit), and a rebuild that still fails
raises `HistoryError`, an `InputError` whose lines name the revision, never an IndexError.
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass, replace
from datetime import datetime
from typing import Annotated, Generic, TypeVar

import numpy as np
from pydantic import Field, field_validator

from review_alloc.model.base import DocumentModel
from review_alloc.model.entities import Conflict, PairRule, Paper, Reviewer
from review_alloc.model.errors import InputError
from review_alloc.model.plans import Assignment, Plan, PlanDraw, PlanFairness, PlanFigures
from review_alloc.model.policy import Policy
from review_alloc.model.scores import ScoreTable

Item = TypeVar("Item", Paper, Reviewer, Conflict, PairRule)

_LIST_FIELDS = ("papers", "reviewers", "conflicts", "pins", "blocks")


class HistoryError(InputError, ValueError):
    """A revision's plan or data cannot be rebuilt from the stored history.

    An `InputError` (its lines name the revision and the part that is broken) and, for callers
    that catch the ValueError a rebuild raised before, a `ValueError` too.
    """


class ListDelta(DocumentModel, Generic[Item]):
    """A list as the one before it cut or grown to `length`, with the entries at `changed` new."""

    length: int = Field(ge=0)
    changed: list[tuple[Annotated[int, Field(ge=0)], Item]] = Field(default_factory=list)

    @classmethod
    def between(cls, old: list[Item], new: list[Item]) -> ListDelta[Item] | None:
        """The delta from `old` to `new`, or None when they are equal."""
        changed = [
            (k, item)
            for k, item in enumerate(new)
            if k >= len(old) or (item is not old[k] and item != old[k])
        ]
        if not changed and len(old) == len(new):
            return None
        return cls(length=len(new), changed=changed)

    def apply(self, old: list[Item]) -> list[Item]:
        """The list this delta describes, given the list it was taken against."""
        if any(k >= self.length for k, _ in self.changed):
            raise ValueError("a changed position lies beyond the list's length")
        if self.length > len(old) + len(self.changed):
            # Checked before the list is built: a damaged length must not allocate the memory.
            raise ValueError("the delta leaves a position of the list empty")
        out: list[Item | None] = [*old[: self.length], *[None] * max(self.length - len(old), 0)]
        for k, item in self.changed:
            out[k] = item
        if any(item is None for item in out):
            raise ValueError("the delta leaves a position of the list empty")
        return [item for item in out if item is not None]


class ScoreDelta(DocumentModel):
    """Score rows added or changed, and the pairs whose rows were removed (their value is 0)."""

    added: ScoreTable
    removed: ScoreTable

    @classmethod
    def between(cls, old: ScoreTable, new: ScoreTable) -> ScoreDelta | None:
        """The delta from `old` to `new`, or None when they hold the same rows."""
        if old == new:
            return None
        old_keys, new_keys = _keys(old), _keys(new)
        pos = np.searchsorted(old_keys, new_keys)
        pos_c = np.minimum(pos, max(len(old_keys) - 1, 0))
        same = (
            (old_keys[pos_c] == new_keys) & (old.value[pos_c] == new.value)
            if len(old_keys)
            else np.zeros(len(new_keys), dtype=bool)
        )
        gone = ~np.isin(old_keys, new_keys)
        return cls(
            added=ScoreTable.from_arrays(new.reviewer[~same], new.paper[~same], new.value[~same]),
            removed=ScoreTable.from_arrays(
                old.reviewer[gone], old.paper[gone], np.zeros(int(gone.sum()))
            ),
        )

    def apply(self, old: ScoreTable) -> ScoreTable:
        """The score table this delta describes, given the one it was taken against."""
        old_keys = _keys(old)
        drop = np.isin(old_keys, _keys(self.removed)) | np.isin(old_keys, _keys(self.added))
        return ScoreTable.from_arrays(
            np.concatenate([old.reviewer[~drop], self.added.reviewer]),
            np.concatenate([old.paper[~drop], self.added.paper]),
            np.concatenate([old.value[~drop], self.added.value]),
        )


def score_digest(table: ScoreTable) -> str:
    """A CRC-32 of a score table's rows, to tell that a root's base is the table it was."""
    crc = zlib.crc32(table.reviewer.astype("<i4").tobytes())
    crc = zlib.crc32(table.paper.astype("<i4").tobytes(), crc)
    crc = zlib.crc32(table.value.astype("<f8").tobytes(), crc)
    return f"{len(table)}:{crc:08x}"


def _keys(table: ScoreTable) -> np.ndarray:
    return (table.reviewer.astype(np.int64) << 32) | table.paper.astype(np.int64)


@dataclass(frozen=True)
class SessionData:
    """The data a chair changes: what undo brings back with a revision's plan."""

    policy: Policy
    papers: list[Paper]
    reviewers: list[Reviewer]
    conflicts: list[Conflict]
    pins: list[PairRule]
    blocks: list[PairRule]
    scores: ScoreTable

    def fields(self) -> dict[str, object]:
        """The data as `Session.model_copy(update=...)` fields."""
        return {
            "policy": self.policy,
            "papers": self.papers,
            "reviewers": self.reviewers,
            "conflicts": self.conflicts,
            "pins": self.pins,
            "blocks": self.blocks,
            "scores": self.scores,
        }


class DataDelta(DocumentModel):
    """How a revision's data differs from its parent's; a field left None did not change."""

    policy: Policy | None = None
    papers: ListDelta[Paper] | None = None
    reviewers: ListDelta[Reviewer] | None = None
    conflicts: ListDelta[Conflict] | None = None
    pins: ListDelta[PairRule] | None = None
    blocks: ListDelta[PairRule] | None = None
    scores: ScoreDelta | None = None
    scores_base: str | None = None
    """For a root: the digest of the score table its scores are taken against."""

    @classmethod
    def between(
        cls, old: SessionData | None, new: SessionData, current_scores: ScoreTable
    ) -> DataDelta:
        """The delta from `old` to `new`; with `old` None (a root) it holds `new` whole, but
        its scores against `current_scores`."""
        base = old or replace(_EMPTY, scores=current_scores)
        return cls(
            policy=new.policy if old is None or new.policy != old.policy else None,
            papers=ListDelta[Paper].between(base.papers, new.papers),
            reviewers=ListDelta[Reviewer].between(base.reviewers, new.reviewers),
            conflicts=ListDelta[Conflict].between(base.conflicts, new.conflicts),
            pins=ListDelta[PairRule].between(base.pins, new.pins),
            blocks=ListDelta[PairRule].between(base.blocks, new.blocks),
            scores=ScoreDelta.between(base.scores, new.scores),
            scores_base=score_digest(current_scores) if old is None else None,
        )

    def apply(self, old: SessionData | None, current_scores: ScoreTable) -> SessionData:
        """The data this delta describes, given the parent's (None for a root revision, whose
        scores are taken against `current_scores`)."""
        if old is None and self.policy is None:
            raise ValueError("the first revision must hold its policy")
        if old is None and self.scores_base != score_digest(current_scores):
            raise ValueError(
                "the session's scores were changed outside the workspace; the first revision's "
                "scores cannot be rebuilt"
            )
        base = old or replace(_EMPTY, scores=current_scores)
        return SessionData(
            policy=self.policy if self.policy is not None else base.policy,
            papers=self.papers.apply(base.papers) if self.papers else base.papers,
            reviewers=self.reviewers.apply(base.reviewers) if self.reviewers else base.reviewers,
            conflicts=self.conflicts.apply(base.conflicts) if self.conflicts else base.conflicts,
            pins=self.pins.apply(base.pins) if self.pins else base.pins,
            blocks=self.blocks.apply(base.blocks) if self.blocks else base.blocks,
            scores=self.scores.apply(base.scores) if self.scores else base.scores,
        )


_EMPTY = SessionData(
    policy=Policy(),
    papers=[],
    reviewers=[],
    conflicts=[],
    pins=[],
    blocks=[],
    scores=ScoreTable.empty(),
)


class Revision(DocumentModel):
    """One plan in the history, with the changes before it, its figures and its data."""

    number: int = Field(ge=1)
    parent: int | None = None
    """The revision this one re-planned from (its data delta and kept pairs refer to it)."""
    created_at: datetime
    changes_from: int = Field(ge=0)
    """`Session.events[changes_from:event]` are the changes made since the revision before."""
    event: int = Field(ge=0)
    """Position of this revision's own `plan` event in `Session.events`."""
    fresh: bool = False
    """Made ignoring the earlier plan (`plan --fresh`)."""
    kept: int | None = None
    """Pairs of the parent's plan this plan kept (None without a parent)."""
    parent_pairs: int | None = None
    figures: PlanFigures
    method: str
    checked: bool
    assignments: ScoreTable
    """Reviewer and paper position of each assigned pair (scores come from the data; the value
    column is 1 for the paper's lead)."""
    bottleneck: float | None = None
    bound: dict[str, float] | None = None
    loads_before_balance: list[int] | None = None
    draw: PlanDraw | None = None
    """How a randomised plan was drawn (positions refer to this revision's data)."""
    fairness: PlanFairness | None = None
    data: DataDelta

    @field_validator("created_at")
    @classmethod
    def _aware(cls, value: datetime) -> datetime:
        if value.tzinfo is None:
            raise ValueError("the time must carry a time zone")
        return value

    def plan(self, data: SessionData) -> Plan:
        """The revision's plan, given its own data (see `restore_data`); HistoryError when the
        stored assignments do not fit that data."""
        problems = _position_problems(
            "assignments", self.assignments, len(data.reviewers), len(data.papers)
        )
        if problems:
            raise HistoryError([f"revision {self.number}: {line}" for line in problems])
        reviewer = self.assignments.reviewer.astype(np.int64)
        paper = self.assignments.paper.astype(np.int64)
        value = pair_scores(data.scores, reviewer, paper)
        lead = self.assignments.value > 0
        order = np.lexsort((reviewer, paper))
        assignments = [
            Assignment(
                paper=data.papers[i].id, reviewer=data.reviewers[j].id, score=float(s), lead=led
            )
            for j, i, s, led in zip(
                reviewer[order].tolist(),
                paper[order].tolist(),
                value[order].tolist(),
                lead[order].tolist(),
                strict=True,
            )
        ]
        return Plan(
            assignments=assignments,
            figures=self.figures,
            created_at=self.created_at,
            checked=self.checked,
            method=self.method,
            bottleneck=self.bottleneck,
            bound=self.bound,
            loads_before_balance=self.loads_before_balance,
            draw=self.draw,
            fairness=self.fairness,
        )


def restore_data(revisions: list[Revision], number: int, current_scores: ScoreTable) -> SessionData:
    """Rebuild the data of revision `number` from the deltas along its parent chain.

    Raises `HistoryError` naming the revision when the history cannot give it back.
    """
    position = {r.number: k for k, r in enumerate(revisions)}
    chain: list[int] = []
    at: int | None = number
    while at is not None:
        if at not in position:
            raise HistoryError([f"revision {at} is not in the history"])
        if len(chain) > len(position):
            raise HistoryError([f"revision {number}: the revision parents form a loop"])
        chain.append(position[at])
        at = revisions[position[at]].parent
    data: SessionData | None = None
    for k in reversed(chain):
        try:
            data = revisions[k].data.apply(data, current_scores)
        except ValueError as error:
            raise HistoryError([f"revisions.{k}.data: {error}"]) from None
        problems = _position_problems("scores", data.scores, len(data.reviewers), len(data.papers))
        if problems:
            raise HistoryError([f"revisions.{k}.data.{line}" for line in problems])
    if data is None:
        raise HistoryError([f"revision {number} is not in the history"])
    return data


def _position_problems(field: str, table: ScoreTable, reviewers: int, papers: int) -> list[str]:
    """Lines for rows of `table` whose reviewer or paper position lies outside the lists."""
    problems = []
    for column, count, noun in (
        (table.reviewer, reviewers, "reviewer"),
        (table.paper, papers, "paper"),
    ):
        if len(column) and int(column.max()) >= count:
            row = int(np.argmax(column >= count))
            problems.append(
                f"{field}: row {row}: {noun} position {int(column[row])} is out of range; "
                f"the revision has {count} {noun}s"
            )
    return problems


def history_problems(revisions: list[Revision]) -> list[str]:
    """Cheap structural checks of stored revisions, as `revisions.K...: message` lines.

    Follows each revision's list lengths from its parent (which must come earlier; the session
    checks that) and refuses positions that do not fit: a changed entry beyond its list, a new
    position left empty, an assignment or added score row naming a paper or reviewer the
    revision does not have, a first revision without its policy. Score digests are checked on
    rebuild.
    """
    problems: list[str] = []
    lengths: dict[int, dict[str, int]] = {}
    for k, revision in enumerate(revisions):
        data = revision.data
        if revision.parent is None:
            before = dict.fromkeys(_LIST_FIELDS, 0)
            if data.policy is None:
                problems.append(f"revisions.{k}.data.policy: the first revision must hold it")
        elif revision.parent in lengths:
            before = lengths[revision.parent]
        else:
            continue
        after = dict(before)
        for name in _LIST_FIELDS:
            delta: ListDelta | None = getattr(data, name)
            if delta is None:
                continue
            given = {at for at, _ in delta.changed}
            beyond = [at for at in given if at >= delta.length]
            if beyond:
                problems.append(
                    f"revisions.{k}.data.{name}: position {min(beyond)} lies beyond the "
                    f"length {delta.length}"
                )
            empty = next((at for at in range(before[name], delta.length) if at not in given), None)
            if empty is not None:
                problems.append(
                    f"revisions.{k}.data.{name}: position {empty} is new but holds no entry"
                )
            after[name] = delta.length
        lengths[revision.number] = after
        n_reviewers, n_papers = after["reviewers"], after["papers"]
        where = f"revisions.{k}"
        problems += [
            f"{where}.{line}"
            for line in _position_problems(
                "assignments", revision.assignments, n_reviewers, n_papers
            )
        ]
        if data.scores is not None:
            # Removed rows name pairs of the table the delta is taken against (for a root, the
            # session's current one); removing a pair that is not there is harmless.
            problems += [
                f"{where}.data.scores.{line}"
                for line in _position_problems("added", data.scores.added, n_reviewers, n_papers)
            ]
    return problems


def pair_scores(table: ScoreTable, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """The score of each (reviewer, paper) position pair in `table`, 0 where it has no row."""
    keys = (reviewer.astype(np.int64) << 32) | paper.astype(np.int64)
    table_keys = _keys(table)
    if not len(table_keys):
        return np.zeros(len(keys))
    pos = np.minimum(np.searchsorted(table_keys, keys), len(table_keys) - 1)
    return np.where(table_keys[pos] == keys, table.value[pos], 0.0)


def assignment_table(plan: Plan, data: SessionData) -> ScoreTable:
    """A plan's assignments as a compact table of positions in `data`.

    A pair's score is the one in the revision's own data (the planner takes it from there, 0 for
    an unscored pin), so it is looked up on restore rather than stored again; the value column
    instead marks the paper's lead reviewer with 1. Raises ValueError if a score differs from
    the data's.
    """
    rid = {r.id: j for j, r in enumerate(data.reviewers)}
    pid = {p.id: i for i, p in enumerate(data.papers)}
    reviewer = np.array([rid[a.reviewer] for a in plan.assignments], dtype=np.int32)
    paper = np.array([pid[a.paper] for a in plan.assignments], dtype=np.int32)
    given = np.array([a.score for a in plan.assignments], dtype=np.float64)
    if not np.array_equal(given, pair_scores(data.scores, reviewer, paper)):
        raise ValueError("the plan's scores differ from the session's score table")
    lead = np.array([1.0 if a.lead else 0.0 for a in plan.assignments], dtype=np.float64)
    return ScoreTable.from_arrays(reviewer, paper, lead)


def rebase_root_scores(
    revisions: list[Revision], old_scores: ScoreTable, new_scores: ScoreTable
) -> list[Revision]:
    """The revisions with each root's score delta retaken against `new_scores` (the session's
    score table is changing from `old_scores`), so that every revision keeps its own scores."""
    if old_scores is new_scores or old_scores == new_scores:
        return revisions
    out = []
    for revision in revisions:
        if revision.parent is None:
            delta = revision.data.scores
            own = delta.apply(old_scores) if delta is not None else old_scores
            data = revision.data.model_copy(
                update={
                    "scores": ScoreDelta.between(new_scores, own),
                    "scores_base": score_digest(new_scores),
                }
            )
            revision = revision.model_copy(update={"data": data})
        out.append(revision)
    return out
