"""The tier pre-pass of cost scaling: fill the bands of very negative cost, then find prices.

Lexicographic objectives give some edges costs far below minus the largest positive cost, in a
few well separated bands ("cost tiers"). Cost scaling from zero prices would spend its first
phases moving flow at the scale of those weights. `saturate_tiers` fills the tiers one after
another with Dinic instead, never undoing a heavier tier, and `starting_prices` then looks, by a
budgeted Bellman-Ford pass, for prices at which the flow is within a given tolerance of optimal,
so that cost scaling starts at that tolerance. On a network with more than `MAX_TIERS` tiers, or
where no start is found within the budget, cost scaling starts from zero prices as before; the
optimum is the same either way.
"""

from __future__ import annotations

import numpy as np

from review_alloc.flow.dinic import dinic
from review_alloc.flow.potentials import exact_potentials
from review_alloc.flow.residual import ResidualNetwork

MAX_TIERS = 8
"""Networks with more tiers of very negative costs than this skip the tier pre-pass of cost
scaling (each tier costs up to two Dinic runs)."""

STARTING_PRICE_SCANS = 8
"""The shortest-path pass that looks for starting prices after the tier pre-pass gives up after
this many passes over the arcs. On the L benchmarks a start that exists is found within three
(one on the loose and tight families); where the tiers interact, the first try, at the largest
positive cost, finds none and spends the whole budget (about 0.2 s) before the try at the
lightest tier succeeds."""


def saturate_tiers(net: ResidualNetwork, n: int, m: int, scale: int) -> int:
    """Fill the edges of very negative cost, tier by tier, before cost scaling starts.

    A tier is a run of edge costs below -`scale` (the largest positive cost) with gaps of at
    most `scale` between them, as lexicographic weights make. From most to least
    negative, each tier's edges are saturated and the excess this leaves at their heads is
    routed back to their tails by Dinic, at first without undoing the tier (its reverse arcs
    closed) and then, for what could not go another way, along them too. Earlier tiers stay
    closed while later ones are routed (a lighter tier may still push more flow along a heavier
    tier's edge, never less), so no tier's flow is traded for a lighter one's. What
    remains for cost scaling is then imbalance of the order of `scale` instead of the tier
    weights: on the layered benchmark networks about half the phases. Returns the weight of the
    lightest tier (minus its highest cost), or 0 (network untouched) when no edge or more than
    MAX_TIERS tiers lie below -`scale`.
    """
    tier_arcs = net.arc_of_edge[:m][net.cost[net.arc_of_edge[:m]] < -scale]
    if tier_arcs.size == 0:
        return 0
    values = np.unique(net.cost[tier_arcs])
    breaks = np.flatnonzero(np.diff(values) > scale)
    if breaks.size + 1 > MAX_TIERS:
        return 0
    lows = np.concatenate([values[:1], values[breaks + 1]])
    highs = np.concatenate([values[breaks], values[-1:]])
    feed = net.arc_of_edge[m : m + n]
    drain = net.arc_of_edge[m + n :]
    closed: list[tuple[np.ndarray, np.ndarray]] = []
    tier_cost = net.cost[tier_arcs]
    for low, high in zip(lows, highs, strict=True):
        band = tier_arcs[(tier_cost >= low) & (tier_cost <= high)]
        # Every arc of the tier is undone only through its reverse arc, also those the lower
        # bounds' routing filled already: all of them stay closed until the last tier is done.
        back = net.rev[band]
        arcs = band[net.cap[band] > 0]
        if arcs.size:
            amount = net.cap[arcs].copy()
            net.cap[arcs] = 0
            net.cap[net.rev[arcs]] += amount
            reopened = net.cap[back].copy()
            net.cap[back] = 0
            excess = np.zeros(net.n, dtype=np.int64)
            np.add.at(excess, net.head[arcs], amount)
            np.subtract.at(excess, net.head[net.rev[arcs]], amount)
            net.cap[feed] = np.maximum(excess[:n], 0)
            net.cap[drain] = np.maximum(-excess[:n], 0)
            dinic(net, n, n + 1)
            # Added, not assigned: a closed arc's residual is zero, and whatever a push along
            # its forward arc put there is flow too (see the restore after the last tier).
            net.cap[back] += reopened
            if net.cap[feed].any():
                # Returning along the tier's own arcs always succeeds: the flow was feasible.
                dinic(net, n, n + 1)
                if net.cap[feed].any():
                    raise AssertionError("excess left over after re-opening the tier's arcs")
            for terminal in (feed, drain):
                net.cap[terminal] = 0
                net.cap[net.rev[terminal]] = 0
        closed.append((back, net.cap[back].copy()))
        net.cap[back] = 0
    # A heavier tier whose own arcs took flow back (its second Dinic run) has forward residual
    # left, and a lighter tier's routing may push along it again, which raises the closed
    # reverse residual. Writing the saved residual over that would drop the pushed units: the
    # flow would stop being a circulation, and cost scaling would return a wrong flow whose
    # potentials fail the optimality certificate. The saved residual is added instead.
    for back, residual in closed:
        net.cap[back] += residual
    return -int(values[-1])


def starting_prices(
    net: ResidualNetwork, cap: np.ndarray, scale: int, factor: int, price_limit: int
) -> tuple[np.ndarray, int]:
    """Scaled prices and a tolerance cost scaling may start from; (zeros, 0) if none found.

    Shortest paths with every arc lengthened by `scale` exist exactly when no residual cycle
    averages below -`scale` per arc; their distances, times `factor`, are then prices at which
    every residual arc's scaled reduced cost is at least -`scale` * `factor`. Prices must stay
    within `price_limit` in absolute value (the cost-scaling kernel's range).
    """
    zeros = np.zeros(net.n, dtype=np.int64)
    if scale <= 0 or net.cost.size == 0:
        return zeros, 0
    lengths = net.cost + scale
    # Distances below this floor would make prices outside the kernel's range (and keep a walk
    # around a negative cycle from overflowing): the pass then reports no start.
    floor = np.int64(-(price_limit // factor))
    distances = zeros.copy()
    budget = np.int64(STARTING_PRICE_SCANS * net.head.size)
    if not exact_potentials(net.start, net.head, cap, lengths, distances, budget, floor):
        return zeros, 0
    return distances * factor, scale * factor
