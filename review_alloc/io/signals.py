"""Import of the bids file: `reviewer_id,paper_id,bid`, a bid being a word of our scale or a
number from 0 to 4 (`model.signals`), row by row with the usual file, line and column errors."""

from __future__ import annotations

import math
import os

import numpy as np

from review_alloc.io.reading import (
    CellError,
    FileProblems,
    FileSpec,
    data_rows,
    decimal,
    open_table,
    shown,
)
from review_alloc.io.sources import ReadOptions
from review_alloc.io.tables import _known, _Row
from review_alloc.model import BID_LEVELS, MAX_BID, ScoreTable

BIDS = FileSpec(
    "bids", ("reviewer_id", "paper_id", "bid"), (), frozenset({"reviewer_id", "paper_id"})
)

_SCALE = ", ".join(f"{word} ({level})" for word, level in BID_LEVELS.items())


def bid_level(text: str, decimal_comma: bool = False) -> float:
    """A bid cell as its level: a word of the scale (any case) or a number from 0 to 4."""
    if not text:
        raise CellError(f"empty; every row needs a bid: {_SCALE}, or a number from 0 to 4")
    word = BID_LEVELS.get(text.strip().casefold())
    if word is not None:
        return float(word)
    try:
        value = float(decimal(text) if decimal_comma else text)
    except ValueError:
        raise CellError(
            f"{shown(text)} is not a bid; use one of {_SCALE}, or a number from 0 to 4"
        ) from None
    if not math.isfinite(value) or not 0 <= value <= MAX_BID:
        raise CellError(f"{shown(text)} is outside the bid range 0 to 4 ({_SCALE})")
    return value


def read_bids(
    path: str | os.PathLike[str],
    options: ReadOptions,
    reviewers: dict[str, int] | None,
    papers: dict[str, int] | None,
    problems: FileProblems,
) -> ScoreTable | None:
    """The bids by reviewer and paper position (levels 0 to 4); None when the file has
    problems or an id map is missing (its file could not be read)."""
    opened = open_table(path, BIDS, options, problems)
    if opened is None:
        return None
    header, rows, source = opened
    before = problems.count
    first: dict[tuple[str, str], int] = {}
    r_ids: list[int] = []
    p_ids: list[int] = []
    levels: list[float] = []
    for line, cells in data_rows(rows, header, problems):
        row = _Row(header, cells, line, problems, BIDS.matched)
        reviewer = _known(row, "reviewer_id", "reviewer", reviewers)
        paper = _known(row, "paper_id", "paper", papers)
        level = row.read("bid", lambda t: bid_level(t, source.decimal_comma))
        if reviewer is None or paper is None:
            continue
        pair = (reviewer, paper)
        if pair in first:
            row.fail(None, f"duplicate pair ({reviewer}, {paper}), first on line {first[pair]}")
            continue
        first[pair] = line
        if row.good and level is not None and reviewers is not None and papers is not None:
            r_ids.append(reviewers[reviewer])
            p_ids.append(papers[paper])
            levels.append(level)
    if problems.count > before or reviewers is None or papers is None:
        return None
    return ScoreTable.from_arrays(
        np.array(r_ids, dtype=np.int32), np.array(p_ids, dtype=np.int32), np.array(levels)
    )
