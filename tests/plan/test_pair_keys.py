"""Pair-key membership against numpy's own `np.isin` as the reference."""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.plan.pairkeys import contains, key_order, pair_keys, positions_in, sorted_keys


@pytest.mark.parametrize("seed", range(20))
def test_contains_matches_numpy_isin(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n_papers = int(rng.integers(1, 50))
    size = int(rng.integers(0, 400))
    keys = pair_keys(rng.integers(0, 30, size), rng.integers(0, n_papers, size), n_papers)
    members = rng.choice(30 * n_papers, int(rng.integers(0, 200)))
    if seed % 3 == 0:
        keys = np.sort(keys)
    # Reference: numpy.isin (numpy's documented set membership).
    assert np.array_equal(contains(keys, members), np.isin(keys, members))


def test_contains_with_empty_sides_and_negative_keys() -> None:
    keys = np.array([-1, 0, 5, 7], dtype=np.int64)
    # Reference: numpy.isin.
    for members in (np.zeros(0, np.int64), np.array([7, -1]), np.array([5, 5, 0])):
        assert np.array_equal(contains(keys, members), np.isin(keys, members))
    assert contains(np.zeros(0, np.int64), np.array([1])).shape == (0,)


@pytest.mark.parametrize("seed", range(10))
def test_positions_point_at_equal_entries(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    table = np.unique(rng.integers(0, 1000, 300))
    keys = rng.integers(-5, 1005, 500)
    found, at = positions_in(keys, table)
    # Reference: numpy.isin for membership; equality of the entries found for positions.
    assert np.array_equal(found, np.isin(keys, table))
    assert np.array_equal(table[at[found]], keys[found])


def test_pair_keys_order_is_reviewer_then_paper() -> None:
    reviewer = np.array([2, 0, 1, 0])
    paper = np.array([0, 3, 1, 1])
    keys = pair_keys(reviewer, paper, 4)
    # Reference: numpy.lexsort, the documented (last key primary) sort order.
    assert np.array_equal(np.argsort(keys), np.lexsort((paper, reviewer)))
    assert np.array_equal(sorted_keys(keys), np.sort(keys))


@pytest.mark.parametrize("seed", range(6))
def test_key_order_matches_a_stable_argsort(seed: int) -> None:
    rng = np.random.default_rng(200 + seed)
    keys = rng.integers(0, 50, int(rng.integers(0, 80)))
    if seed % 2:
        keys = np.sort(keys)
    values = rng.random(len(keys))
    got_keys, got_values = key_order(keys, values)
    # Reference: numpy.argsort(kind="stable"), which keeps equal keys in their given order.
    order = np.argsort(keys, kind="stable")
    assert np.array_equal(got_keys, keys[order])
    assert np.array_equal(got_values, values[order])
