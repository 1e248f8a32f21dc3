"""Result types of the score recipe and of one pair's report (the faces format these).

`plan.recipe` computes them; this module only holds what it returns, so that the command line
and the app may import it without reaching the computation.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ScorePart:
    """One part of a pair's score: its value (None when the signal is missing, counted as 0),
    the recipe's weight for it, and what it adds (`weight * value`)."""

    name: str
    value: float | None
    weight: float
    note: str = ""
    """What the value is in words (the bid word, "not given", ...)."""

    @property
    def contribution(self) -> float:
        """What the part adds to the score."""
        return self.weight * (self.value or 0.0)


@dataclass(frozen=True)
class ScoreBreakdown:
    """A pair's score as the recipe makes it from today's data, part by part."""

    parts: tuple[ScorePart, ...]
    total: float
    """The weighted sum before the floor at 0."""
    candidate: bool
    """Whether the recipe gives the pair a score row (top by text and topic, or a given
    score, or a bid); otherwise it is unscored."""
    rank: int | None
    """The reviewer's rank for the paper by text and topic (1: best), None when neither
    counts."""

    @property
    def score(self) -> float:
        """The recipe's score: the sum, never below 0."""
        return max(0.0, self.total)


@dataclass(frozen=True)
class RuleCheck:
    """One pair rule for one pair: on in the policy or not, broken or kept."""

    rule: str
    active: bool
    broken: bool

    @property
    def verdict(self) -> str:
        """'breaks', 'keeps' or 'off' (the policy does not ask it)."""
        if not self.active:
            return "off"
        return "breaks" if self.broken else "keeps"


@dataclass(frozen=True)
class PairReport:
    """Everything about one (reviewer, paper) pair: eligibility rule by rule, its standing in
    the current plan, and its score part by part."""

    reviewer: str
    paper: str
    noun: str
    rules: tuple[RuleCheck, ...]
    eligible: bool
    standing: str
    """The pair's standing against the current plan, in the planner's words."""
    assigned: bool
    pinned: bool
    lead: bool
    score: float | None
    """The score in the session's table (None: unscored)."""
    breakdown: ScoreBreakdown | None
    """None when no recipe was applied (the scores file is used as it is)."""
    stale: bool
    """The recipe on today's data gives another score than the table holds (a change came
    after the last `score`)."""

    def to_json(self) -> dict[str, object]:
        """The report as one JSON object."""
        out: dict[str, object] = {
            "reviewer": self.reviewer,
            "paper": self.paper,
            "eligible": self.eligible,
            "rules": [{"rule": c.rule, "verdict": c.verdict} for c in self.rules],
            "standing": self.standing,
            "assigned": self.assigned,
            "pinned": self.pinned,
            "lead": self.lead,
            "score": self.score,
            "recipe": None,
        }
        b = self.breakdown
        if b is not None:
            out["recipe"] = {
                "parts": [
                    {
                        "part": p.name,
                        "value": p.value,
                        "weight": p.weight,
                        "contribution": p.contribution,
                        "note": p.note,
                    }
                    for p in b.parts
                ],
                "total": b.total,
                "score": b.score,
                "candidate": b.candidate,
                "rank": b.rank,
                "stale": self.stale,
            }
        return out

    def lines(self) -> list[str]:
        """The report as plain-text lines (the command line and the app's pair view)."""
        report = self
        lines = [
            f"reviewer {report.reviewer}, {report.noun} {report.paper}: "
            + ("eligible" if report.eligible else "NOT eligible"),
            "rules:",
        ]
        lines += [f"  {c.rule:<16} {c.verdict}" for c in report.rules]
        state = "assigned" if report.assigned else "not assigned"
        extras = [w for w, on in (("pinned", report.pinned), ("lead", report.lead)) if on]
        shown = f" ({', '.join(extras)})" if extras else ""
        lines.append(f"plan: {state}{shown}: {report.standing}")
        score = "unscored" if report.score is None else f"{report.score:.4f}"
        lines.append(f"score: {score}")
        b = report.breakdown
        if b is None:
            lines.append("  as given in the scores file (no score recipe applied)")
            return lines
        lines.append(f"  {'part':<10} {'value':>8} {'weight':>7} {'adds':>8}")
        for part in b.parts:
            value = "-" if part.value is None else f"{part.value:.4f}"
            lines.append(
                f"  {part.name:<10} {value:>8} {part.weight:>7g} {part.contribution:>8.4f}"
                + (f"  {part.note}" if part.note else "")
            )
        floor = " (below 0: counts as 0)" if b.total < 0 else ""
        lines.append(f"  {'sum':<10} {'':>8} {'':>7} {b.total:>8.4f}{floor}")
        rank = (
            f"rank {b.rank} by text and topic" if b.rank is not None else "no text or topic match"
        )
        lines.append(f"  {rank}; " + ("has a score row" if b.candidate else "not a candidate"))
        if report.stale:
            lines.append("  the data changed since the last `review-alloc score`: run it again")
        return lines
