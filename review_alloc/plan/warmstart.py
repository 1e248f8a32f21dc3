"""Carry an earlier plan's optimal flow and potentials over to the network of a changed session.

Nodes are matched by what they stand for (the source, the sink, reviewer j, paper i, paper i's
senior node); arcs by their matched end nodes and their rank among parallel arcs, so
withdrawals, new conflicts, blocks, pins and changed caps all map. Group nodes of the
institution rule and anything without a match start empty: the engine repairs whatever the
hint gets wrong, so a warm start changes the speed of a solve, never its optimum.
"""

from __future__ import annotations

import numpy as np

from review_alloc.flow import WarmStart
from review_alloc.plan.network import PlanNetwork

_UNMATCHED = -1


def _node_labels(net: PlanNetwork) -> np.ndarray:
    """A label per node, equal across networks for the same role (-1: no stable label)."""
    labels = np.full(net.n_nodes, _UNMATCHED, dtype=np.int64)
    labels[net.source] = 0
    labels[net.sink] = 1
    r, p = net.n_reviewers, net.n_papers
    labels[1 : 1 + r] = 2 + 3 * np.arange(r)
    labels[1 + r : 1 + r + p] = 3 + 3 * np.arange(p)
    seniors = net.sink + 1 + np.arange(len(net.senior_paper))
    labels[seniors] = 4 + 3 * net.senior_paper
    return labels


def _arc_keys(
    net: PlanNetwork, arcs: np.ndarray, labels: np.ndarray, size: int, ranks: int
) -> np.ndarray:
    """(tail, head, rank among parallel arcs) of `arcs` folded into one int64 each; -1 if
    unmatched."""
    tail, head = labels[net.tails[arcs]], labels[net.heads[arcs]]
    ok = (tail >= 0) & (head >= 0)
    pair = np.where(ok, tail * size + head, -1)
    # A stable sort keeps parallel arcs in arc order, which gives each its rank.
    order = np.argsort(pair, kind="stable")
    sorted_pair = pair[order]
    starts = np.r_[0, np.flatnonzero(sorted_pair[1:] != sorted_pair[:-1]) + 1]
    run_start = np.repeat(starts, np.diff(np.r_[starts, len(pair)]))
    rank = np.empty(len(pair), dtype=np.int64)
    rank[order] = np.arange(len(pair)) - run_start
    # Parallel arcs beyond `ranks` share the last rank: they only get a poorer hint.
    keys = pair * ranks + np.minimum(rank, ranks - 1)
    return np.where(ok, keys, -1)


def _match(old_keys: np.ndarray, new_keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Positions (in new, in old) of the keys >= 0 that both hold; old keys are unique."""
    if not len(old_keys) or not len(new_keys):
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    increasing = bool(np.all(old_keys[1:] > old_keys[:-1]))
    order = np.arange(len(old_keys)) if increasing else np.argsort(old_keys)
    old_sorted = old_keys[order]
    at = np.minimum(np.searchsorted(old_sorted, new_keys), len(old_sorted) - 1)
    hit = (new_keys >= 0) & (old_sorted[at] == new_keys)
    return np.flatnonzero(hit), order[at[hit]]


def _pair_keys(net: PlanNetwork, n_papers: int) -> np.ndarray:
    return net.pair_reviewer * n_papers + net.pair_paper


def _split_arcs(net: PlanNetwork) -> tuple[np.ndarray, np.ndarray]:
    """(pair arcs, every other arc) of `net`; the pair arcs are one contiguous block, so no set
    difference (a sort of every arc) is needed."""
    block = range(len(net.tails))[net.pair_arcs]
    pairs = np.arange(block.start, block.stop, block.step, dtype=np.int64)
    rest = np.r_[np.arange(block.start), np.arange(block.stop, len(net.tails))]
    if block.step != 1:
        rest = np.setdiff1d(np.arange(len(net.tails)), pairs, assume_unique=True)
    return pairs, rest.astype(np.int64)


def same_cost_scale(old: PlanNetwork, new: PlanNetwork) -> bool:
    """Whether both networks weigh the tiers alike, so that old potentials mean something.

    A re-plan's keep tier, or coarser score steps, multiply the weights of every tier above the
    score: an earlier optimum's potentials are then off by that factor on almost every arc, and
    a warm start from them would only delay the cold solve.
    """
    return (
        old.weights == new.weights
        and old.senior_weight == new.senior_weight
        and old.keep_weight == new.keep_weight
        and old.resolution == new.resolution
    )


def warm_start_for(
    old: PlanNetwork, flow: np.ndarray, potentials: np.ndarray, new: PlanNetwork
) -> WarmStart:
    """The earlier optimum (`flow`, `potentials` on `old`) mapped onto `new`."""
    old_labels, new_labels = _node_labels(old), _node_labels(new)
    carried = np.zeros(len(new.tails), dtype=np.int64)
    # Pair arcs, most of the network, are matched by (reviewer, paper), which the builder
    # emits in increasing order: no sort is needed.
    n_papers = max(old.n_papers, new.n_papers)
    old_pairs, old_rest = _split_arcs(old)
    new_pairs, new_rest = _split_arcs(new)
    new_at, old_at = _match(_pair_keys(old, n_papers), _pair_keys(new, n_papers))
    new_at, old_at = new_pairs[new_at], old_pairs[old_at]
    carried[new_at] = np.minimum(flow[old_at], new.capacities[new_at])

    # The other arcs by their end nodes' roles and their rank among parallel arcs.
    # Labels are small (about three per paper or reviewer), so (tail, head, rank) fits in int64.
    size = int(max(old_labels.max(initial=0), new_labels.max(initial=0))) + 1
    ranks = max(1, min(1 << 20, (1 << 62) // (size * size)))
    new_at, old_at = _match(
        _arc_keys(old, old_rest, old_labels, size, ranks),
        _arc_keys(new, new_rest, new_labels, size, ranks),
    )
    new_at, old_at = new_rest[new_at], old_rest[old_at]
    carried[new_at] = np.minimum(flow[old_at], new.capacities[new_at])

    start = np.zeros(new.n_nodes, dtype=np.int64)
    _, new_node, old_node = np.intersect1d(new_labels, old_labels, return_indices=True)
    keep = new_labels[new_node] >= 0
    start[new_node[keep]] = potentials[old_node[keep]]
    return WarmStart(flow=carried, potentials=start)
