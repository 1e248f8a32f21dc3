"""Dependent rounding of a fractional flow: an integral flow whose every arc keeps its mean.

The method is the bipartite dependent rounding of Gandhi, Khuller, Parthasarathy and
Srinivasan (J. ACM 53(3), 2006), in the form for flow networks that Jecmen, Zhang, Liu, Shah,
Conitzer and Fang use to sample randomised reviewer assignments (NeurIPS 2020): while some arc
carries a fractional flow, find a cycle of fractional arcs (ignoring direction), and push
flow round it by +alpha or -beta, chosen with probabilities beta / (alpha + beta) and
alpha / (alpha + beta), where alpha and beta are the largest pushes that keep every arc on
the cycle between the whole numbers around its value. Each push makes at least one arc whole
and changes no arc's expected flow, so the final flow has every arc's mean equal to its
fractional flow, every arc at the floor or ceiling of it, and every node's throughput at the
floor or ceiling of its fractional throughput (the network is a circulation, so a node with
one fractional arc has another).

Flows are integers in units of 1/`scale` (the planner's fixed probability scale), so the
rounding is exact integer arithmetic, and the random choices come from one seeded numpy
PCG64 generator: the same flow and seed always give the same draw.
"""

from __future__ import annotations

import numpy as np


class RoundingError(RuntimeError):
    """The flow given to the rounding is not a circulation (a node with one fractional arc)."""


def dependent_round(
    n_nodes: int,
    tails: np.ndarray,
    heads: np.ndarray,
    flow: np.ndarray,
    scale: int,
    seed: int,
) -> np.ndarray:
    """Round a circulation (integer flows in units of 1/scale) to whole units, arc means kept.

    Returns the rounded flow, every entry a multiple of `scale`, each at the floor or ceiling
    multiple of the given flow. Raises RoundingError when the flow is not conserved.
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    t = [int(x) for x in tails.tolist()]
    h = [int(x) for x in heads.tolist()]
    f = [int(x) for x in np.asarray(flow, dtype=np.int64).tolist()]
    low = [(x // scale) * scale for x in f]
    # Each node's fractional arcs as an insertion-ordered dict, so walks are reproducible.
    adj: list[dict[int, None]] = [{} for _ in range(n_nodes)]
    for e, x in enumerate(f):
        if x != low[e]:
            adj[t[e]][e] = None
            adj[h[e]][e] = None
    path_nodes: list[int] = []
    path_edges: list[int] = []
    position: dict[int, int] = {}
    next_start = 0
    while True:
        if not path_nodes:
            while next_start < n_nodes and not adj[next_start]:
                next_start += 1
            if next_start == n_nodes:
                break
            path_nodes.append(next_start)
            position[next_start] = 0
        v = path_nodes[-1]
        if not path_edges and not adj[v]:
            # The walk's start has become whole: start again elsewhere.
            del position[v]
            path_nodes.clear()
            continue
        came = path_edges[-1] if path_edges else -1
        e = next((a for a in adj[v] if a != came), -1)
        if e < 0:
            raise RoundingError(f"node {v} has a single fractional arc: the flow is not conserved")
        w = h[e] if t[e] == v else t[e]
        if w not in position:
            path_edges.append(e)
            path_nodes.append(w)
            position[w] = len(path_nodes) - 1
            continue
        k = position[w]
        cycle = [*path_edges[k:], e]
        starts = path_nodes[k:]
        signs = [1 if t[a] == s else -1 for a, s in zip(cycle, starts, strict=True)]
        up = min(
            (low[a] + scale - f[a]) if s > 0 else (f[a] - low[a])
            for a, s in zip(cycle, signs, strict=True)
        )
        down = min(
            (f[a] - low[a]) if s > 0 else (low[a] + scale - f[a])
            for a, s in zip(cycle, signs, strict=True)
        )
        # Push +up with probability down/(up+down), else -down: the expected change is zero.
        delta = up if int(rng.integers(up + down)) < down else -down
        for a, s in zip(cycle, signs, strict=True):
            f[a] += s * delta
            if f[a] == low[a] or f[a] == low[a] + scale:
                del adj[t[a]][a]
                del adj[h[a]][a]
        for node in path_nodes[k + 1 :]:
            del position[node]
        del path_nodes[k + 1 :]
        del path_edges[k:]
    return np.asarray(f, dtype=np.int64)
