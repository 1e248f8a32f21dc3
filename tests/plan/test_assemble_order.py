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
