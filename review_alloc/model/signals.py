"""The chair's own signals behind the scores: bids, the given expertise, and the score recipe.

A chair may have no finished score per pair, only abstracts, reviewers' profiles, declared
topics and keywords, and bids. The recipe (`ScoreRecipe`, kept in the policy) says how those
become the session's score table (`plan.recipe` computes it):

    score = max(0, w_expertise * expertise + w_text * text + w_topic * topic + w_bid * bid)

- `expertise`: the scores file as given (0 for a pair without a row);
- `text`: TF-IDF cosine of the paper's title, abstract and keywords and the reviewer's profile
  and keywords, in [0, 1] (0 when either text is empty);
- `topic`: Jaccard overlap of the paper's topics and keywords and the reviewer's, in [0, 1];
- `bid`: the reviewer's bid on the paper, `(level - 2) / 2`, in [-1, 1] (0 without a bid).

A missing part is 0 ("no evidence either way"), and the sum never goes below 0, a pair we know
nothing about. Only the candidate pairs get a score row: per paper the `top` reviewers by the
text and topic parts, plus every pair with a given expertise score or a bid; every other pair
is unscored and the policy's `unscored` applies to it, as to any pair without a row.

The bid scale is ours: `against` 0, `reluctant` 1, `neutral` 2, `willing` 3, `eager` 4 (any
case), or a number from 0 to 4.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import AfterValidator, ConfigDict, Field

from review_alloc.model.base import DocumentModel, Identifier
from review_alloc.model.limits import MAX_SCORE
from review_alloc.model.scores import ScoreTable
from review_alloc.model.text import free_text

BID_LEVELS: dict[str, int] = {
    "against": 0,
    "reluctant": 1,
    "neutral": 2,
    "willing": 3,
    "eager": 4,
}
"""The bid words and their levels; a bid may also be any number from 0 to `MAX_BID`."""

MAX_BID = 4.0
NEUTRAL_BID = 2.0
"""The level whose bid part is 0: a neutral bid weighs like no bid at all."""

MAX_TEXT_CHARS = 100_000
"""Longest abstract or profile kept (about 15,000 words: a profile of many past abstracts).
Longer text is refused at import rather than cut, so that no part of it is silently ignored."""

MAX_WEIGHT = 1000.0
"""Largest weight of a score part."""

DEFAULT_TOP = 150
"""Reviewers kept per paper from the text and topic parts (enough for any plan's choices)."""


def bid_part(level: float) -> float:
    """The bid part of the recipe for a bid level: -1 (against) to +1 (eager), 0 neutral."""
    return (level - NEUTRAL_BID) / NEUTRAL_BID


def _long_text(value: str) -> str:
    text = free_text(value)
    if len(text) > MAX_TEXT_CHARS:
        raise ValueError(
            f"{len(text)} characters; at most {MAX_TEXT_CHARS} are kept (shorten the text)"
        )
    return text


LongText = Annotated[str, AfterValidator(_long_text)]
"""Free text up to `MAX_TEXT_CHARS` characters: an abstract or a reviewer's profile."""


class ScoreRecipe(DocumentModel):
    """The weights of the score parts and how many text-and-topic candidates a paper keeps."""

    # Frozen with the policy that holds it (see `model.entities`).
    model_config = ConfigDict(extra="forbid", frozen=True)

    expertise: float = Field(default=1.0, ge=0, le=MAX_WEIGHT, allow_inf_nan=False)
    """Weight of the given expertise score (the scores file)."""
    text: float = Field(default=1.0, ge=0, le=MAX_WEIGHT, allow_inf_nan=False)
    """Weight of the TF-IDF text similarity (0 to 1)."""
    topic: float = Field(default=0.5, ge=0, le=MAX_WEIGHT, allow_inf_nan=False)
    """Weight of the topic and keyword overlap (Jaccard, 0 to 1)."""
    bid: float = Field(default=0.5, ge=0, le=MAX_WEIGHT, allow_inf_nan=False)
    """Weight of the bid (-1 against to +1 eager)."""
    top: int = Field(default=DEFAULT_TOP, ge=1, le=100_000)
    """Reviewers kept per paper by text and topic; pairs with a given score or a bid are kept
    whatever their rank."""

    def weights(self) -> dict[str, float]:
        """The weights by part name, in the order reports show them."""
        return {
            "expertise": self.expertise,
            "text": self.text,
            "topic": self.topic,
            "bid": self.bid,
        }


class SetAsideRow(DocumentModel):
    """A signal row of a reviewer or paper an undo took out of the lists, kept by id so that a
    redo gives it back (the tables refer to lists by position, which the undo shortened)."""

    table: Literal["expertise", "bids"]
    reviewer: Identifier
    paper: Identifier
    value: float = Field(ge=0, le=MAX_SCORE, allow_inf_nan=False)


class Signals(DocumentModel):
    """The signals a recipe combines that are not stored on papers and reviewers: the scores
    file as given, and the bids (levels 0 to 4)."""

    expertise: ScoreTable = Field(default_factory=ScoreTable.empty)
    bids: ScoreTable = Field(default_factory=ScoreTable.empty)
    set_aside: list[SetAsideRow] = Field(default_factory=list)
    """Rows of reviewers and papers the last undos took away; a redo that brings them back
    gives their rows back, and any other change drops them (there is no redo after it)."""
