"""The decoded rows' paper-major order (`plan.assemble.paper_major_order`) against numpy's
own `np.lexsort` (the reference), on the orders the decoder and the other planners hand in."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.plan.assemble import paper_major_order


@pytest.mark.parametrize("papers", [1, 7, 20_000, 70_000, 5_000_000_000])
@pytest.mark.parametrize("sorted_by_reviewer", [True, False])
def test_the_order_is_numpys_lexsort(papers: int, sorted_by_reviewer: bool) -> None:
    rng = np.random.default_rng(papers % 1000 + sorted_by_reviewer)
    for size in (0, 1, 2, 50, 6_000):
        reviewer = rng.integers(0, 300, size)
        paper = rng.integers(0, papers, size)
        if sorted_by_reviewer:
            # As the network lists its pairs: by reviewer, each reviewer's papers in order.
            keys = np.unique(reviewer * papers + paper)
            reviewer, paper = keys // papers, keys % papers
        # Reference: numpy's np.lexsort, paper first, then reviewer.
        assert np.array_equal(paper_major_order(reviewer, paper), np.lexsort((reviewer, paper)))


def test_repeated_rows_keep_their_order_as_lexsort_does() -> None:
    reviewer = np.array([0, 0, 1, 1, 1, 2])
    paper = np.array([70_001, 70_001, 3, 70_001, 3, 0])
    # Reference: numpy's np.lexsort (stable, so equal rows keep their order).
    assert np.array_equal(paper_major_order(reviewer, paper), np.lexsort((reviewer, paper)))


@pytest.mark.parametrize("seed", range(5))
def test_reused_rows_are_the_earlier_objects_and_new_rows_are_built(seed: int) -> None:
    # Reference: a plain per-row dictionary of the earlier rows, written out here.
    from datetime import UTC, datetime

    from review_alloc.plan.assemble import _assignments, assemble_rows
    from tests.plan.test_planner import random_session

    rng = np.random.default_rng(seed)
    session = random_session(300 + seed, unscored="zero")
    n_r, n_p = len(session.reviewers), len(session.papers)
    keys = np.unique(rng.integers(0, n_r * n_p, 40))
    reviewer, paper = keys // n_p, keys % n_p
    score = rng.random(len(keys))
    _, _, rows = assemble_rows(session, reviewer, paper, score, datetime.now(UTC), "test")
    # A later plan: some rows gone, some new, some with another score or lead.
    keep = rng.random(len(keys)) < 0.7
    extra = np.setdiff1d(np.unique(rng.integers(0, n_r * n_p, 10)), keys)
    new_keys = np.concatenate([keys[keep], extra])
    order = np.lexsort((new_keys // n_p, new_keys % n_p))
    new_keys = new_keys[order]
    r2, p2 = new_keys // n_p, new_keys % n_p
    before = {(int(a), int(b)): k for k, (a, b) in enumerate(
        zip(rows.reviewer.tolist(), rows.paper.tolist(), strict=True))}
    s2 = np.array([rows.score[before[(a, b)]] if (a, b) in before else 0.5
                   for a, b in zip(r2.tolist(), p2.tolist(), strict=True)])
    s2[rng.random(len(s2)) < 0.2] = 0.25
    lead = rng.random(len(s2)) < 0.3
    out = _assignments(session, r2, p2, s2, lead, rows)
    assert len(out) == len(new_keys)
    for k, a in enumerate(out):
        j, i = int(r2[k]), int(p2[k])
        assert (a.reviewer, a.paper) == (session.reviewers[j].id, session.papers[i].id)
        assert a.score == s2[k] and a.lead == bool(lead[k])
        at = before.get((j, i))
        same = at is not None and rows.score[at] == s2[k] and rows.lead[at] == lead[k]
        assert (a is rows.assignments[at]) if same else all(a is not b for b in rows.assignments)
