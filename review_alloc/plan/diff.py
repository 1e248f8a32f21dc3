"""What changed between two plans: pairs added and removed, per reviewer and per paper, and
the rows that tell each affected reviewer about it."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from review_alloc.model import Plan
from review_alloc.model.history import SessionData


@dataclass(frozen=True)
class Changes:
    """Ids added to and removed from one reviewer's papers or one paper's reviewers."""

    added: tuple[str, ...]
    removed: tuple[str, ...]

    def to_json(self) -> dict[str, list[str]]:
        """Plain JSON form."""
        return {"added": list(self.added), "removed": list(self.removed)}


@dataclass(frozen=True)
class PlanDiff:
    """The difference between an old and a new plan (revision numbers, None for "no plan")."""

    old: int | None
    new: int | None
    old_pairs: int
    new_pairs: int
    added: tuple[tuple[str, str], ...]
    """(reviewer, paper) pairs in the new plan only, sorted."""
    removed: tuple[tuple[str, str], ...]
    """(reviewer, paper) pairs in the old plan only, sorted."""
    by_reviewer: dict[str, Changes] = field(default_factory=dict)
    """Reviewers whose papers changed: papers added and removed."""
    by_paper: dict[str, Changes] = field(default_factory=dict)
    """Papers whose reviewers changed: reviewers added and removed."""

    @property
    def kept(self) -> int:
        """Pairs in both plans."""
        return self.old_pairs - len(self.removed)

    def to_json(self) -> dict[str, Any]:
        """Plain JSON form (for `--json` and the app)."""
        return {
            "old": self.old,
            "new": self.new,
            "old_pairs": self.old_pairs,
            "new_pairs": self.new_pairs,
            "kept": self.kept,
            "added": [{"reviewer": r, "paper": p} for r, p in self.added],
            "removed": [{"reviewer": r, "paper": p} for r, p in self.removed],
            "by_reviewer": {k: v.to_json() for k, v in self.by_reviewer.items()},
            "by_paper": {k: v.to_json() for k, v in self.by_paper.items()},
        }


def _pairs(plan: Plan | None) -> set[tuple[str, str]]:
    return set() if plan is None else {(a.reviewer, a.paper) for a in plan.assignments}


def _grouped(
    added: tuple[tuple[str, str], ...], removed: tuple[tuple[str, str], ...], side: int
) -> dict[str, Changes]:
    plus: dict[str, list[str]] = {}
    minus: dict[str, list[str]] = {}
    for pair in added:
        plus.setdefault(pair[side], []).append(pair[1 - side])
    for pair in removed:
        minus.setdefault(pair[side], []).append(pair[1 - side])
    return {
        key: Changes(tuple(sorted(plus.get(key, ()))), tuple(sorted(minus.get(key, ()))))
        for key in sorted(plus.keys() | minus.keys())
    }


def diff_plans(
    old: Plan | None,
    new: Plan | None,
    *,
    old_number: int | None = None,
    new_number: int | None = None,
) -> PlanDiff:
    """Pairs added and removed from `old` to `new`, grouped by reviewer and by paper."""
    before, after = _pairs(old), _pairs(new)
    added = tuple(sorted(after - before))
    removed = tuple(sorted(before - after))
    return PlanDiff(
        old=old_number,
        new=new_number,
        old_pairs=len(before),
        new_pairs=len(after),
        added=added,
        removed=removed,
        by_reviewer=_grouped(added, removed, 0),
        by_paper=_grouped(added, removed, 1),
    )


@dataclass(frozen=True)
class NotifyRow:
    """One reviewer to tell: who they are and which papers joined and left their list."""

    reviewer: str
    name: str
    email: str
    status: str
    """'active' or 'withdrawn' (a withdrawn reviewer is told their reviews were moved)."""
    added: tuple[str, ...]
    added_titles: tuple[str, ...]
    removed: tuple[str, ...]
    removed_titles: tuple[str, ...]
    load_before: int
    load_after: int

    HEADER = (
        "reviewer_id",
        "name",
        "email",
        "status",
        "papers_added",
        "titles_added",
        "papers_removed",
        "titles_removed",
        "load_before",
        "load_after",
    )

    def cells(self) -> list[str]:
        """The row for a mail-merge CSV (lists joined with '; ', matching `HEADER`)."""
        return [
            self.reviewer,
            self.name,
            self.email,
            self.status,
            "; ".join(self.added),
            "; ".join(self.added_titles),
            "; ".join(self.removed),
            "; ".join(self.removed_titles),
            str(self.load_before),
            str(self.load_after),
        ]


def _loads(plan: Plan | None) -> dict[str, int]:
    loads: dict[str, int] = {}
    for a in plan.assignments if plan is not None else ():
        loads[a.reviewer] = loads.get(a.reviewer, 0) + 1
    return loads


def notify_rows(
    diff: PlanDiff,
    old_plan: Plan | None,
    new_plan: Plan | None,
    old: SessionData,
    new: SessionData,
) -> list[NotifyRow]:
    """One row per reviewer whose list changed, with names, e-mail and paper titles."""
    people = {r.id: r for r in old.reviewers} | {r.id: r for r in new.reviewers}
    titles = {p.id: p.title for p in old.papers} | {p.id: p.title for p in new.papers}
    before, after = _loads(old_plan), _loads(new_plan)
    rows = []
    for reviewer_id, change in diff.by_reviewer.items():
        person = people[reviewer_id]
        rows.append(
            NotifyRow(
                reviewer=reviewer_id,
                name=person.name,
                email=person.email,
                status="withdrawn" if person.withdrawn else "active",
                added=change.added,
                added_titles=tuple(titles.get(p, "") for p in change.added),
                removed=change.removed,
                removed_titles=tuple(titles.get(p, "") for p in change.removed),
                load_before=before.get(reviewer_id, 0),
                load_after=after.get(reviewer_id, 0),
            )
        )
    return rows
