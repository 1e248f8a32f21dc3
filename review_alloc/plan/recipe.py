"""The score recipe: a session's signals (`model.signals`) combined into its score table.

`recipe_scores` makes the whole table; `pair_breakdown` shows one pair part by part, and
`pair_parts` gives the parts of many pairs (for exports). All three read the same signals the
same way, so a pair's breakdown adds up to its score in the table made from the same data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.model import (
    BID_LEVELS,
    MAX_SCORE,
    ScoreRecipe,
    ScoreTable,
    Session,
    Signals,
    bid_part,
)
from review_alloc.model.signals import NEUTRAL_BID
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.score_parts import ScoreBreakdown, ScorePart
from review_alloc.plan.similarity import SignalMatrices

_WORD_OF_LEVEL = {level: word for word, level in BID_LEVELS.items()}


def has_signals(session: Session, signals: Signals | None = None) -> bool:
    """Whether the session holds a signal beyond the given scores and topics: an abstract,
    a profile, keywords, or bids (topics alone keep the scores file as it is)."""
    bids = signals.bids if signals is not None else None
    texts = any(p.abstract or p.keywords for p in session.papers) or any(
        r.profile or r.keywords for r in session.reviewers
    )
    return texts or (bids is not None and len(bids) > 0)


def session_signals(session: Session) -> Signals:
    """The session's signals; a session without any takes its score table as the given
    expertise (the scores file it was imported with)."""
    return session.signals if session.signals is not None else Signals(expertise=session.scores)


@dataclass(frozen=True)
class PartArrays:
    """The parts of many pairs, one array each (expertise and bid 0 where missing)."""

    expertise: np.ndarray
    text: np.ndarray
    topic: np.ndarray
    bid: np.ndarray

    def total(self, recipe: ScoreRecipe) -> np.ndarray:
        """The weighted sum of the parts, before the floor at 0."""
        return (
            recipe.expertise * self.expertise
            + recipe.text * self.text
            + recipe.topic * self.topic
            + recipe.bid * self.bid
        )


def _given_parts(signals: Signals, reviewer: np.ndarray, paper: np.ndarray) -> tuple[
    np.ndarray, np.ndarray
]:
    expertise = signals.expertise.lookup(reviewer, paper, 0.0)
    bid = bid_part(signals.bids.lookup(reviewer, paper, NEUTRAL_BID))
    return expertise, bid


def recipe_scores(session: Session, recipe: ScoreRecipe, signals: Signals) -> ScoreTable:
    """The score table the recipe makes from the session's texts and topics and `signals`.

    Raises `PlanInputError` when a weighted score would pass `MAX_SCORE`.
    """
    n_p = max(len(session.papers), 1)
    matrices = SignalMatrices.of(session) if recipe.text > 0 or recipe.topic > 0 else None
    if matrices is not None:
        r_top, p_top, t_top, o_top = matrices.top_candidates(recipe.text, recipe.topic, recipe.top)
    else:
        r_top = p_top = np.zeros(0, dtype=np.int64)
        t_top = o_top = np.zeros(0)
    top_keys = r_top * n_p + p_top
    given_keys = np.union1d(
        signals.expertise.reviewer.astype(np.int64) * n_p + signals.expertise.paper,
        signals.bids.reviewer.astype(np.int64) * n_p + signals.bids.paper,
    )
    extra = np.setdiff1d(given_keys, top_keys, assume_unique=True)
    r_extra, p_extra = extra // n_p, extra % n_p
    if matrices is not None and len(extra):
        t_extra, o_extra = matrices.pair_values(r_extra, p_extra)
    else:
        t_extra = o_extra = np.zeros(len(extra))
    reviewer = np.concatenate([r_top, r_extra])
    paper = np.concatenate([p_top, p_extra])
    expertise, bid = _given_parts(signals, reviewer, paper)
    text = np.concatenate([t_top, t_extra])
    parts = PartArrays(expertise, text, np.concatenate([o_top, o_extra]), bid)
    score = np.maximum(parts.total(recipe), 0.0)
    if len(score) and float(score.max()) > MAX_SCORE:
        k = int(np.argmax(score))
        raise PlanInputError(
            [
                f"score: the recipe gives ({session.reviewers[int(reviewer[k])].id}, "
                f"{session.papers[int(paper[k])].id}) {float(score[k]):g}, above "
                f"{MAX_SCORE:g}; lower the weights"
            ]
        )
    return ScoreTable.from_arrays(reviewer, paper, score)


def pair_parts(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> PartArrays:
    """The parts of each (reviewer, paper) position pair, as the recipe reads them now."""
    signals = session_signals(session)
    reviewer = np.asarray(reviewer, dtype=np.int64)
    paper = np.asarray(paper, dtype=np.int64)
    expertise, bid = _given_parts(signals, reviewer, paper)
    text, topic = SignalMatrices.of(session).pair_values(reviewer, paper)
    return PartArrays(expertise, text, topic, bid)


def pair_breakdown(
    session: Session, reviewer: int, paper: int, matrices: SignalMatrices | None = None
) -> ScoreBreakdown | None:
    """One pair's score part by part under the session's recipe (None without a recipe);
    `matrices` are the session's `SignalMatrices` when the caller keeps them."""
    recipe = session.policy.recipe
    if recipe is None:
        return None
    signals = session_signals(session)
    matrices = matrices if matrices is not None else SignalMatrices.of(session)
    r, p = np.array([reviewer]), np.array([paper])
    text, topic = (float(v[0]) for v in matrices.pair_values(r, p))
    given = signals.expertise.get(reviewer, paper)
    level = signals.bids.get(reviewer, paper)
    bid_note = "no bid (neutral)"
    if level is not None:
        word = _WORD_OF_LEVEL.get(int(level)) if float(level).is_integer() else None
        bid_note = f"bid {word}" if word else f"bid {level:g} of 4"
    parts = (
        ScorePart("expertise", given, recipe.expertise, "" if given is not None else "not given"),
        ScorePart("text", text, recipe.text, "TF-IDF cosine"),
        ScorePart("topic", topic, recipe.topic, "Jaccard of topics and keywords"),
        ScorePart(
            "bid", bid_part(level) if level is not None else None, recipe.bid, bid_note
        ),
    )
    total = sum(part.contribution for part in parts)
    rank = None
    if recipe.text > 0 or recipe.topic > 0:
        # The rank among the paper's reviewers by the text and topic parts, ties to the
        # earlier reviewer, as `SignalMatrices.top_candidates` breaks them.
        n_r = len(session.reviewers)
        everyone = np.arange(n_r)
        all_text, all_topic = matrices.pair_values(everyone, np.full(n_r, paper))
        similar = recipe.text * all_text + recipe.topic * all_topic
        mine = similar[reviewer]
        ahead = int(np.sum(similar > mine) + np.sum(similar[:reviewer] == mine))
        rank = ahead + 1 if mine > 0 else None
    candidate = (
        given is not None or level is not None or (rank is not None and rank <= recipe.top)
    )
    return ScoreBreakdown(parts=parts, total=total, candidate=candidate, rank=rank)
