"""A plan: the chosen (paper, reviewer) pairs, the figures of the objective, and how it was made."""

from __future__ import annotations

import gc
import math
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from datetime import UTC, datetime
from typing import Annotated, Self

from pydantic import Field, field_validator, model_validator

from review_alloc.model.base import DocumentModel, Identifier
from review_alloc.model.limits import MAX_SCORE
from review_alloc.model.scores import ScoreTable

FiniteFloat = Annotated[float, Field(allow_inf_nan=False)]
"""A float that is neither infinite nor NaN (JSON has neither; a hand-edited file may)."""


class Assignment(DocumentModel):
    """One reviewer assigned to one paper, with the score of the pair (0 when unscored)."""

    paper: Identifier
    reviewer: Identifier
    score: float = Field(ge=0, le=MAX_SCORE, allow_inf_nan=False)
    lead: bool = False
    """This reviewer leads the paper's discussion (at most one lead per paper)."""


class PlanFigures(DocumentModel):
    """The objective tiers of a plan as counts, each beside the most it could be."""

    required_coverage: int = Field(ge=0)
    """Sum over papers of min(assigned, min_reviews)."""
    required_demand: int = Field(ge=0)
    """Sum over papers of min_reviews."""
    coverage: int = Field(ge=0)
    """Sum over papers of min(assigned, reviews)."""
    demand: int = Field(ge=0)
    """Sum over papers of reviews."""
    floors_met: int = Field(ge=0)
    """Sum over reviewers of min(load, floor)."""
    floors_demand: int = Field(ge=0)
    """Sum over reviewers of floor."""
    total_score: float = Field(allow_inf_nan=False)
    assigned: int = Field(ge=0)
    """Number of assigned pairs."""

    @model_validator(mode="after")
    def _within_demand(self) -> Self:
        problems = [
            f"{got}: {getattr(self, got)} exceeds {most} {getattr(self, most)}"
            for got, most in (
                ("required_coverage", "required_demand"),
                ("coverage", "demand"),
                ("floors_met", "floors_demand"),
                ("coverage", "assigned"),
            )
            if getattr(self, got) > getattr(self, most)
        ]
        if problems:
            raise ValueError("\n".join(problems))
        return self


def comparable_figures(figures: PlanFigures) -> dict[str, float]:
    """The figures a randomised or fair plan is set beside the plain plan with."""
    return {
        "required_coverage": float(figures.required_coverage),
        "coverage": float(figures.coverage),
        "floors_met": float(figures.floors_met),
        "total_score": float(figures.total_score),
    }


class PlanDraw(DocumentModel):
    """How a randomised plan was drawn, so that anyone can draw it again and audit it.

    `probabilities` holds every pair with a positive chance (reviewer and paper positions in
    the session the plan was made from, value = the pair's probability, a multiple of
    1/`scale`); the plan is the dependent rounding of those values with `seed`.
    """

    max_probability: float = Field(gt=0, le=1, allow_inf_nan=False)
    seed: int = Field(ge=0)
    scale: int = Field(ge=1)
    """Probabilities are whole multiples of 1/scale (the fractional plan's integer flow unit)."""
    method: str
    probabilities: ScoreTable
    expected: dict[str, float]
    """The fractional plan's figures (`required_coverage`, `coverage`, `floors_met`,
    `total_score`): the means over all draws."""
    plain: dict[str, float] | None = None
    """The same figures of the plain optimal plan of the same data, for comparison."""
    kept_earlier: bool = False
    """A re-plan of an earlier draw: its still-allowed pairs were kept where coverage allowed."""


class PlanFairness(DocumentModel):
    """The fairest plan's figures: the worst-off paper's total score against what is possible."""

    lowest_paper_score: float = Field(allow_inf_nan=False)
    """The lowest total score of any paper that has reviews to get."""
    bound: float = Field(allow_inf_nan=False)
    """No plan with the same coverage tiers gives every paper more than this."""
    exact: bool
    """True when a MIP proved `lowest_paper_score` optimal (then it equals `bound`)."""
    method: str
    worst_papers: list[Identifier] = Field(default_factory=list)
    plain_lowest_paper_score: float | None = None
    plain: dict[str, float] | None = None
    """The plain optimal plan's figures (`required_coverage`, `coverage`, `floors_met`,
    `total_score`), for comparison."""


def _utc_now() -> datetime:
    return datetime.now(UTC)


class Plan(DocumentModel):
    """A plan as stored in the session; `checked` says the independent checker passed it."""

    assignments: list[Assignment]
    figures: PlanFigures
    created_at: datetime = Field(default_factory=_utc_now)
    """When the plan was made, timezone-aware, stored in UTC."""
    checked: bool
    method: str
    bottleneck: float | None = Field(default=None, ge=0, le=MAX_SCORE, allow_inf_nan=False)
    """Lowest score allowed for unpinned pairs, when the bottleneck option made the plan."""
    loads_before_balance: list[Annotated[int, Field(ge=0)]] | None = None
    """Per-reviewer loads (session order) of the same session planned with balance off."""
    bound: dict[str, FiniteFloat] | None = None
    """Tier values of a relaxation above this plan (it is optimal within them); `None` when the
    plan is proven optimal."""
    draw: PlanDraw | None = None
    """Set when the plan was drawn at random under a probability cap (`plan.randomized`)."""
    fairness: PlanFairness | None = None
    """Set when the plan maximises the worst-off paper's total score (`plan.fair`)."""

    @field_validator("created_at")
    @classmethod
    def _aware_utc(cls, value: datetime) -> datetime:
        if value.tzinfo is None or value.utcoffset() is None:
            raise ValueError("must include a time zone (e.g. 2027-03-01T09:30:00Z)")
        return value.astimezone(UTC)

    @model_validator(mode="after")
    def _consistent(self) -> Self:
        problems: list[str] = []
        seen: dict[tuple[str, str], int] = {}
        for k, a in enumerate(self.assignments):
            first = seen.setdefault((a.reviewer, a.paper), k)
            if first != k:
                problems.append(
                    f"assignments.{k}: pair ({a.reviewer}, {a.paper}) repeats assignments.{first}"
                )
        leads: dict[str, int] = {}
        for k, a in enumerate(self.assignments):
            if a.lead:
                first = leads.setdefault(a.paper, k)
                if first != k:
                    problems.append(
                        f"assignments.{k}: paper {a.paper} has a second lead "
                        f"(first at assignments.{first})"
                    )
        if self.figures.assigned != len(self.assignments):
            problems.append(
                f"figures.assigned: {self.figures.assigned} but there are "
                f"{len(self.assignments)} assignments"
            )
        total = math.fsum(a.score for a in self.assignments)
        if not math.isclose(total, self.figures.total_score, rel_tol=1e-9, abs_tol=1e-4):
            problems.append(
                f"figures.total_score: {self.figures.total_score} but the assignments "
                f"sum to {total}"
            )
        if problems:
            raise ValueError("\n".join(problems[:20]))
        return self


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Pause the cyclic garbage collector: building tens of thousands of small objects would
    otherwise trigger repeated full scans of everything alive, none of which is garbage."""
    was_on = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_on:
            gc.enable()


def trusted_assignments(
    papers: Sequence[str], reviewers: Sequence[str], scores: Sequence[float], leads: Sequence[bool]
) -> list[Assignment]:
    """Assignments from parallel columns of already-valid values, without re-validating them.

    For the planner's decoded plans only: the ids come from a validated session, the scores from
    its validated table, and the independent checker verifies the plan afterwards. Each object is
    laid out as `Assignment.model_construct` lays out the first one (every field set, no extras),
    which is about three times faster than calling it per row on a large plan.
    """
    if not papers:
        return []
    first = Assignment.model_construct(
        paper=papers[0], reviewer=reviewers[0], score=scores[0], lead=leads[0]
    )
    names = frozenset(first.model_fields_set)
    extra, private = first.__pydantic_extra__, first.__pydantic_private__
    new, put = object.__new__, object.__setattr__

    def made(paper: str, reviewer: str, score: float, lead: bool) -> Assignment:
        a = new(Assignment)
        put(a, "__dict__", {"paper": paper, "reviewer": reviewer, "score": score, "lead": lead})
        put(a, "__pydantic_fields_set__", set(names))
        put(a, "__pydantic_extra__", extra)
        put(a, "__pydantic_private__", private)
        return a

    with _collector_paused():
        return [first] + [
            made(p, r, s, k)
            for p, r, s, k in zip(papers[1:], reviewers[1:], scores[1:], leads[1:], strict=True)
        ]


def trusted_plan(
    assignments: list[Assignment],
    figures: PlanFigures,
    created_at: datetime,
    method: str,
) -> Plan:
    """An unchecked Plan of `trusted_assignments`, without re-running the plan's validators.

    Its consistency rules (no repeated pair, one lead per paper, figures matching the rows) are
    all verified again by the independent checker before the plan is shown. A naive timestamp
    goes through full validation, so that it is refused as before.
    """
    if created_at.tzinfo is None or created_at.utcoffset() is None:
        return Plan(
            assignments=assignments,
            figures=figures,
            created_at=created_at,
            checked=False,
            method=method,
        )
    return Plan.model_construct(
        assignments=assignments,
        figures=figures,
        created_at=created_at.astimezone(UTC),
        checked=False,
        method=method,
    )
