"""Scores from the chair's signals: re-score as one recorded change, and one pair's report."""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from pydantic import ValidationError

from review_alloc.model import PART_NAMES, InputError, ScoreRecipe
from review_alloc.workspace.base import ChangeRefused, WorkspaceBase, redoable

if TYPE_CHECKING:
    from review_alloc.plan.rules import PairRules
    from review_alloc.plan.score_parts import PairReport
    from review_alloc.plan.similarity import SignalMatrices

# The recipe's modules bring scikit-learn and scipy: they load when a score is made or
# explained, so that commands which only read a session start without them. The pair
# report's modules load when a pair is asked about, so that the small commands start faster.


class ScoringMixin(WorkspaceBase):
    """`rescore` (the recipe applied as one change) and `pair_report` (a pair explained)."""

    def recipe_with(
        self, weights: dict[str, float] | None = None, top: int | None = None
    ) -> ScoreRecipe:
        """The session's recipe (or the default one) with the given weights and `top`."""
        base = self.session.policy.recipe or ScoreRecipe()
        changes: dict[str, object] = {}
        for name, value in (weights or {}).items():
            if name not in PART_NAMES:
                raise ChangeRefused(
                    [f"weights: unknown part {name!r}; the parts are {', '.join(PART_NAMES)}"]
                )
            if not math.isfinite(value):
                raise ChangeRefused([f"weights: {name}: {value!r} is not a finite number"])
            changes[name] = value
        if top is not None:
            changes["top"] = top
        try:
            return ScoreRecipe.model_validate({**base.model_dump(), **changes})
        except ValidationError as error:
            raise ChangeRefused(
                [
                    f"recipe: {'.'.join(str(x) for x in e['loc'])}: {e['msg']}"
                    for e in error.errors(include_url=False)
                ]
            ) from None

    @redoable
    def rescore(
        self,
        weights: dict[str, float] | None = None,
        top: int | None = None,
        reason: str = "",
    ) -> int:
        """Make the score table anew from the signals with the recipe (the session's, with
        `weights` and `top` changed), recorded as one `rescore` event; returns the rows made.

        A session that never had a recipe keeps its current scores as the given expertise.
        """
        recipe = self.recipe_with(weights, top)
        from review_alloc.plan.recipe import recipe_scores, session_signals

        signals = session_signals(self.session)
        table = recipe_scores(self.session, recipe, signals)
        shown = ", ".join(f"{name} {value:g}" for name, value in recipe.weights().items())
        self._apply(
            "rescore",
            "scores",
            f"{shown}, top {recipe.top}: {len(table)} pairs",
            reason,
            policy=self.session.policy.model_copy(update={"recipe": recipe}),
            scores=table,
            signals=signals,
        )
        return len(table)

    def _signal_matrices(self) -> SignalMatrices | None:
        """The session's text and topic matrices, kept while its paper and reviewer lists are
        the same objects (fitting them takes seconds on a large venue; the app asks often)."""
        s = self.session
        if s.policy.recipe is None:
            return None
        kept = getattr(self, "_matrices", None)
        if kept is not None and kept[0] is s.papers and kept[1] is s.reviewers:
            return kept[2]
        from review_alloc.plan.similarity import SignalMatrices

        matrices = SignalMatrices.of(s)
        self._matrices = (s.papers, s.reviewers, matrices)
        return matrices

    def pair_report(self, reviewer_id: str, paper_id: str) -> PairReport:
        """One pair: every pair rule and its verdict, its standing in the current plan, and
        each part of its score with its weight."""
        from review_alloc.plan.score_parts import PairReport, RuleCheck
        from review_alloc.workspace.facts import Facts

        j, i = self._reviewer(reviewer_id), self._paper(paper_id)
        s = self.session
        # The workspace's rules: their conflicts are derived once per session, not per pair.
        rules: PairRules = self.rules()
        checks = tuple(
            RuleCheck(str(rule), active, broken) for rule, active, broken in rules.pair_checks(j, i)
        )
        facts = Facts.of(s, rules=rules)
        verdict = facts.pair_verdict(j, i)
        assigned = any(r == j for r, _ in facts.assigned_of_paper[i])
        score = rules.score(j, i)
        from review_alloc.plan.recipe import pair_breakdown

        breakdown = pair_breakdown(s, j, i, self._signal_matrices())
        stale = False
        if breakdown is not None:
            # The table's text and topic parts come from float32 block products (within 1e-5
            # per part), the breakdown's from float64: compare at the planner's score step.
            made = breakdown.score if breakdown.candidate else None
            stale = (made is None) != (score is None) or (
                made is not None and score is not None and abs(made - score) > 1e-4
            )
        return PairReport(
            reviewer=s.reviewers[j].id,
            paper=s.papers[i].id,
            noun=s.noun,
            rules=checks,
            eligible=rules.why_not(j, i) is None,
            standing=verdict.text,
            assigned=assigned,
            pinned=(j, i) in facts.pinned,
            lead=facts.leads(j, i),
            score=score,
            breakdown=breakdown,
            stale=stale,
        )

    def parts_table(self) -> tuple[tuple[str, ...], list[tuple[str | float, ...]]]:
        """(header, rows) of the current plan's pairs with each part of their score, by paper:
        the score in the table, then expertise, text, topic and bid as the recipe reads them
        now (missing given scores and bids as 0), then the weighted sum before the floor."""
        self.refuse_broken_plan()
        s = self.session
        recipe = s.policy.recipe
        if recipe is None:
            raise InputError(
                [f"{s.name}: no score recipe was applied; the scores are the scores file's"]
            )
        if s.plan is None:
            raise InputError([f"{s.name}: plan: the session has no plan to export; plan first"])
        pairs = sorted((a.paper, a.reviewer, a.score) for a in s.plan.assignments)
        paper_at, reviewer_at = s.paper_index(), s.reviewer_index()
        reviewer = np.array([reviewer_at[r] for _, r, _ in pairs], dtype=np.int64)
        paper = np.array([paper_at[p] for p, _, _ in pairs], dtype=np.int64)
        from review_alloc.plan.recipe import pair_parts

        parts = pair_parts(s, reviewer, paper)
        total = parts.total(recipe)
        header = ("paper_id", "reviewer_id", "score", *PART_NAMES, "weighted_sum")
        rows = [
            (p, r, float(score), *(float(getattr(parts, n)[k]) for n in PART_NAMES),
             float(total[k]))
            for k, (p, r, score) in enumerate(pairs)
        ]
        return header, rows

    def parts_text(self, *, bom: bool = False) -> str:
        """`parts_table` as CSV text (for standard output)."""
        from review_alloc.io import csv_text

        header, rows = self.parts_table()
        return csv_text(header, rows, bom=bom)

    def export_parts(self, target: Path, *, force: bool = False, bom: bool = False) -> int:
        """Write `parts_table` as a CSV file (refused where `writable` refuses the target);
        returns the pairs written."""
        from review_alloc.io import write_table

        header, rows = self.parts_table()
        self.writable(target, force=force)  # type: ignore[attr-defined]
        write_table(target, header, rows, bom=bom)
        return len(rows)
