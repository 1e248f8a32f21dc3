"""The lead choice's kernel: shortest augmenting paths (the Hungarian method) on the sparse pairs.

Imported on first need only (`plan.leads` loads it inside the function that solves), so that
importing the planner does not import numba. `review_alloc.flow._jit` is imported first: it points
numba's cache at the per-user folder before the kernel is decorated.

The choice is a min-cost flow: each paper sends one unit either along one of its assigned pairs
to the pair's reviewer (who takes at most `slots` units) or to its own "no lead" arc, and every
unit reaches a common sink. A pair's cost is minus its gain; a gain has two parts compared
lexicographically, `(weight + senior, score steps)`, where `weight` exceeds any difference in the
senior count, so the least cost leads most papers, then most with seniors, then the best score.
Vectors of integers under lexicographic order form an ordered group, so Dijkstra's method and
node potentials work on them as on single integers, and no part ever needs a large multiplier.

Each paper in turn is routed by Dijkstra's method on reduced costs from it to the nearest reviewer
with a free slot (or to its own no-lead arc), the potentials of the nodes settled by the search
are lowered by their distance's shortfall, and the path is augmented: successive shortest paths
from any node with supply keep every residual arc at reduced cost >= 0, so the final flow is a
minimum-cost one (Ahuja, Magnanti and Orlin, "Network Flows", section 9.7). Reviewers with a
free slot all keep potential 0, the sink's, so reaching any of them ends a search; most papers
find their best pair's reviewer free and settle in a single step.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS

_INF = np.iinfo(np.int64).max


@njit(**HELPER_OPTIONS)
def _below(a1: int, b1: int, a2: int, b2: int) -> bool:
    """Whether (a1, b1) comes before (a2, b2) lexicographically."""
    return a1 < a2 or (a1 == a2 and b1 < b2)


@njit(**HELPER_OPTIONS)
def _push(
    ha: np.ndarray, hb: np.ndarray, hn: np.ndarray, size: int, a: int, b: int, node: int
) -> int:
    """Push (a, b, node) on the binary min-heap of `size` entries; return the new size."""
    i = size
    while i > 0:
        parent = (i - 1) >> 1
        if not _below(a, b, ha[parent], hb[parent]):
            break
        ha[i] = ha[parent]
        hb[i] = hb[parent]
        hn[i] = hn[parent]
        i = parent
    ha[i] = a
    hb[i] = b
    hn[i] = node
    return size + 1


@njit(**HELPER_OPTIONS)
def _pop(ha: np.ndarray, hb: np.ndarray, hn: np.ndarray, size: int) -> int:
    """Remove the smallest entry (read it from index 0 first); return the new size."""
    size -= 1
    if size == 0:
        return 0
    a, b, node = ha[size], hb[size], hn[size]
    i = 0
    while True:
        child = 2 * i + 1
        if child >= size:
            break
        if child + 1 < size and _below(ha[child + 1], hb[child + 1], ha[child], hb[child]):
            child += 1
        if not _below(ha[child], hb[child], a, b):
            break
        ha[i] = ha[child]
        hb[i] = hb[child]
        hn[i] = hn[child]
        i = child
    ha[i] = a
    hb[i] = b
    hn[i] = node
    return size


@njit(**KERNEL_OPTIONS)
def lead_paths_kernel(
    reviewer: np.ndarray,
    paper: np.ndarray,
    gain_a: np.ndarray,
    gain_b: np.ndarray,
    slots: np.ndarray,
    n_papers: int,
) -> np.ndarray:
    """The pair leading each paper (-1: none) of a least-cost choice; pairs k join `reviewer[k]`
    and `paper[k]` with gain (gain_a[k], gain_b[k]), both >= 0; reviewer j leads <= slots[j]."""
    m = len(paper)
    n_r = len(slots)
    # Pairs by paper and by reviewer (counting sorts).
    p_start = np.zeros(n_papers + 1, np.int64)
    r_start = np.zeros(n_r + 1, np.int64)
    for k in range(m):
        p_start[paper[k] + 1] += 1
        r_start[reviewer[k] + 1] += 1
    for i in range(n_papers):
        p_start[i + 1] += p_start[i]
    for j in range(n_r):
        r_start[j + 1] += r_start[j]
    by_paper = np.empty(m, np.int64)
    by_reviewer = np.empty(m, np.int64)
    p_fill = p_start[:-1].copy()
    r_fill = r_start[:-1].copy()
    for k in range(m):
        by_paper[p_fill[paper[k]]] = k
        p_fill[paper[k]] += 1
        by_reviewer[r_fill[reviewer[k]]] = k
        r_fill[reviewer[k]] += 1

    # Nodes: papers, then reviewers, then the sink. Potentials start valid for the empty flow:
    # each paper at its best gain, reviewers and the sink at 0.
    first_r = n_papers
    sink = n_papers + n_r
    n = sink + 1
    pa = np.zeros(n, np.int64)
    pb = np.zeros(n, np.int64)
    for i in range(n_papers):
        for s in range(p_start[i], p_start[i + 1]):
            k = by_paper[s]
            if _below(pa[i], pb[i], gain_a[k], gain_b[k]):
                pa[i] = gain_a[k]
                pb[i] = gain_b[k]
    flow = np.zeros(m, np.bool_)
    used = np.zeros(n_r, np.int64)
    lead = np.full(n_papers, -1, np.int64)
    da = np.full(n, _INF, np.int64)
    db = np.full(n, _INF, np.int64)
    done = np.zeros(n, np.bool_)
    pred = np.full(n, -1, np.int64)
    touched = np.empty(n, np.int64)
    settled = np.empty(n, np.int64)
    heap = m + n_papers + 2
    ha = np.empty(heap, np.int64)
    hb = np.empty(heap, np.int64)
    hn = np.empty(heap, np.int64)

    for source in range(n_papers):
        if p_start[source] == p_start[source + 1]:
            continue
        da[source] = 0
        db[source] = 0
        touched[0] = source
        n_touched = 1
        n_settled = 0
        size = _push(ha, hb, hn, 0, 0, 0, source)
        end = -1
        ea = 0
        eb = 0
        while size > 0:
            ka, kb, v = ha[0], hb[0], hn[0]
            size = _pop(ha, hb, hn, size)
            if done[v] or ka != da[v] or kb != db[v]:
                continue
            done[v] = True
            settled[n_settled] = v
            n_settled += 1
            if v == sink or (v >= first_r and used[v - first_r] < slots[v - first_r]):
                end, ea, eb = v, ka, kb
                break
            if v < first_r:
                # A paper: its unused pairs (cost -gain), and its no-lead arc (cost 0; a paper
                # in a search is never on it: only led papers are reached, and the source).
                for s in range(p_start[v], p_start[v + 1]):
                    k = by_paper[s]
                    r = first_r + reviewer[k]
                    if flow[k] or done[r]:
                        continue
                    a = ka - gain_a[k] + pa[v] - pa[r]
                    b = kb - gain_b[k] + pb[v] - pb[r]
                    if _below(a, b, da[r], db[r]):
                        if da[r] == _INF:
                            touched[n_touched] = r
                            n_touched += 1
                        da[r], db[r], pred[r] = a, b, k
                        size = _push(ha, hb, hn, size, a, b, r)
                if not done[sink]:
                    a = ka + pa[v] - pa[sink]
                    b = kb + pb[v] - pb[sink]
                    if _below(a, b, da[sink], db[sink]):
                        if da[sink] == _INF:
                            touched[n_touched] = sink
                            n_touched += 1
                        da[sink], db[sink], pred[sink] = a, b, v
                        size = _push(ha, hb, hn, size, a, b, sink)
            else:
                # A reviewer without a free slot: back along the pairs they lead (cost +gain).
                for s in range(r_start[v - first_r], r_start[v - first_r + 1]):
                    k = by_reviewer[s]
                    q = paper[k]
                    if not flow[k] or done[q]:
                        continue
                    a = ka + gain_a[k] - pa[q] + pa[v]
                    b = kb + gain_b[k] - pb[q] + pb[v]
                    if _below(a, b, da[q], db[q]):
                        if da[q] == _INF:
                            touched[n_touched] = q
                            n_touched += 1
                        da[q], db[q], pred[q] = a, b, k
                        size = _push(ha, hb, hn, size, a, b, q)
        # The sink is always reachable (the source's no-lead arc), so `end` is set. Settled
        # nodes move by their distance's shortfall; the others, and the end, stay.
        for s in range(n_settled):
            v = settled[s]
            pa[v] += da[v] - ea
            pb[v] += db[v] - eb
        # Augment: back from the end, each paper on the path takes the pair it was left by.
        if end == sink:
            p = pred[sink]
            taken = -1
        else:
            used[end - first_r] += 1
            taken = pred[end]
            flow[taken] = True
            p = paper[taken]
        while p != source:
            given_up = pred[p]
            lead[p] = taken
            flow[given_up] = False
            taken = pred[first_r + reviewer[given_up]]
            flow[taken] = True
            p = paper[taken]
        lead[source] = taken
        for s in range(n_touched):
            v = touched[s]
            da[v] = _INF
            db[v] = _INF
            done[v] = False
            pred[v] = -1
    return lead


def exercise() -> None:
    """Compile (or load) the kernel on a two-pair case, with the dtypes every call passes."""
    one = np.ones(2, np.int64)
    lead_paths_kernel(
        np.array([0, 1], np.int64), np.array([0, 0], np.int64), one, one, one, np.int64(1)
    )
