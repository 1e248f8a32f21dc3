"""KeptFlow: patch a solved min-cost flow and re-solve it locally, checked against references.

Every re-solve is compared with an outside solver (OR-Tools' SimpleMinCostFlow, or networkx's
network simplex on the planner-shaped networks) and its potentials are checked as a certificate
(`check_cost_certificate`); infeasible patches must raise with a violated cut that the
independent cut check accepts and whose deficit equals the cold solver's.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx
import numpy as np
import pytest
from flow_helpers import ortools_cost

from review_alloc.flow import (
    FlowError,
    FlowInputError,
    InfeasibleError,
    KeptFlow,
    check_cost_certificate,
    check_violated_cut,
    min_cost_flow,
)
from review_alloc.flow.kept import _in_bits


@dataclass
class Network:
    """A network's arrays as the tests keep them in step with the patches."""

    n: int
    tails: np.ndarray
    heads: np.ndarray
    caps: np.ndarray
    costs: np.ndarray
    lower: np.ndarray
    supplies: np.ndarray

    def copy(self) -> Network:
        """A deep copy, so a patch the engine refuses can be dropped."""
        return Network(
            self.n, self.tails, self.heads, self.caps.copy(), self.costs.copy(),
            self.lower.copy(), self.supplies,
        )


def general_network(rng: np.random.Generator) -> Network:
    """A random network with negative costs, self-loops, parallel edges and some supplies."""
    n = int(rng.integers(5, 40))
    m = int(rng.integers(n, 6 * n))
    tails = rng.integers(0, n, m).astype(np.int64)
    heads = rng.integers(0, n, m).astype(np.int64)
    caps = rng.integers(0, 8, m).astype(np.int64)
    costs = rng.integers(-8, 25, m).astype(np.int64)
    supplies = np.zeros(n, np.int64)
    # A feasible supply: route a few units along edges that exist, with room to spare.
    for _ in range(int(rng.integers(0, 4))):
        e = int(rng.integers(0, m))
        caps[e] += 2
        supplies[tails[e]] += 2
        supplies[heads[e]] -= 2
    return Network(n, tails, heads, caps, costs, np.zeros(m, np.int64), supplies)


def planner_network(rng: np.random.Generator) -> Network:
    """Source -> reviewers [floor tier, rest] -> papers (unit pair arcs) -> sink [min, rest],
    with the return arc sink -> source: the planner's shape, as a circulation."""
    n_r, n_p = int(rng.integers(4, 25)), int(rng.integers(4, 30))
    source, sink = 0, 1 + n_r + n_p
    tails, heads, caps, costs = [], [], [], []

    def add(t: int, h: int, c: int, w: int) -> None:
        tails.append(t)
        heads.append(h)
        caps.append(c)
        costs.append(w)

    for j in range(n_r):
        add(source, 1 + j, 1, -500)
        add(source, 1 + j, int(rng.integers(0, 5)), 0)
    for j in range(n_r):
        for i in range(n_p):
            if rng.random() < 0.5:
                add(1 + j, 1 + n_r + i, 1, int(rng.integers(0, 100)))
    for i in range(n_p):
        add(1 + n_r + i, sink, 2, -(100_000 + 1_000))
        add(1 + n_r + i, sink, 1, -1_000)
    add(sink, source, 3 * n_p, 0)
    m = len(tails)
    return Network(
        sink + 1, *(np.array(a, np.int64) for a in (tails, heads, caps, costs)),
        np.zeros(m, np.int64), np.zeros(sink + 1, np.int64),
    )


def networkx_cost(net: Network) -> int | None:
    """Optimal cost by networkx's network simplex (lower bounds shifted out), None if infeasible.

    networkx wants one edge per node pair: the planner-shaped networks have parallel source
    arcs, so every edge gets a midpoint node of its own.
    """
    graph = nx.DiGraph()
    demand = -net.supplies.copy()
    np.add.at(demand, net.tails, net.lower)
    np.subtract.at(demand, net.heads, net.lower)
    for v in range(net.n):
        graph.add_node(v, demand=int(demand[v]))
    for e in range(len(net.tails)):
        mid = ("e", e)
        graph.add_edge(int(net.tails[e]), mid, capacity=int(net.caps[e] - net.lower[e]),
                       weight=int(net.costs[e]))
        graph.add_edge(mid, int(net.heads[e]), weight=0)
    try:
        cost, _ = nx.network_simplex(graph)
    except nx.NetworkXUnfeasible:
        return None
    return int(cost) + int(net.lower @ net.costs)


def random_patch(
    rng: np.random.Generator, net: Network, planner: bool
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """A few edges and new values of one or more kinds, applied to `net` too."""
    m = len(net.tails)
    k = int(rng.integers(1, max(2, m // 8)))
    edges = rng.choice(m, k, replace=False).astype(np.int64)
    kinds = rng.choice(["zero", "raise", "lower", "costs"], int(rng.integers(1, 3)), replace=False)
    values: dict[str, np.ndarray] = {}
    caps = net.caps[edges].copy()
    low = net.lower[edges].copy()
    if "zero" in kinds:
        caps[:] = 0
        low[:] = 0
        values["capacities"] = caps
        values["lower"] = low
    if "raise" in kinds:
        caps = caps + rng.integers(0, 4, k)
        values["capacities"] = caps
    if "lower" in kinds:
        # A pin in the planner sets lower = capacity = 1; elsewhere any bound up to capacity.
        low = caps.copy() if planner else rng.integers(0, caps + 1)
        values["lower"] = low
    if "costs" in kinds:
        values["costs"] = net.costs[edges] + rng.integers(-30, 30, k)
    if "capacities" in values:
        values["lower"] = np.minimum(values.get("lower", net.lower[edges]), values["capacities"])
    net.caps[edges] = values.get("capacities", net.caps[edges])
    net.lower[edges] = values.get("lower", net.lower[edges])
    net.costs[edges] = values.get("costs", net.costs[edges])
    return edges, values


def check_result(net: Network, result, reference: int) -> None:
    """The re-solve's cost equals the reference and its potentials certify it."""
    checked = check_cost_certificate(
        net.n, net.tails, net.heads, net.caps, net.costs, result.flow, result.potentials,
        supplies=net.supplies, lower=net.lower,
    )
    assert checked == result.cost == reference


def check_infeasible(net: Network, error: InfeasibleError) -> None:
    """The cut is violated by exactly the cold solver's deficit."""
    deficit = check_violated_cut(
        net.n, net.tails, net.heads, net.caps, error.source_side, error.deficit,
        supplies=net.supplies, lower=net.lower,
    )
    with pytest.raises(InfeasibleError) as cold:
        min_cost_flow(net.n, net.tails, net.heads, net.caps, net.costs,
                      supplies=net.supplies, lower=net.lower)
    assert deficit == cold.value.deficit


def run_sequence(rng: np.random.Generator, net: Network, planner: bool, steps: int) -> int:
    """Patch and re-solve `steps` times from the last optimal state; return the infeasibles."""
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs,
                           supplies=net.supplies, lower=net.lower)
    infeasible = 0
    for _ in range(steps):
        trial = net.copy()
        edges, values = random_patch(rng, trial, planner)
        before = state.resolve()
        cap_before = state._cap.copy()
        nxt = state.patched(edges, **values)
        # The old state is untouched by the patch (copy-on-write).
        assert state.resolve() is before and np.array_equal(state._cap, cap_before)
        # OR-Tools SimpleMinCostFlow is the reference; networkx's network simplex as well on
        # the planner's shape.
        reference = ortools_cost(trial.n, trial.tails, trial.heads, trial.caps, trial.costs,
                                 trial.supplies, trial.lower)
        if planner:
            assert networkx_cost(trial) == reference
        if reference is None:
            with pytest.raises(InfeasibleError) as error:
                nxt.resolve(budget=10**12)
            check_infeasible(trial, error.value)
            assert nxt.spent
            infeasible += 1
            continue
        result = nxt.resolve(budget=10**12)
        assert result is not None
        check_result(trial, result, reference)
        # Every edge whose flow moved is among the child's changed edges (numpy's comparison
        # of the two flows as reference).
        moved = nxt.changed_edges()
        assert np.isin(np.flatnonzero(result.flow != before.flow), moved).all()
        assert np.isin(edges, moved).all() and np.array_equal(moved, np.unique(moved))
        assert np.array_equal(state._cap, cap_before)
        # The bitmap of arcs with residual partners and the flow per edge stay in step with
        # the residual capacities.
        assert np.array_equal(nxt._inbits, _in_bits(nxt._cap, nxt._rev))
        assert np.array_equal(result.flow, nxt._lower + nxt._cap[nxt._backward])
        state, net = nxt, trial
    return infeasible


@pytest.mark.parametrize("seed", range(12))
def test_general_networks_follow_random_patches(seed: int) -> None:
    rng = np.random.default_rng(1000 + seed)
    net = general_network(rng)
    if ortools_cost(net.n, net.tails, net.heads, net.caps, net.costs, net.supplies) is None:
        net.supplies[:] = 0
    run_sequence(rng, net, planner=False, steps=8)


@pytest.mark.parametrize("seed", range(10))
def test_planner_networks_follow_random_patches(seed: int) -> None:
    rng = np.random.default_rng(2000 + seed)
    run_sequence(rng, planner_network(rng), planner=True, steps=8)


def test_some_patches_are_infeasible_and_the_parent_carries_on() -> None:
    # Pins past a reviewer's cap: the cut must be the reviewer's and the parent stays usable.
    rng = np.random.default_rng(3)
    found = 0
    for _ in range(40):
        net = planner_network(rng)
        state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs, lower=net.lower)
        pair = np.flatnonzero((net.tails >= 1) & (net.heads > net.tails) & (net.heads < net.n - 1)
                              & (net.tails <= (net.n - 1)))
        reviewer = int(net.tails[pair[0]])
        mine = pair[net.tails[pair] == reviewer]
        source_cap = int(net.caps[net.heads == reviewer].sum())
        if len(mine) <= source_cap:
            continue
        trial = net.copy()
        trial.lower[mine] = 1
        child = state.patched(mine, lower=np.ones(len(mine), np.int64))
        with pytest.raises(InfeasibleError) as error:
            child.resolve()
        # OR-Tools SimpleMinCostFlow agrees that no flow exists.
        assert ortools_cost(trial.n, trial.tails, trial.heads, trial.caps, trial.costs,
                            None, trial.lower) is None
        check_infeasible(trial, error.value)
        assert error.value.deficit == len(mine) - source_cap
        with pytest.raises(InfeasibleError):
            child.resolve()
        with pytest.raises(FlowError, match="spent"):
            child.patched(mine[:1], capacities=[1])
        # The parent still patches and re-solves (OR-Tools SimpleMinCostFlow as reference).
        fine = state.patched(mine[:1], lower=[1])
        trial = net.copy()
        trial.lower[mine[:1]] = 1
        check_result(trial, fine.resolve(),
                     ortools_cost(trial.n, trial.tails, trial.heads, trial.caps, trial.costs,
                                  None, trial.lower))
        found += 1
    assert found >= 5


def test_a_budget_too_small_gives_up_and_spends_the_state() -> None:
    rng = np.random.default_rng(11)
    net = planner_network(rng)
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs)
    used = np.flatnonzero(state.resolve().flow[: len(net.tails) - 1] > 0)
    pairs = used[(net.tails[used] >= 1) & (net.heads[used] < net.n - 1)]
    child = state.patched(pairs, capacities=np.zeros(len(pairs), np.int64))
    assert child.pending and not child.spent
    assert child.resolve(budget=3) is None
    assert child.spent and not child.pending and child.resolve() is None
    with pytest.raises(FlowError, match="spent"):
        child.patched(pairs[:1], capacities=[1])
    # With room to work the same patch re-solves (OR-Tools SimpleMinCostFlow as reference).
    net.caps[pairs] = 0
    again = state.patched(pairs, capacities=np.zeros(len(pairs), np.int64))
    result = again.resolve()
    check_result(net, result, ortools_cost(net.n, net.tails, net.heads, net.caps, net.costs))
    assert 0 < again.last_work <= again.default_budget()


def test_patches_chain_before_a_resolve() -> None:
    # Two patches in a row, one resolve: the same optimum as both at once (OR-Tools as reference).
    rng = np.random.default_rng(21)
    net = general_network(rng)
    net.supplies[:] = 0
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs)
    trial = net.copy()
    first, v1 = random_patch(rng, trial, planner=False)
    middle = state.patched(first, **v1)
    rest = np.setdiff1d(np.arange(len(net.tails)), first)[:5]
    trial.costs[rest] -= 7
    last = middle.patched(rest, costs=trial.costs[rest])
    reference = ortools_cost(trial.n, trial.tails, trial.heads, trial.caps, trial.costs,
                             None, trial.lower)
    if reference is None:
        with pytest.raises(InfeasibleError):
            last.resolve()
    else:
        check_result(trial, last.resolve(), reference)
    assert middle.pending


def test_from_solution_refuses_potentials_that_do_not_certify() -> None:
    tails, heads = np.array([0, 1, 0]), np.array([1, 2, 2])
    caps, costs = np.array([2, 2, 1]), np.array([1, 1, 5])
    result = min_cost_flow(3, tails, heads, caps, costs, supplies=[2, 0, -2])
    kept = KeptFlow.from_solution(3, tails, heads, caps, costs, np.zeros(3, np.int64),
                                  result.flow, result.potentials)
    assert kept.resolve().cost == result.cost == 4  # by hand: two units on the path of cost 2
    assert kept.supplies().tolist() == [2, 0, -2]
    with pytest.raises(FlowInputError, match="do not certify"):
        KeptFlow.from_solution(3, tails, heads, caps, costs, np.zeros(3, np.int64),
                               np.array([1, 1, 1]), result.potentials)
    with pytest.raises(FlowInputError, match="outside its bounds"):
        KeptFlow.from_solution(3, tails, heads, caps, costs, np.zeros(3, np.int64),
                               np.array([3, 2, 0]), result.potentials)


def test_bad_patches_are_refused_and_change_nothing() -> None:
    tails, heads = np.array([0, 1, 0]), np.array([1, 2, 2])
    kept = KeptFlow.solve(3, tails, heads, [2, 2, 1], [1, 1, 5], supplies=[2, 0, -2])
    before = kept._cap.copy()
    with pytest.raises(FlowInputError, match="more than once"):
        kept.patched([0, 0], capacities=[1, 1])
    with pytest.raises(FlowInputError, match="lower bound"):
        kept.patched([1], lower=[3])
    with pytest.raises(FlowInputError, match="edges are"):
        kept.patched([3], capacities=[1])
    with pytest.raises(FlowInputError, match="entries"):
        kept.patched([1, 2], costs=[1])
    assert np.array_equal(kept._cap, before)
    # Capacity of the cheap path cut to 1: one unit takes the edge of cost 5 (by hand: 2 + 5).
    assert kept.patched([0], capacities=[1]).resolve().cost == 7


def test_the_uncompiled_twin_routes_like_the_kernel() -> None:
    # The cold-machine path runs the kernel's Python source: same flow, same potentials.
    from review_alloc.flow import kept
    from review_alloc.flow.interpreted import python_twins

    twins = python_twins([kept])
    twin = twins[id(kept.kept_route_kernel)]
    rng = np.random.default_rng(8)
    net = planner_network(rng)
    # Two families (states patched from one parent share their arrays).
    a, b = (KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs) for _ in range(2))
    edges, values = random_patch(rng, net, planner=True)
    a, b = a.patched(edges, **values), b.patched(edges, **values)
    m = a.n_edges
    logs = [(np.zeros(m, np.uint8), np.empty(3 * m, np.int64)) for _ in range(2)]
    args = [(s._start, s._head, s._cap, s._rev, s._cost, s._pot, s._ex, s._inbits, s._arc_edge,
             s._edge_flow, s._pending, np.int64(10**12), np.zeros(s.n, np.bool_), *log)
            for s, log in zip((a, b), logs, strict=True)]
    out = kept.kept_route_kernel(*args[0])
    assert out == twin(*args[1])
    assert np.array_equal(a._cap, b._cap) and np.array_equal(a._pot, b._pot)
    assert np.array_equal(a._inbits, b._inbits) and np.array_equal(a._edge_flow, b._edge_flow)
    assert np.array_equal(logs[0][1][: 3 * out[3]], logs[1][1][: 3 * out[3]])


@pytest.mark.parametrize("family", ["loose", "tight", "scarce"])
def test_the_planners_own_network_after_a_withdrawal_a_pin_and_new_costs(family: str) -> None:
    # The benchmark's S venue as `build_network` makes it; the changes a re-plan patches.
    from benchmarks.instances import make_instance, make_session, withdrawal
    from review_alloc.plan import build_network

    inst = make_instance(family, "S")
    plan_net = build_network(make_session(inst))
    net = Network(plan_net.n_nodes, plan_net.tails, plan_net.heads,
                  plan_net.capacities.copy(), plan_net.costs.copy(), plan_net.lower.copy(),
                  np.zeros(plan_net.n_nodes, np.int64))
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs, lower=net.lower)
    first = state.resolve()
    pairs = np.arange(plan_net.pair_arcs.start, plan_net.pair_arcs.stop)
    gone = withdrawal(inst, share=0.05)
    steps = [
        # Withdrawn reviewers: their source and pair arcs closed.
        np.concatenate([
            np.arange(plan_net.floor_arcs.start, plan_net.floor_arcs.stop)[
                np.isin(plan_net.floor_arc_reviewer, gone)],
            np.arange(plan_net.rest_arcs.start, plan_net.rest_arcs.stop)[
                np.isin(plan_net.rest_arc_reviewer, gone)],
            pairs[np.isin(plan_net.pair_reviewer, gone)],
        ]),
        # A pin on a pair the plan did not choose, of a reviewer still there.
        pairs[(first.flow[pairs] == 0) & ~np.isin(plan_net.pair_reviewer, gone)][:1],
        # The keep tier: the pairs of the earlier plan get cheaper.
        pairs[first.flow[pairs] > 0],
    ]
    for step, edges in enumerate(steps):
        values: dict[str, np.ndarray] = {}
        if step == 0:
            values["capacities"] = np.zeros(len(edges), np.int64)
            net.caps[edges] = 0
        elif step == 1:
            values["lower"] = np.ones(len(edges), np.int64)
            net.lower[edges] = 1
        else:
            values["costs"] = net.costs[edges] - 50
            net.costs[edges] -= 50
        state = state.patched(edges, **values)
        result = state.resolve(budget=10**12)
        # OR-Tools SimpleMinCostFlow is the reference optimum.
        reference = ortools_cost(net.n, net.tails, net.heads, net.caps, net.costs, None, net.lower)
        check_result(net, result, reference)


def test_the_cost_is_exact_where_capacities_times_costs_pass_int64() -> None:
    # Huge capacities on idle arcs and costs near 2**40: the capacities times the largest cost
    # pass int64, the flow's own products do not, and the integer dot product must be exact.
    # Reference: the cost summed in Python integers, and OR-Tools' SimpleMinCostFlow optimum.
    n = 4
    tails = np.array([0, 0, 1, 2, 0], dtype=np.int64)
    heads = np.array([1, 2, 3, 3, 3], dtype=np.int64)
    caps = np.array([5, 5, 5, 5, 2**40], dtype=np.int64)
    costs = np.array([2**40, 3, -(2**40) + 7, 1, 2**40], dtype=np.int64)
    supplies = np.array([4, 0, 0, -4], dtype=np.int64)
    state = KeptFlow.solve(n, tails, heads, caps, costs, supplies=supplies)
    child = state.patched([3], capacities=[1])
    result = child.resolve()
    assert result is not None
    caps2 = caps.copy()
    caps2[3] = 1
    exact = sum(int(f) * int(c) for f, c in zip(result.flow.tolist(), costs.tolist(), strict=True))
    assert result.cost == exact
    assert result.cost == ortools_cost(n, tails, heads, caps2, costs, supplies)


def reference_cost(net: Network) -> int | None:
    """OR-Tools SimpleMinCostFlow's optimal cost of `net` (None when infeasible)."""
    return ortools_cost(net.n, net.tails, net.heads, net.caps, net.costs, net.supplies, net.lower)


def check_state_arrays(state: KeptFlow, net: Network, result) -> None:
    """The family's shared arrays, holding `state`, equal those of a state built from scratch
    from its optimum (its values survived every other state's patches and resolves)."""
    fresh = KeptFlow.from_solution(net.n, net.tails, net.heads, net.caps, net.costs, net.lower,
                                   result.flow, result.potentials)
    for name in ("_cap", "_inbits", "_cost", "_edge_costs", "_lower"):
        assert np.array_equal(getattr(state, name), getattr(fresh, name)), name


@pytest.mark.parametrize("seed", range(8))
def test_a_family_of_states_shares_its_arrays_and_each_keeps_its_values(seed: int) -> None:
    # Undo and previews patch a parent again after its children: states patched from any
    # state of the family, resolved in any order, each must still re-solve to the optimum of
    # its own network (OR-Tools SimpleMinCostFlow as reference) and hold exactly its values.
    rng = np.random.default_rng(4000 + seed)
    planner = seed % 2 == 0
    net = planner_network(rng) if planner else general_network(rng)
    if not planner and reference_cost(net) is None:
        net.supplies[:] = 0
    root = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs,
                          supplies=net.supplies, lower=net.lower)
    family: list[tuple[KeptFlow, Network]] = [(root, net)]
    shared_cap = root._cap
    for _ in range(14):
        parent, parent_net = family[int(rng.integers(len(family)))]
        if parent.spent:
            continue
        trial = parent_net.copy()
        edges, values = random_patch(rng, trial, planner)
        child = parent.patched(edges, **values)
        # Shared, not copied: the child works in the very arrays of the root.
        assert child._cap is shared_cap
        family.append((child, trial))
        state, state_net = family[int(rng.integers(len(family)))]
        if state.spent:
            continue
        reference = reference_cost(state_net)
        if reference is None:
            with pytest.raises(InfeasibleError):
                state.resolve(budget=10**12)
            continue
        check_result(state_net, state.resolve(budget=10**12), reference)
    # Every state, whenever it was made and resolved, re-solves to its own optimum and holds
    # its own values, in the shuffled order of a chair's undos and previews.
    checked = 0
    for k in rng.permutation(len(family)).tolist():
        state, state_net = family[k]
        if state.spent:
            continue
        reference = reference_cost(state_net)
        if reference is None:
            with pytest.raises(InfeasibleError):
                state.resolve(budget=10**12)
            continue
        result = state.resolve(budget=10**12)
        check_result(state_net, result, reference)
        check_state_arrays(state, state_net, result)
        checked += 1
        # A parent patched again after all of it (an undo, then a re-plan): still exact.
        trial = state_net.copy()
        edges, values = random_patch(rng, trial, planner)
        again = reference_cost(trial)
        if again is not None:
            check_result(trial, state.patched(edges, **values).resolve(budget=10**12), again)
    assert checked >= 3
    # The resolves' shared scratch is left clean for the next one.
    assert not root._shared.touched.any()


def test_a_spent_child_leaves_the_parent_whole() -> None:
    # A resolve that gives up has routed part of the change in the shared arrays: the parent
    # gets its own values back and re-solves the same patch to OR-Tools' optimum.
    rng = np.random.default_rng(12)
    net = planner_network(rng)
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs)
    first = state.resolve()
    used = np.flatnonzero(first.flow[: len(net.tails) - 1] > 0)
    pairs = used[(net.tails[used] >= 1) & (net.heads[used] < net.n - 1)]
    child = state.patched(pairs, capacities=np.zeros(len(pairs), np.int64))
    assert child.resolve(budget=40) is None and child.spent
    check_state_arrays(state, net, first)
    net.caps[pairs] = 0
    result = state.patched(pairs, capacities=np.zeros(len(pairs), np.int64)).resolve()
    check_result(net, result, reference_cost(net))


def test_threads_patch_one_parent_at_once() -> None:
    # Previews and a re-plan in worker threads, all from the same kept optimum (OR-Tools
    # SimpleMinCostFlow as reference for each).
    import threading

    rng = np.random.default_rng(31)
    net = planner_network(rng)
    state = KeptFlow.solve(net.n, net.tails, net.heads, net.caps, net.costs, lower=net.lower)
    jobs = []
    for _ in range(8):
        trial = net.copy()
        jobs.append((trial, *random_patch(rng, trial, planner=True)))
    outcomes: dict[int, object] = {}

    def work(k: int) -> None:
        trial, edges, values = jobs[k]
        for _ in range(3):
            try:
                outcomes[k] = state.patched(edges, **values).resolve(budget=10**12)
            except InfeasibleError as error:
                outcomes[k] = error

    threads = [threading.Thread(target=work, args=(k,)) for k in range(len(jobs))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    for k, (trial, _, _) in enumerate(jobs):
        reference = reference_cost(trial)
        if reference is None:
            assert isinstance(outcomes[k], InfeasibleError)
        else:
            check_result(trial, outcomes[k], reference)
    check_state_arrays(state, net, state.resolve())


@pytest.mark.parametrize("seed", range(6))
def test_exact_costs_match_python_integers(seed: int) -> None:
    # Tier-weight-sized costs times small flows pass int64 in sum, not per product; huge
    # flows take the Python loop. Reference: the sum in Python's unbounded integers.
    from review_alloc.flow.mincost import _total_cost
    from review_alloc.flow.sums import exact_dot

    rng = np.random.default_rng(500 + seed)
    for size, top_flow, top_cost in ((0, 1, 1), (7, 3, 2**62), (60_000, 3, 2**61),
                                     (5_000, 2**20, 2**50), (40, 2**40, 2**62), (300, 9, 99)):
        flow = rng.integers(-top_flow, top_flow + 1, size).astype(np.int64)
        costs = rng.integers(-top_cost, top_cost, size).astype(np.int64)
        exact = sum(int(f) * int(c) for f, c in zip(flow.tolist(), costs.tolist(), strict=True))
        assert _total_cost(flow, costs) == exact
        assert exact_dot(flow, costs) == exact
        assert exact_dot(flow, costs, int(np.abs(flow).sum())) == exact
