"""Scores from the chair's signals: re-score as one recorded change, and one pair's report."""

from __future__ import annotations

import contextlib
import hashlib
import io
import math
import os
import zipfile
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from pydantic import ValidationError

from review_alloc.model import PART_NAMES, InputError, ScoreRecipe, Session
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
        matrices = cached_signal_matrices(s)
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


SIGNAL_CACHE_KEEP = 8
"""Fitted signal matrices kept in the cache folder (the most recently used; a large venue's
take tens of MB)."""

_MATRIX_NAMES = ("paper_text", "reviewer_text", "paper_topics", "reviewer_topics")


def signal_cache_folder() -> Path:
    """Where fitted signal matrices are cached: the per-user cache folder from platformdirs
    (`$XDG_CACHE_HOME/review-alloc/signals`, else `~/.cache/review-alloc/signals` on Linux)."""
    from platformdirs import user_cache_path

    return user_cache_path("review-alloc", appauthor=False) / "signals"


def signal_key(session: Session) -> str:
    """A digest of everything the signal matrices are made from: every paper's and reviewer's
    text and folded topic set, the code that fits them and the versions of the libraries it
    calls. Equal digests give equal matrices, so a cached fit is exactly a fresh one."""
    from importlib.metadata import version

    from review_alloc.plan import similarity

    digest = hashlib.sha256()

    def add(text: str) -> None:
        data = text.encode("utf-8", "surrogatepass")
        digest.update(len(data).to_bytes(8, "little"))
        digest.update(data)

    add(Path(similarity.__file__).read_text(encoding="utf-8"))
    for package in ("scikit-learn", "scipy", "numpy"):
        add(f"{package} {version(package)}")
    papers, reviewers = similarity.topic_sets(session)
    add(f"{len(papers)} papers, {len(reviewers)} reviewers")
    for i in range(len(papers)):
        add(similarity.paper_text(session, i))
        add("\n".join(sorted(papers[i])))
    for j in range(len(reviewers)):
        add(similarity.reviewer_text(session, j))
        add("\n".join(sorted(reviewers[j])))
    return digest.hexdigest()


def cached_signal_matrices(session: Session) -> SignalMatrices:
    """The session's signal matrices from the cache folder when a fit of the very same texts
    and topics is there, else fitted (seconds on a large venue) and cached, written
    atomically. Every command that explains a pair fits them otherwise; a cache that cannot be
    read or written is passed by."""
    from review_alloc.plan.similarity import SignalMatrices

    folder = signal_cache_folder()
    path = folder / f"{signal_key(session)}.npz"
    found = _read_matrices(path)
    if found is not None:
        return found
    matrices = SignalMatrices.of(session)
    try:
        _write_matrices(path, matrices)
    except OSError:
        return matrices
    _prune(folder)
    return matrices


def _read_matrices(path: Path) -> SignalMatrices | None:
    from scipy.sparse import csr_matrix

    from review_alloc.plan.similarity import SignalMatrices

    try:
        with np.load(path, allow_pickle=False) as arrays:
            parts = {
                name: csr_matrix(
                    (arrays[f"{name}.data"], arrays[f"{name}.indices"], arrays[f"{name}.indptr"]),
                    shape=tuple(int(n) for n in arrays[f"{name}.shape"]),
                )
                for name in _MATRIX_NAMES
            }
    except (OSError, ValueError, KeyError, zipfile.BadZipFile):
        # Missing, or written by something else: fitted again and written anew.
        return None
    with contextlib.suppress(OSError):
        os.utime(path)  # the most recently used are the ones kept
    return SignalMatrices(**parts)


def _write_matrices(path: Path, matrices: SignalMatrices) -> None:
    from review_alloc.model import atomic_write_bytes

    arrays: dict[str, np.ndarray] = {}
    for name in _MATRIX_NAMES:
        matrix = getattr(matrices, name)
        arrays[f"{name}.data"] = matrix.data
        arrays[f"{name}.indices"] = matrix.indices
        arrays[f"{name}.indptr"] = matrix.indptr
        arrays[f"{name}.shape"] = np.array(matrix.shape, dtype=np.int64)
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)  # type: ignore[arg-type]
    path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write_bytes(path, buffer.getvalue())


def _prune(folder: Path) -> None:
    """Keep the `SIGNAL_CACHE_KEEP` most recently used fits."""
    try:
        found = sorted(folder.glob("*.npz"), key=lambda p: p.stat().st_mtime, reverse=True)
        for old in found[SIGNAL_CACHE_KEEP:]:
            old.unlink(missing_ok=True)
    except OSError:
        # Another program pruned at the same moment; the next fit prunes again.
        return
