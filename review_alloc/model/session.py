"""The session: the one planning document, with its cross-field rules and effective values.

Papers and reviewers are append-only in practice: the score table and saved plans refer to
them (by position and by id), so an entity that leaves is flagged `withdrawn`, never removed.
Treat a session as a value and change it with `model_copy(update=...)`; the id maps are
cached per list object, so replacing a list (or appending to it) is seen, but replacing an
element in place is not (call `forget_indexes()` after doing that). Papers, reviewers,
conflicts and pair rules are frozen: a changed one is a new object (`model_copy`), which is
what lets the planner's patch and the checker treat the very same object as unchanged.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Literal, Self

import numpy as np
from pydantic import Field, PrivateAttr, model_validator

from review_alloc.model.base import DocumentModel, Identifier
from review_alloc.model.entities import Conflict, PairRule, Paper, Reviewer
from review_alloc.model.events import Event
from review_alloc.model.history import Revision, history_problems
from review_alloc.model.plans import Plan
from review_alloc.model.policy import Policy
from review_alloc.model.scores import ScoreTable
from review_alloc.model.signals import MAX_BID, Signals

FORMAT_VERSION = 1
"""The session file format this version reads and writes."""

_MAX_PROBLEMS = 50


class _IndexCache:
    """Id-to-position maps, each valid while its list is the same object with the same length."""

    __slots__ = ("papers", "reviewers")

    def __init__(self) -> None:
        self.papers: tuple[list[Any], int, dict[str, int]] | None = None
        self.reviewers: tuple[list[Any], int, dict[str, int]] | None = None

    def __eq__(self, other: object) -> bool:
        # A cache is not part of the document: two equal sessions stay equal whatever they cached.
        return isinstance(other, _IndexCache)

    __hash__ = None  # type: ignore[assignment]

    def __copy__(self) -> _IndexCache:
        return _IndexCache()

    def __deepcopy__(self, memo: dict[int, Any]) -> _IndexCache:
        return _IndexCache()


def _first_positions(ids: Sequence[str]) -> dict[str, int]:
    found: dict[str, int] = {}
    for k, key in enumerate(ids):
        found.setdefault(key, k)
    return found


class Session(DocumentModel):
    """The planning document: policy, papers, reviewers, conflicts, scores, pins, blocks, plan."""

    format_version: Literal[1] = FORMAT_VERSION
    name: Identifier
    kind: Literal["conference", "panel"] = "conference"
    """A panel calls its papers "proposals" in the UI; nothing else differs."""
    policy: Policy = Field(default_factory=Policy)
    papers: list[Paper]
    reviewers: list[Reviewer]
    conflicts: list[Conflict] = Field(default_factory=list)
    """Declared conflicts only; inferred ones follow from `policy.conflict_rules`."""
    scores: ScoreTable = Field(default_factory=ScoreTable.empty)
    signals: Signals | None = None
    """The given expertise scores and the bids that `policy.recipe` combines (None: no
    recipe was ever applied, and `scores` is the scores file as given)."""
    pins: list[PairRule] = Field(default_factory=list)
    blocks: list[PairRule] = Field(default_factory=list)
    plan: Plan | None = None
    events: list[Event] = Field(default_factory=list)
    """Every change made after import, oldest first."""
    revisions: list[Revision] = Field(default_factory=list)
    """Every plan made, oldest first (see `model.history`); files from before history load empty."""
    revision: int | None = None
    """Number of the revision the current plan and data came from (None: not from history)."""
    import_columns: dict[str, dict[str, str]] = Field(default_factory=dict)
    """The import's column mapping (kind of file -> our field -> the file's own column name;
    see `io.columns`), kept so that a re-import of newer files needs no retyping."""

    _indexes: _IndexCache = PrivateAttr(default_factory=_IndexCache)

    @model_validator(mode="after")
    def _cross_checks(self) -> Self:
        problems = self._problems()
        if problems:
            if len(problems) > _MAX_PROBLEMS:
                extra = len(problems) - _MAX_PROBLEMS
                problems = [*problems[:_MAX_PROBLEMS], f"... and {extra} more problems"]
            raise ValueError("\n".join(problems))
        return self

    def validation_problems(self) -> list[str]:
        """The cross-field problems the validator would raise, as `path: message` lines."""
        return self._problems()

    def _problems(self) -> list[str]:
        problems: list[str] = []
        paper_at = self._unique_ids("papers", "paper", [p.id for p in self.papers], problems)
        reviewer_at = self._unique_ids(
            "reviewers", "reviewer", [r.id for r in self.reviewers], problems
        )
        problems += self._limit_problems()
        problems += self._score_problems()
        declared = self._pair_list("conflicts", self.conflicts, paper_at, reviewer_at, problems)
        pinned = self._pair_list("pins", self.pins, paper_at, reviewer_at, problems)
        blocked = self._pair_list("blocks", self.blocks, paper_at, reviewer_at, problems)
        for pair, k in pinned.items():
            if pair in blocked:
                problems.append(
                    f"pins.{k}: pair ({pair[0]}, {pair[1]}) is also blocked "
                    f"(blocks.{blocked[pair]})"
                )
            if pair in declared:
                problems.append(
                    f"pins.{k}: pair ({pair[0]}, {pair[1]}) is a declared conflict "
                    f"(conflicts.{declared[pair]})"
                )
        problems += self._history_problems()
        if self.plan is not None:
            for k, a in enumerate(self.plan.assignments):
                if a.paper not in paper_at:
                    problems.append(f"plan.assignments.{k}.paper: unknown paper {a.paper!r}")
                if a.reviewer not in reviewer_at:
                    problems.append(
                        f"plan.assignments.{k}.reviewer: unknown reviewer {a.reviewer!r}"
                    )
        return problems

    def _history_problems(self) -> list[str]:
        problems: list[str] = []
        numbers: set[int] = set()
        for k, rev in enumerate(self.revisions):
            if rev.number in numbers:
                problems.append(f"revisions.{k}.number: revision {rev.number} appears twice")
            if rev.parent is not None and rev.parent not in numbers:
                problems.append(
                    f"revisions.{k}.parent: revision {rev.parent} is not an earlier revision"
                )
            if rev.event >= len(self.events) or rev.changes_from > rev.event:
                problems.append(f"revisions.{k}.event: {rev.event} is not a recorded event")
            numbers.add(rev.number)
        if self.revision is not None and self.revision not in numbers:
            problems.append(f"revision: {self.revision} is not in the history")
        return problems + history_problems(self.revisions)

    @staticmethod
    def _unique_ids(field: str, noun: str, ids: list[str], problems: list[str]) -> dict[str, int]:
        first = _first_positions(ids)
        for k, key in enumerate(ids):
            if first[key] != k:
                problems.append(
                    f"{field}.{k}.id: duplicate {noun} id {key!r} (first at {field}.{first[key]})"
                )
        return first

    def _limit_problems(self) -> list[str]:
        problems: list[str] = []
        for i, paper in enumerate(self.papers):
            if paper.min_reviews is not None and paper.min_reviews > self.paper_reviews(i):
                whose = "" if paper.reviews is not None else " (the policy's)"
                problems.append(
                    f"papers.{i}.min_reviews: {paper.min_reviews} exceeds reviews "
                    f"{self.paper_reviews(i)}{whose}"
                )
        for j, reviewer in enumerate(self.reviewers):
            if reviewer.floor is not None and reviewer.floor > self.reviewer_cap(j):
                whose = "" if reviewer.cap is not None else " (the policy's)"
                problems.append(
                    f"reviewers.{j}.floor: {reviewer.floor} exceeds cap "
                    f"{self.reviewer_cap(j)}{whose}"
                )
        return problems

    def _score_problems(self) -> list[str]:
        problems = self._table_problems("scores", self.scores)
        if self.signals is not None:
            problems += self._table_problems("signals.expertise", self.signals.expertise)
            problems += self._table_problems("signals.bids", self.signals.bids)
            bids = self.signals.bids.value
            if len(bids) and float(bids.max()) > MAX_BID:
                row = int(np.argmax(bids > MAX_BID))
                problems.append(
                    f"signals.bids: row {row}: bid {float(bids[row])!r} is above {MAX_BID:g}"
                )
        return problems

    def _table_problems(self, field: str, table: ScoreTable) -> list[str]:
        problems: list[str] = []
        if not len(table):
            return problems
        for column, count, noun in (
            (table.reviewer, len(self.reviewers), "reviewers"),
            (table.paper, len(self.papers), "papers"),
        ):
            outside = np.flatnonzero(column >= count)
            if len(outside):
                row = int(outside[0])
                problems.append(
                    f"{field}: row {row}: {noun[:-1]} index {int(column[row])} is out of range; "
                    f"the session has {count} {noun}"
                    + (f" ({len(outside)} rows are out of range)" if len(outside) > 1 else "")
                )
        return problems

    @staticmethod
    def _pair_list(
        field: str,
        rows: Sequence[Conflict | PairRule],
        paper_at: dict[str, int],
        reviewer_at: dict[str, int],
        problems: list[str],
    ) -> dict[tuple[str, str], int]:
        first: dict[tuple[str, str], int] = {}
        for k, row in enumerate(rows):
            if row.reviewer not in reviewer_at:
                problems.append(f"{field}.{k}.reviewer: unknown reviewer {row.reviewer!r}")
            if row.paper not in paper_at:
                problems.append(f"{field}.{k}.paper: unknown paper {row.paper!r}")
            pair = (row.reviewer, row.paper)
            if pair in first:
                problems.append(
                    f"{field}.{k}: duplicate pair ({row.reviewer}, {row.paper}), "
                    f"first at {field}.{first[pair]}"
                )
            else:
                first[pair] = k
        return first

    @property
    def noun(self) -> str:
        """What a submission is called: 'proposal' for a grant panel, 'paper' otherwise."""
        return "proposal" if self.kind == "panel" else "paper"

    # Effective values: the entity's override, else the policy's. They do not look at
    # `withdrawn`; the planner leaves withdrawn papers and reviewers out.

    def paper_reviews(self, i: int) -> int:
        """Reviews wanted for paper `i`: its own `reviews`, else the policy's."""
        own = self.papers[i].reviews
        return self.policy.reviews if own is None else own

    def paper_min_reviews(self, i: int) -> int:
        """Reviews required for paper `i`: its own, else the policy's clamped to its reviews."""
        own = self.papers[i].min_reviews
        return min(self.policy.min_reviews, self.paper_reviews(i)) if own is None else own

    def reviewer_cap(self, j: int) -> int:
        """Most papers for reviewer `j`: their own cap, else the policy's."""
        own = self.reviewers[j].cap
        return self.policy.cap if own is None else own

    def reviewer_floor(self, j: int) -> int:
        """Fewest papers for reviewer `j`: their own floor, else the policy's clamped to the cap."""
        own = self.reviewers[j].floor
        return min(self.policy.floor, self.reviewer_cap(j)) if own is None else own

    def paper_reviews_array(self) -> np.ndarray:
        """`paper_reviews` of every paper, by position (int64)."""
        default = self.policy.reviews
        return np.fromiter(
            (default if p.reviews is None else p.reviews for p in self.papers),
            dtype=np.int64,
            count=len(self.papers),
        )

    def paper_min_reviews_array(self) -> np.ndarray:
        """`paper_min_reviews` of every paper, by position (int64)."""
        reviews = self.paper_reviews_array()
        own = np.fromiter(
            (-1 if p.min_reviews is None else p.min_reviews for p in self.papers),
            dtype=np.int64,
            count=len(self.papers),
        )
        return np.where(own < 0, np.minimum(self.policy.min_reviews, reviews), own)

    def reviewer_cap_array(self) -> np.ndarray:
        """`reviewer_cap` of every reviewer, by position (int64)."""
        default = self.policy.cap
        return np.fromiter(
            (default if r.cap is None else r.cap for r in self.reviewers),
            dtype=np.int64,
            count=len(self.reviewers),
        )

    def reviewer_senior_array(self) -> np.ndarray:
        """Whether each reviewer, by position, counts as senior (bool)."""
        return np.fromiter(
            (r.senior for r in self.reviewers), dtype=bool, count=len(self.reviewers)
        )

    def reviewer_floor_array(self) -> np.ndarray:
        """`reviewer_floor` of every reviewer, by position (int64)."""
        cap = self.reviewer_cap_array()
        own = np.fromiter(
            (-1 if r.floor is None else r.floor for r in self.reviewers),
            dtype=np.int64,
            count=len(self.reviewers),
        )
        return np.where(own < 0, np.minimum(self.policy.floor, cap), own)

    def paper_index(self) -> dict[str, int]:
        """Map paper id to position (cached; do not modify the returned dict)."""
        cached = self._indexes.papers
        if cached is None or cached[0] is not self.papers or cached[1] != len(self.papers):
            built = {p.id: i for i, p in enumerate(self.papers)}
            self._indexes.papers = cached = (self.papers, len(self.papers), built)
        return cached[2]

    def reviewer_index(self) -> dict[str, int]:
        """Map reviewer id to position (cached; do not modify the returned dict)."""
        cached = self._indexes.reviewers
        if cached is None or cached[0] is not self.reviewers or cached[1] != len(self.reviewers):
            built = {r.id: j for j, r in enumerate(self.reviewers)}
            self._indexes.reviewers = cached = (self.reviewers, len(self.reviewers), built)
        return cached[2]

    def forget_indexes(self) -> None:
        """Drop the cached id maps, after papers or reviewers were changed in place."""
        self._indexes = _IndexCache()
