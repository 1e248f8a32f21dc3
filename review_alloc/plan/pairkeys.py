"""(reviewer, paper) pairs as int64 keys, and membership tests between big key arrays.

`np.isin` sorts both arrays together on every call; a planner test is usually "which of these
3 M pair keys lie in this set of a few thousand", and the pair arrays the builder emits are
already sorted. Sorting only the small side (when it is not sorted yet) and a binary search of
the big one is several times faster, and gives the same answer.
"""

from __future__ import annotations

import numpy as np


def pair_keys(reviewer: np.ndarray, paper: np.ndarray, n_papers: int) -> np.ndarray:
    """One int64 key `reviewer * n_papers + paper` per pair (index arrays)."""
    return np.asarray(reviewer, dtype=np.int64) * max(int(n_papers), 1) + np.asarray(
        paper, dtype=np.int64
    )


def sorted_keys(keys: np.ndarray) -> np.ndarray:
    """`keys` as a sorted int64 array (the array itself when it is already sorted)."""
    keys = np.asarray(keys, dtype=np.int64)
    if len(keys) < 2 or bool(np.all(keys[1:] >= keys[:-1])):
        return keys
    return np.sort(keys)


def key_order(keys: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(keys, values) stably sorted by key; as given when the keys already are, as a score
    table's are (its rows are kept in (reviewer, paper) order)."""
    keys = np.asarray(keys, dtype=np.int64)
    if len(keys) < 2 or bool(np.all(keys[1:] >= keys[:-1])):
        return keys, values
    order = np.argsort(keys, kind="stable")
    return keys[order], values[order]


def positions_in(keys: np.ndarray, table: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(found, position): for each key, whether the sorted `table` holds it, and where."""
    keys = np.asarray(keys, dtype=np.int64)
    if len(table) == 0:
        return np.zeros(len(keys), dtype=bool), np.zeros(len(keys), dtype=np.int64)
    at = np.searchsorted(table, keys)
    np.minimum(at, len(table) - 1, out=at)
    return table[at] == keys, at


def contains(keys: np.ndarray, members: np.ndarray) -> np.ndarray:
    """Per key, whether it is among `members` (any order): `np.isin(keys, members)`, faster."""
    keys = np.asarray(keys, dtype=np.int64)
    if len(keys) == 0 or len(members) == 0:
        return np.zeros(len(keys), dtype=bool)
    return positions_in(keys, sorted_keys(members))[0]
