"""The counting sort behind `max_flow` on edges listed in no order, against numpy's stable sort.

`residual.sort_by_tail_packed` moves each edge as one word packing its capacity, head and index,
and a capacity too large for the bits the ids leave takes another way back; whatever the sizes,
its result must be numpy's stable sort by tail (`numpy.argsort(kind="stable")`, the reference
of every check here): the same edge at every position, with its head and capacity.
"""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import scipy_value
from numba import njit

from review_alloc.flow import check_cut, check_flow, max_flow
from review_alloc.flow.residual import sort_by_tail_packed


@njit
def _sort(
    n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray, out_start: np.ndarray,
    order: np.ndarray, sorted_heads: np.ndarray, sorted_caps: np.ndarray,
) -> None:
    # The kernel has no Python entry point (only kernels call it): this one calls it for us.
    sort_by_tail_packed(n, tails, heads, caps, out_start, order, sorted_heads, sorted_caps)


def check_against_numpy(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray) -> None:
    """Sort the edges and compare every output array with numpy's stable argsort by tail."""
    tails, heads, caps = (np.ascontiguousarray(a, dtype=np.int64) for a in (tails, heads, caps))
    m = len(tails)
    out_start = np.zeros(n + 1, np.int64)
    np.cumsum(np.bincount(tails, minlength=n), out=out_start[1:])
    order = np.full(m, -1, np.int32)
    sorted_heads = np.full(m, -1, np.int64)
    sorted_caps = np.full(m, -1, np.int64)
    _sort(np.int64(n), tails, heads, caps, out_start, order, sorted_heads, sorted_caps)
    reference = np.argsort(tails, kind="stable")  # reference: numpy's stable sort
    assert order.tolist() == reference.tolist()
    assert sorted_heads.tolist() == heads[reference].tolist()
    assert sorted_caps.tolist() == caps[reference].tolist()


def mixed_capacities(rng: np.random.Generator, m: int) -> np.ndarray:
    """Zeros, small values and every power of two up to 2**62 (and int64's largest) +- 1."""
    powers = [2**k + d for k in range(63) for d in (-1, 0, 1) if 0 <= 2**k + d < 2**63]
    pool = np.array([0, 1, 2, 3, 7, 2**31 - 1, 2**31, 2**63 - 1, *powers], dtype=np.int64)
    caps = rng.integers(0, 10, m).astype(np.int64)
    wide = rng.random(m) < 0.5
    caps[wide] = rng.choice(pool, int(wide.sum()))
    return caps


@pytest.mark.parametrize("seed", range(20))
def test_random_multigraphs_sort_as_numpy_does(seed: int) -> None:
    # Repeated pairs, self-loops and edges into every node, node counts from 1 to beyond 16 bits.
    rng = np.random.default_rng(7700 + seed)
    n = int(rng.choice([1, 2, 5, 40, 300, 70_000, 1 << 20]))
    m = int(rng.integers(0, 3000))
    tails = rng.integers(0, n, m)
    heads = rng.integers(0, n, m)
    repeat = rng.integers(0, max(m, 1), m // 3) if m else np.zeros(0, np.int64)
    tails, heads = np.append(tails, tails[repeat]), np.append(heads, heads[repeat])
    loops = rng.integers(0, n, 5)
    tails, heads = np.append(tails, loops), np.append(heads, loops)
    check_against_numpy(n, tails, heads, mixed_capacities(rng, len(tails)))


def test_an_empty_edge_list() -> None:
    empty = np.zeros(0, np.int64)
    check_against_numpy(3, empty, empty, empty)


def test_every_edge_in_one_bucket() -> None:
    # All edges leave node 4 (one bucket); the order within it must be the callers'.
    rng = np.random.default_rng(31)
    m = 500
    tails = np.full(m, 4)
    heads = rng.integers(0, 9, m)
    check_against_numpy(9, tails, heads, mixed_capacities(rng, m))


def test_the_largest_node_ids_and_capacities_in_one_word() -> None:
    # Nodes near 2**21 and the widest capacities: the packed word leaves the fewest bits.
    n = (1 << 21) + 3
    tails = np.array([n - 1, 0, n - 1, 1 << 20, 0, n - 2], np.int64)
    heads = np.array([0, n - 1, n - 1, 5, 0, n - 3], np.int64)
    caps = np.array([2**63 - 1, 2**40 - 1, 2**40, 1, 0, 2**62], np.int64)
    check_against_numpy(n, tails, heads, caps)


@pytest.mark.parametrize("seed", range(4))
def test_shuffled_edges_beyond_16_bit_node_ids(seed: int) -> None:
    # A layered graph (source, two layers, sink) whose node ids are scattered over 0..2**17,
    # its edges shuffled so that neither tails nor heads come in order: the sorted-copy path.
    rng = np.random.default_rng(8800 + seed)
    n = 1 << 17
    labels = rng.permutation(n)
    s, t = int(labels[0]), int(labels[1])
    first, second = labels[2:402], labels[402:1002]
    pairs = 4000
    tails = np.concatenate([np.full(400, s), rng.choice(first, pairs), second])
    heads = np.concatenate([first, rng.choice(second, pairs), np.full(600, t)])
    caps = np.concatenate(
        [rng.integers(1, 6, 400), rng.integers(0, 3, pairs), rng.integers(1, 4, 600)]
    )
    order = rng.permutation(len(tails))
    tails, heads, caps = tails[order], heads[order], caps[order]
    result = max_flow(n, tails, heads, caps, s, t)
    assert result.value == scipy_value(n, tails, heads, caps, s, t, "dinic")  # scipy Dinic
    assert check_flow(n, tails, heads, caps, result.flow, s, t) == result.value
    check_cut(n, tails, heads, caps, result.source_side, result.value, s, t)
    check_cut(n, tails, heads, caps, ~result.sink_side, result.value, s, t)
