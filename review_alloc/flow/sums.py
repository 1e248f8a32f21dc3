"""Exact integer dot products (a flow's cost) without overflow and without BLAS.

A planner's network prices its arcs at tier weights near 2**50, so a flow's cost can pass
int64 in its partial sums even though every flow is small. A float dot product could bound
the products, but numpy hands it to the BLAS library, whose threads on a busy machine took
15 ms for 35,000 values (the integer dot product takes 0.03 ms): the bound here is max |cost|
times the sum of |flow|, both plain numpy reductions.
"""

from __future__ import annotations

import numpy as np


def exact_dot(flow: np.ndarray, costs: np.ndarray, reach: int | None = None) -> int:
    """`flow @ costs` as an exact Python int (int64 arrays); `reach`: the sum of |flow| if known.

    Every partial sum of the products is at most the sum of |flow| times max |cost|: where that
    fits int64, one integer dot product. Otherwise, while the flows sum to less than 2**30, the
    costs are split into their bits above and below bit 31, two dot products that both fit;
    beyond that the nonzero products are summed in Python integers.
    """
    flow = np.asarray(flow, dtype=np.int64)
    costs = np.asarray(costs, dtype=np.int64)
    if not len(flow):
        return 0
    if reach is None:
        # In float64 (no overflow), with room for its rounding in the bounds below.
        reach = int(np.abs(flow).sum(dtype=np.float64)) + 1
    top = int(np.abs(costs).max())
    if reach * top < 2**62:
        return int(flow @ costs)
    if reach < 2**30:
        # |costs >> 31| <= 2**32 and 0 <= costs & (2**31 - 1) < 2**31: no partial sum of
        # either product reaches 2**62.
        return int(flow @ (costs >> 31)) * 2**31 + int(flow @ (costs & (2**31 - 1)))
    used = np.flatnonzero(flow)
    return sum(
        int(f) * int(c) for f, c in zip(flow[used].tolist(), costs[used].tolist(), strict=True)
    )
