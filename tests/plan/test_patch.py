"""Re-plans on a patched network (plan.patch): the same optimum as a network built anew.

Every check of an optimum is against OR-Tools' SimpleMinCostFlow (solved on both the patched
and the freshly built arrays) or against a cold `make_plan`, whose own optimality the planner's
tests check against HiGHS.
"""

from __future__ import annotations

import numpy as np
import pytest
from ortools.graph.python import min_cost_flow as ortools_mcf

import review_alloc.plan.patch as patch_module
from review_alloc.model import Policy, Session
from review_alloc.plan import check_plan, make_plan
from review_alloc.plan.errors import PlanCheckError, PlanInputError
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.patch import patched_network, session_change
from review_alloc.plan.solve import PlanOutcome, tier_values
from review_alloc.workspace import ChangeRefused, Workspace
from tests.plan.test_constraints_reference import rules_session
from tests.plan.test_planner import random_session


def _ortools_optimum(net: PlanNetwork) -> tuple[int, np.ndarray]:
    """(optimal cost, an optimal flow) of the network's circulation by OR-Tools'
    SimpleMinCostFlow; lower bounds are shifted out (x = lower + y)."""
    low = net.lower
    need = np.zeros(net.n_nodes, np.int64)
    np.subtract.at(need, net.tails, low)
    np.add.at(need, net.heads, low)
    solver = ortools_mcf.SimpleMinCostFlow()
    arcs = solver.add_arcs_with_capacity_and_unit_cost(
        net.tails, net.heads, net.capacities - low, net.costs
    )
    solver.set_nodes_supplies(np.arange(net.n_nodes), need)
    assert solver.solve() == solver.OPTIMAL
    flow = low + np.array([solver.flow(int(a)) for a in arcs], dtype=np.int64)
    return int(solver.optimal_cost()) + int(low @ net.costs), flow


def _change(ws: Workspace, rng: np.random.Generator) -> str:
    """One random change of a kind a patch follows; refused ones are simply not made."""
    s = ws.session
    r = s.reviewers[int(rng.integers(len(s.reviewers)))].id
    p = s.papers[int(rng.integers(len(s.papers)))].id
    plan = s.plan
    kind = int(rng.integers(8))
    try:
        if kind == 0:
            ws.withdraw_reviewer(r, "illness")
        elif kind == 1:
            ws.withdraw_paper(p, "withdrawn by authors")
        elif kind == 2:
            ws.set_reviewer(r, cap=int(rng.integers(0, 5)), floor=0)
        elif kind == 3:
            ws.set_paper(p, reviews=int(rng.integers(1, 5)), min_reviews=1)
        elif kind == 4 and plan is not None and plan.assignments:
            a = plan.assignments[int(rng.integers(len(plan.assignments)))]
            ws.declare_conflict(a.reviewer, a.paper, "declared late")
        elif kind == 5 and plan is not None and plan.assignments:
            a = plan.assignments[int(rng.integers(len(plan.assignments)))]
            ws.block(a.reviewer, a.paper, "asked not to")
        elif kind == 6:
            ws.pin(r, p, "chair's choice")
        elif s.pins:
            pin = s.pins[0]
            ws.unpin(pin.reviewer, pin.paper)
    except ChangeRefused:
        return "refused"
    return str(kind)


def _same_structure(patched: PlanNetwork, fresh: PlanNetwork) -> bool:
    """Whether the fresh network has the patched one's nodes and tier weights (then the patched
    one is the fresh one plus capacity-0 arcs)."""
    return (
        patched.n_nodes == fresh.n_nodes
        and patched.weights == fresh.weights
        and patched.senior_weight == fresh.senior_weight
        and patched.keep_weight == fresh.keep_weight
        and patched.resolution == fresh.resolution
        and patched.max_score == fresh.max_score
    )


def _assert_same_optimum(patched: PlanNetwork, fresh: PlanNetwork) -> None:
    """Both networks' optima, by OR-Tools: equal tier values, and equal cost where the weights
    are equal; no closed arc used."""
    cost_p, flow_p = _ortools_optimum(patched)
    cost_f, flow_f = _ortools_optimum(fresh)
    if _same_structure(patched, fresh):
        assert cost_p == cost_f
    tiers_p = tier_values(patched, flow_p[patched.pair_arcs] > 0)
    tiers_f = tier_values(fresh, flow_f[fresh.pair_arcs] > 0)
    assert {k: v for k, v in tiers_p.items() if k != "score"} == {
        k: v for k, v in tiers_f.items() if k != "score"
    }
    # Ties finer than a score step may be broken apart: one step per assigned pair at most.
    assert tiers_p["score"] == pytest.approx(
        tiers_f["score"], abs=len(flow_f) / patched.resolution
    )
    assert not (flow_p[patched.capacities == 0] > 0).any()


def _rules_session(seed: int) -> Session:
    """Seniors, institutions (a crowded group is common at m = 1) and, on some, balance."""
    policy: dict[str, object] = {"senior_min": 1, "max_per_institution": 1}
    if seed % 3 == 1:
        policy = {"balance": 0.05, "senior_min": seed % 2}
    elif seed % 3 == 2:
        policy = {"senior_min": 1, "senior_hard": False, "max_per_institution": 2}
    return rules_session(7200 + seed, (int(6 + seed % 4), int(5 + seed % 5)), **policy)


@pytest.mark.parametrize("seed", range(70))
def test_a_patched_replan_has_the_optimum_of_a_network_built_anew(seed: int) -> None:
    rng = np.random.default_rng(7000 + seed)
    if seed < 40:
        session = random_session(7100 + seed, unscored="exclude" if seed % 2 else "zero")
    else:
        session = _rules_session(seed)
    ws = Workspace(session)
    ws.solve(fresh=seed % 3 == 0)
    for _ in range(4):
        for _ in range(int(rng.integers(1, 3))):
            _change(ws, rng)
        earlier = ws.earlier_plan()
        try:
            outcome = ws.solve()
        except PlanInputError:
            # Pins a rule now refuses: the cold plan refuses them too.
            with pytest.raises(PlanInputError):
                make_plan(ws.session, earlier=earlier, patch=False)
            return
        assert outcome.plan.checked
        # The pairs carrying flow, however they were found (from the earlier pairs and the
        # edges the re-solve changed, or by a pass): numpy's pass over the flow as reference.
        assert outcome.pairs_used is not None and np.array_equal(
            outcome.pairs_used, np.flatnonzero(outcome.flow[outcome.network.pair_arcs] > 0)
        )
        fresh_net = build_network(ws.session, earlier=earlier)
        if outcome.patched:
            _assert_same_optimum(outcome.network, fresh_net)
            if _same_structure(outcome.network, fresh_net):
                # The patched outcome's potentials certify the freshly built network too.
                check_plan(ws.session, outcome.plan, outcome.potentials, network=fresh_net)
        # The plan equals a cold plan in every tier (make_plan's optimum, checked vs HiGHS in
        # tests/plan/test_replan_random.py).
        cold = make_plan(ws.session, earlier=earlier, patch=False)
        assert outcome.tiers["required"] == cold.tiers["required"]
        assert outcome.tiers["coverage"] == cold.tiers["coverage"]
        assert outcome.tiers["floors"] == cold.tiers["floors"]
        assert outcome.tiers["seniors"] == cold.tiers["seniors"]
        assert outcome.tiers["score"] == pytest.approx(cold.tiers["score"], abs=1e-6)


@pytest.mark.parametrize("rules", [False, True])
def test_most_random_changes_are_patched(rules: bool) -> None:
    """The patch is not a path that never runs: most changes of these kinds are followed."""
    patched = tried = 0
    for seed in range(20):
        rng = np.random.default_rng(9000 + seed)
        session = _rules_session(seed) if rules else random_session(9100 + seed, unscored="exclude")
        ws = Workspace(session)
        ws.solve()
        ws.solve()  # the keep tier on, as in every re-plan after the first
        for _ in range(3):
            if _change(ws, rng) == "refused":
                continue
            tried += 1
            patched += ws.solve().patched
    assert patched >= tried // 2


def _withdrawn(session: Session, j: int) -> Session:
    reviewers = list(session.reviewers)
    reviewers[j] = reviewers[j].model_copy(update={"withdrawn": True})
    return session.model_copy(update={"reviewers": reviewers})


def test_a_withdrawal_closes_the_pairs_and_keeps_the_arcs() -> None:
    session = random_session(31, unscored="exclude")
    first = make_plan(session, fresh=True)
    loads = np.bincount(first.rows.reviewer, minlength=len(session.reviewers))
    j = int(np.argmax(loads))
    after = _withdrawn(session, j)
    patch = patched_network(first.network, session, after, None)
    assert patch is not None
    net = patch.network
    assert len(net.tails) == len(first.network.tails)
    mine = net.pair_reviewer == j
    assert (net.capacities[net.pair_arcs][mine] == 0).all()
    outcome = make_plan(after, fresh=True, warm=first)
    assert outcome.patched
    assert not (outcome.flow[net.pair_arcs][mine] > 0).any()
    assert all(a.reviewer != session.reviewers[j].id for a in outcome.plan.assignments)
    _assert_same_optimum(net, build_network(after))


def test_unchanged_assignments_are_the_earlier_objects() -> None:
    session = random_session(44, unscored="exclude")
    first = make_plan(session, fresh=True)
    j = int(first.rows.reviewer[0])
    outcome = make_plan(_withdrawn(session, j), fresh=True, warm=first)
    assert outcome.patched
    before = {(a.reviewer, a.paper): a for a in first.plan.assignments}
    same = [a for a in outcome.plan.assignments if (a.reviewer, a.paper) in before]
    assert same and all(a is before[(a.reviewer, a.paper)] for a in same)
    cold = make_plan(_withdrawn(session, j), fresh=True)
    assert outcome.plan.figures == cold.plan.figures


def test_a_plan_on_a_closed_pair_is_rejected_by_the_checker() -> None:
    session = random_session(52, unscored="exclude")
    first = make_plan(session, fresh=True)
    a = first.plan.assignments[0]
    j = session.reviewer_index()[a.reviewer]
    after = _withdrawn(session, j)
    outcome = make_plan(after, fresh=True, warm=first)
    assert outcome.patched
    # The earlier plan still holds the withdrawn reviewer's pair, now an arc of capacity 0.
    with pytest.raises(PlanCheckError, match="withdrawn reviewer"):
        check_plan(after, first.plan, outcome.potentials, network=outcome.network)


@pytest.mark.parametrize(
    "edit",
    [
        "reinstate",
        "policy",
        "attribute",
    ],
)
def test_changes_a_patch_cannot_follow_build_anew(edit: str) -> None:
    session = random_session(61, unscored="exclude")
    if edit == "reinstate":
        before = _withdrawn(session, 0)
        after = session
    elif edit == "policy":
        before = session
        after = session.model_copy(
            update={"policy": Policy(**{**session.policy.model_dump(), "reviews": 2})}
        )
    else:
        before = session
        reviewers = list(session.reviewers)
        reviewers[0] = reviewers[0].model_copy(update={"institution": "Invented Institute"})
        after = session.model_copy(update={"reviewers": reviewers})
    first = make_plan(before, fresh=True)
    assert patched_network(first.network, before, after, None) is None
    outcome = make_plan(after, fresh=True, warm=first)
    assert not outcome.patched
    assert outcome.tiers == make_plan(after, fresh=True).tiers


def test_the_session_change_names_what_moved() -> None:
    session = random_session(70, unscored="exclude")
    after = _withdrawn(session, 1)
    change = session_change(session, after)
    assert change is not None
    assert change.reviewers.tolist() == [1] and not len(change.papers)
    assert change.conflicts_same and change.pairs == ()


def test_a_warm_start_from_a_patched_outcome_maps_onto_a_built_network() -> None:
    """warm_start_for reads a patched network (capacity-0 arcs) like any other."""
    session = random_session(83, unscored="exclude")
    first = make_plan(session, fresh=True)
    second = make_plan(_withdrawn(session, 0), fresh=True, warm=first)
    assert second.patched
    grown = _withdrawn(session, 0).model_copy(
        update={"policy": Policy(**{**session.policy.model_dump(), "cap": 4})}
    )
    third = make_plan(grown, fresh=True, warm=second)
    assert not third.patched
    assert third.tiers == make_plan(grown, fresh=True).tiers
    assert isinstance(third, PlanOutcome)


def _arrays_equal(a: patch_module.SessionArrays, b: patch_module.SessionArrays) -> bool:
    return all(
        np.array_equal(getattr(a, name), getattr(b, name))
        for name in ("reviews", "minimum", "cap", "floor", "allowance", "need")
    )


def test_changed_arrays_read_only_the_changed_entities_and_match_a_full_pass() -> None:
    session = _rules_session(4)
    rng = np.random.default_rng(31)
    for _ in range(200):
        j = int(rng.integers(len(session.reviewers)))
        i = int(rng.integers(len(session.papers)))
        r_update: dict[str, object] = {
            "cap": int(rng.integers(0, 4)) if rng.random() < 0.5 else None,
            "floor": int(rng.integers(0, 2)) if rng.random() < 0.5 else None,
            "overload": int(rng.integers(0, 3)) if rng.random() < 0.5 else None,
            "withdrawn": bool(rng.random() < 0.3),
        }
        p_update: dict[str, object] = {
            "reviews": int(rng.integers(1, 5)) if rng.random() < 0.5 else None,
            "min_reviews": 1 if rng.random() < 0.5 else None,
            "senior_min": int(rng.integers(0, 5)) if rng.random() < 0.5 else None,
            "withdrawn": bool(rng.random() < 0.3),
        }
        reviewers = list(session.reviewers)
        reviewers[j] = reviewers[j].model_copy(update=r_update)
        papers = list(session.papers)
        papers[i] = papers[i].model_copy(update=p_update)
        after = session.model_copy(update={"reviewers": reviewers, "papers": papers})
        change = session_change(session, after)
        assert change is not None
        updated = patch_module.changed_arrays(patch_module.session_arrays(session), after, change)
        assert _arrays_equal(updated, patch_module.session_arrays(after))
        session = after


def test_a_chain_of_patched_replans_updates_the_kept_arrays(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Each outcome keeps the arrays of the session it was planned on (a patched one those its
    # patch derived from the earlier outcome's); they must equal a full pass over that session.
    calls: list[int] = []
    original = patch_module.changed_arrays

    def spy(*args: object) -> patch_module.SessionArrays:
        calls.append(1)
        return original(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(patch_module, "changed_arrays", spy)
    for seed in range(6):
        rng = np.random.default_rng(400 + seed)
        ws = Workspace(_rules_session(seed) if seed % 2 else random_session(410 + seed))
        first = ws.solve()
        first.kept_flow()
        assert first.kept.arrays is not None
        for _ in range(4):
            _change(ws, rng)
            try:
                outcome = ws.solve()
            except PlanInputError:
                break
            if outcome.patched:
                assert outcome.kept.arrays is not None
            arrays = outcome.entity_arrays()
            assert arrays is not None and outcome.planned is not None
            assert _arrays_equal(arrays, patch_module.session_arrays(outcome.planned))
            assert not arrays.cap.flags.writeable
    assert calls


def test_arrays_are_read_anew_without_the_earlier_sessions() -> None:
    session = random_session(72, unscored="exclude")
    after = _withdrawn(session, 2)
    change = session_change(session, after)
    assert change is not None
    arrays = patch_module.arrays_for(session, after, change, None)
    assert _arrays_equal(arrays, patch_module.session_arrays(after))
    kept = patch_module.arrays_for(session, after, change, patch_module.session_arrays(session))
    assert _arrays_equal(kept, arrays)
    # The patched re-plan's outcome holds its own session's arrays, not the earlier one's.
    outcome = make_plan(session)
    outcome.kept_flow()
    again = make_plan(after, warm=outcome)
    assert again.patched and again.kept.arrays is not None
    assert _arrays_equal(again.kept.arrays, patch_module.session_arrays(after))


@pytest.mark.parametrize("rules", [False, True])
def test_the_patch_lists_exactly_the_arcs_whose_values_changed(
    rules: bool, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The patch compares only the arcs it may have written; a comparison of every arc of the
    two networks finds the same ones (the kept flow is patched at those arcs alone)."""
    import review_alloc.plan.solve as solve_module

    seen: list[tuple[PlanNetwork, object]] = []

    def recorded(old: PlanNetwork, *args: object, **kwargs: object) -> object:
        patch = patch_module.patched_network(old, *args, **kwargs)  # type: ignore[arg-type]
        seen.append((old, patch))
        return patch

    monkeypatch.setattr(solve_module, "patched_network", recorded)
    for seed in range(12):
        rng = np.random.default_rng(9300 + seed)
        session = _rules_session(seed) if rules else random_session(9400 + seed, unscored="exclude")
        ws = Workspace(session)
        ws.solve()
        ws.solve()  # the keep tier on, so that keep flags flip too
        for _ in range(3):
            if _change(ws, rng) != "refused":
                ws.solve()
    checked = 0
    for old, patch in seen:
        if patch is None:
            continue
        net = patch.network  # type: ignore[attr-defined]
        every = np.flatnonzero(
            (net.capacities != old.capacities) | (net.lower != old.lower) | (net.costs != old.costs)
        )
        assert np.array_equal(patch.arcs, every)  # type: ignore[attr-defined]
        checked += int(len(every) > 0 and net.kept is not None)
    assert checked > 0


def test_sorted_unique_is_numpys_unique() -> None:
    rng = np.random.default_rng(12)
    for size in (0, 1, 2, 50, 4000):
        values = rng.integers(0, max(size // 2, 1), size)
        values[: size // 2] = np.sort(values[: size // 2])  # partly sorted, as the arcs come
        # Reference: numpy's np.unique.
        assert np.array_equal(patch_module._sorted_unique(values), np.unique(values))


def test_a_patched_networks_rules_and_pin_arrays_match_a_fresh_derivation() -> None:
    """The withdrawn flags the patch's rules carry over from the earlier rules, the pin flags
    and lower bounds it copies only when a pin changes, and the best-scored pair it keeps all
    equal what a fresh derivation gives (numpy's argmax; a fresh `PairRules`)."""
    from review_alloc.plan.rules import PairRules

    for seed in range(6):
        rng = np.random.default_rng(9500 + seed)
        session = random_session(9600 + seed, unscored="exclude")
        ws = Workspace(session)
        ws.solve()
        ws.solve()
        for step in range(4):
            before = ws.last_outcome
            assert before is not None
            kind = _change(ws, rng) if step else "0"
            if step == 0:
                active = [r.id for r in ws.session.reviewers if not r.withdrawn]
                ws.withdraw_reviewer(active[int(rng.integers(len(active)))], "illness")
            outcome = ws.solve()
            if not outcome.patched:
                continue
            net, old = outcome.network, before.network
            rules = net.rules
            planned = outcome.planned
            assert rules is not None and planned is not None and rules.session is planned
            fresh = PairRules(planned)
            for mine, theirs in zip(rules._withdrawn, fresh._withdrawn, strict=True):
                assert np.array_equal(mine, theirs)
            r, p = net.pair_reviewer, net.pair_paper
            assert np.array_equal(rules.forbidden(r, p), fresh.forbidden(r, p))
            assert net.top_pair == int(np.argmax(net.pair_score))
            # Pins and lower bounds: as a fresh build marks them (pair arcs of pinned pairs).
            built = build_network(planned, earlier=before.plan)
            pinned = {(int(a), int(b)) for a, b in zip(
                built.pair_reviewer[built.pair_pinned], built.pair_paper[built.pair_pinned],
                strict=True)}
            mine_pinned = {(int(a), int(b)) for a, b in zip(
                r[net.pair_pinned], p[net.pair_pinned], strict=True)}
            assert mine_pinned == pinned
            assert np.array_equal(net.lower[net.pair_arcs], net.pair_pinned.astype(np.int64))
            if kind in ("6", "7"):
                continue
            # No pin set or lifted: the pin flags and lower bounds are the earlier arrays.
            assert net.pair_pinned is old.pair_pinned
            assert net.lower is old.lower or old.senior_hard
