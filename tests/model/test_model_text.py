"""Character rules and number bounds of the document models (model.text, model.limits)."""

from __future__ import annotations

import sys
import unicodedata
from collections.abc import Callable

import numpy as np
import pytest
from pydantic import ValidationError

from review_alloc.model import (
    MAX_COUNT,
    MAX_SCORE,
    Assignment,
    Conflict,
    ConflictRules,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
    free_text,
    matched_text,
    matched_text_problem,
)

# Characters that look like nothing, by Unicode general category (unicodedata): Cf format
# characters, Cc controls, and one lone surrogate (Cs).
HOSTILE = {
    "\u200b": "U+200B (zero-width space)",
    "\u00ad": "U+00AD (soft hyphen)",
    "\ufeff": "U+FEFF (byte-order mark)",
    "\u200d": "U+200D (zero-width joiner)",
    "\u202e": "U+202E (right-to-left override)",
    "\u2066": "U+2066 (left-to-right isolate)",
    "\x00": "U+0000 (null)",
    "\x1b": "U+001B (escape)",
    "\t": "U+0009 (tab)",
    "\ud800": "U+D800",
}


def _every(category: str) -> list[str]:
    return [
        c for c in map(chr, range(sys.maxunicode + 1)) if unicodedata.category(c) == category
    ]


def test_every_format_and_control_character_is_refused_in_matched_text() -> None:
    # The reference is Unicode's own table as Python's unicodedata gives it: every character
    # of general category Cf or Cc, wherever it stands in a value, is refused.
    for char in _every("Cf") + _every("Cc"):
        assert matched_text_problem(f"ab{char}c") is not None, hex(ord(char))


def test_free_text_drops_format_characters_and_nul_and_keeps_line_breaks() -> None:
    for char in _every("Cf"):
        assert free_text(f"a{char}b") == "ab", hex(ord(char))
    assert free_text("A\x00B\x1b[31m") == "AB[31m"
    assert free_text(" Two\tcolumns\nand lines ") == "Two\tcolumns\nand lines"
    assert free_text("broken \ud800 surrogate") == "broken  surrogate"


def test_nfc_and_nfd_spellings_are_one_value() -> None:
    composed, decomposed = "Caf\u00e9", "Cafe\u0301"
    assert composed != decomposed
    assert matched_text(decomposed) == composed == free_text(decomposed)
    assert Paper(id=decomposed).id == Paper(id=composed).id
    assert Reviewer(id="R", institution=decomposed).institution == composed


@pytest.mark.parametrize(("char", "name"), HOSTILE.items())
def test_hostile_characters_are_refused_in_every_matched_field(char: str, name: str) -> None:
    bad = f"North{char}mere"
    cases = [
        lambda: Paper(id=bad),
        lambda: Paper(id="P", topics=["buoys", bad]),
        lambda: Paper(id="P", institutions=[bad]),
        lambda: Paper(id="P", authors=[f"ada@{bad}.example"]),
        lambda: Reviewer(id=bad),
        lambda: Reviewer(id="R", institution=bad),
        lambda: Reviewer(id="R", email=f"{bad}@wrenholt.example"),
        lambda: Reviewer(id="R", topics=[bad]),
        lambda: Conflict(reviewer=bad, paper="P"),
        lambda: PairRule(reviewer="R", paper=bad),
        lambda: Assignment(paper=bad, reviewer="R", score=0.5),
        lambda: ConflictRules(public_mail_domains=[f"{bad}.example"]),
    ]
    for make in cases:
        with pytest.raises(ValidationError, match="at character") as caught:
            make()
        assert name in str(caught.value)


def test_free_text_fields_are_cleaned_not_refused() -> None:
    paper = Paper(id="P", title="Tidal\u200b sens\u00ading\x00 \u202ebuoys")
    assert paper.title == "Tidal sensing buoys"
    assert Reviewer(id="R", name="\ufeffCyra\u200d Vellmarsh").name == "Cyra Vellmarsh"
    assert Conflict(reviewer="R", paper="P", reason="advisor\x00").reason == "advisor"


def test_a_session_matches_ids_written_in_either_normal_form() -> None:
    session = Session(
        name="Harbour",
        papers=[Paper(id="P-\u00e9t\u00e9")],
        reviewers=[Reviewer(id="R-Jos\u00e9")],
        conflicts=[Conflict(reviewer="R-Jose\u0301", paper="P-e\u0301te\u0301")],
    )
    assert session.conflicts[0].paper == session.papers[0].id


@pytest.mark.parametrize(
    "make",
    [
        lambda v: Policy(cap=v),
        lambda v: Policy(reviews=v, min_reviews=0),
        lambda v: Policy(floor=v, cap=v),
        lambda v: Policy(overload_allowance=v),
        lambda v: Policy(senior_min=v),
        lambda v: Policy(max_leads=v),
        lambda v: Policy(max_per_institution=v),
        lambda v: Paper(id="P", reviews=v),
        lambda v: Paper(id="P", min_reviews=v),
        lambda v: Paper(id="P", senior_min=v),
        lambda v: Reviewer(id="R", cap=v),
        lambda v: Reviewer(id="R", floor=v),
        lambda v: Reviewer(id="R", overload=v),
    ],
)
def test_counts_are_bounded(make: Callable[[int], object]) -> None:
    make(MAX_COUNT)
    for too_big in (MAX_COUNT + 1, 10**20):
        with pytest.raises(ValidationError, match=f"less than or equal to {MAX_COUNT}"):
            make(too_big)


def test_scores_are_bounded_and_finite() -> None:
    ScoreTable.from_arrays([0], [0], [MAX_SCORE])
    for bad in (MAX_SCORE * 1.0001, 1e308, float("inf"), float("nan"), -0.5):
        with pytest.raises(ValueError, match="a score must be a finite number from 0 to"):
            ScoreTable.from_arrays([0], [0], np.array([bad]))
    with pytest.raises(ValidationError):
        Assignment(paper="P", reviewer="R", score=1e308)
    with pytest.raises(ValidationError):
        Policy(min_score=1e308)
