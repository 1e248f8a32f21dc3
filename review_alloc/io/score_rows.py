"""Import of the scores file, built for millions of rows.

The fast path streams the rows once with the csv module into typed arrays, maps ids with
dicts and checks values and duplicate pairs with numpy. Only when that finds anything amiss is
the file read again row by row, which gives every problem its line and column.
"""

from __future__ import annotations

import csv
import os
from array import array

import numpy as np

from review_alloc.io.reading import (
    CellError,
    FileProblems,
    FileSpec,
    Header,
    data_rows,
    decimal,
    is_blank,
    open_table,
    records,
    score,
)
from review_alloc.io.sources import ReadOptions, Source
from review_alloc.model import MAX_SCORE, ScoreTable, matched_text_problem

SCORES = FileSpec(
    "scores", ("reviewer_id", "paper_id", "score"), (), frozenset({"reviewer_id", "paper_id"})
)


class _NeedsDiagnosis(Exception):
    """The fast path met a row it does not handle; the row-by-row reader takes over."""


def read_scores(
    path: str | os.PathLike[str],
    options: ReadOptions,
    reviewers: dict[str, int] | None,
    papers: dict[str, int] | None,
    problems: FileProblems,
) -> ScoreTable | None:
    """The score table by reviewer and paper position; None when the file has problems.

    With either id map missing (its file could not be read) only the cells themselves and
    duplicate pairs are checked.
    """
    opened = open_table(path, SCORES, options, problems)
    if opened is None:
        return None
    header, _, source = opened
    if reviewers is not None and papers is not None:
        fast = _fast(source, header, reviewers, papers)
        if fast is not None:
            return ScoreTable.from_arrays(*fast)
    return _diagnose(source, header, reviewers, papers, problems)


def _fast(
    source: Source, header: Header, reviewers: dict[str, int], papers: dict[str, int]
) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    if source.cells is not None:
        # A sheet's rows are padded to its width and may hold unnamed columns: the row-by-row
        # reader checks those; sheets hold at most about a million rows.
        if header.unnamed or any(len(row) != header.width for row in source.cells):
            return None
        reader = iter(source.cells)
    else:
        reader = source.csv_reader()
    number = decimal if source.decimal_comma else str
    at_r = header.position["reviewer_id"]
    at_p = header.position["paper_id"]
    at_s = header.position["score"]
    width = header.width
    r_ids, p_ids, values = array("i"), array("i"), array("d")
    add_r, add_p, add_s = r_ids.append, p_ids.append, values.append
    find_r, find_p = reviewers.get, papers.get
    try:
        for row in reader:
            if not is_blank(row):
                break
        for row in reader:
            if len(row) != width:
                if not row:
                    continue
                raise _NeedsDiagnosis
            add_r(find_r(row[at_r], -1))
            add_p(find_p(row[at_p], -1))
            add_s(float(number(row[at_s])))
    except (_NeedsDiagnosis, ValueError, csv.Error):
        return None
    r = np.frombuffer(r_ids, dtype=np.intc).astype(np.int32)
    p = np.frombuffer(p_ids, dtype=np.intc).astype(np.int32)
    v = np.frombuffer(values, dtype=np.float64).copy()
    if len(v) == 0:
        return r, p, v
    if r.min() < 0 or p.min() < 0 or not np.isfinite(v).all() or v.min() < 0 or v.max() > MAX_SCORE:
        return None
    # The key order is the score table's own row order, so the table need not sort again.
    keys = r.astype(np.int64) * max(len(papers), 1) + p
    if bool(np.all(keys[1:] > keys[:-1])):
        return r, p, v
    order = np.argsort(keys, kind="stable")
    keys = keys[order]
    if bool(np.any(keys[1:] == keys[:-1])):
        return None
    return r[order], p[order], v[order]


def _diagnose(
    source: Source,
    header: Header,
    reviewers: dict[str, int] | None,
    papers: dict[str, int] | None,
    problems: FileProblems,
) -> ScoreTable | None:
    r_ids: list[int] = []
    p_ids: list[int] = []
    values: list[float] = []
    first: dict[tuple[str, str], int] = {}
    before = problems.count
    rows = records(source, problems)
    for _, row in rows:
        if not is_blank(row):
            break
    for line, row in data_rows(rows, header, problems):
        reviewer = header.cell(row, "reviewer_id")
        paper = header.cell(row, "paper_id")
        good = True
        for column, key, index, noun in (
            ("reviewer_id", reviewer, reviewers, "reviewer"),
            ("paper_id", paper, papers, "paper"),
        ):
            problem = matched_text_problem(key)
            if problem is not None:
                problems.add(problem, line=line, column=column)
                good = False
            elif not key:
                problems.add(f"empty; every row needs a {noun} id", line=line, column=column)
                good = False
            elif index is not None and key not in index:
                problems.add_once(key, f"unknown {noun} {key!r}", line, column)
                good = False
        try:
            value = score(header.cell(row, "score"), source.decimal_comma)
        except CellError as error:
            problems.add(str(error), line=line, column="score")
            good = False
        if not reviewer or not paper:
            continue
        pair = (reviewer, paper)
        if pair in first:
            problems.add(
                f"duplicate pair ({reviewer}, {paper}), first on line {first[pair]}", line=line
            )
            continue
        first[pair] = line
        if good and reviewers is not None and papers is not None:
            r_ids.append(reviewers[reviewer])
            p_ids.append(papers[paper])
            values.append(value)
    if problems.count > before or reviewers is None or papers is None:
        return None
    return ScoreTable.from_arrays(
        np.array(r_ids, dtype=np.int32), np.array(p_ids, dtype=np.int32), np.array(values)
    )
