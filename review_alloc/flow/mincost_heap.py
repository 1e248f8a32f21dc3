"""A binary min-heap of (key, node) pairs on flat arrays, with lazy deletion by the caller."""

from __future__ import annotations

import numpy as np
from numba import njit

from review_alloc.flow._cache import HELPER_OPTIONS


@njit(**HELPER_OPTIONS)
def heap_push(keys: np.ndarray, nodes: np.ndarray, size: int, key: int, node: int) -> int:
    """Push (key, node) on the binary min-heap of `size` entries; return the new size."""
    i = size
    while i > 0:
        parent = (i - 1) >> 1
        if keys[parent] <= key:
            break
        keys[i] = keys[parent]
        nodes[i] = nodes[parent]
        i = parent
    keys[i] = key
    nodes[i] = node
    return size + 1


@njit(**HELPER_OPTIONS)
def heap_pop(keys: np.ndarray, nodes: np.ndarray, size: int) -> tuple[int, int, int]:
    """Pop the smallest (key, node); return key, node and the new size."""
    top_key, top_node = keys[0], nodes[0]
    size -= 1
    key, node = keys[size], nodes[size]
    i = 0
    while True:
        child = 2 * i + 1
        if child >= size:
            break
        if child + 1 < size and keys[child + 1] < keys[child]:
            child += 1
        if keys[child] >= key:
            break
        keys[i] = keys[child]
        nodes[i] = nodes[child]
        i = child
    if size > 0:
        keys[i] = key
        nodes[i] = node
    return top_key, top_node, size
