"""The sparse lead choice (`plan.lead_paths`, shortest augmenting paths) against scipy's
linear_sum_assignment on the dense slot matrix (the planner's own dense path) and against
OR-Tools' min-cost flow on the same choice written as a network."""

from __future__ import annotations

import numpy as np
import pytest
from ortools.graph.python import min_cost_flow

import review_alloc.plan.leads as leads
from review_alloc.model import Paper, Plan, Policy, Reviewer, Session
from review_alloc.plan import check_plan
from review_alloc.plan.figures import assignment_indices
from review_alloc.plan.lead_paths import lead_paths_kernel
from review_alloc.plan.leads import pick_leads, with_leads
from tests.plan.test_constraints_leads import plan_of, value, with_scores


def _mixed_load_case(seed: int, n_r: int = 120, n_p: int = 150) -> tuple[Session, Plan]:
    """Reviewers with few and with many reviews (some under the lead cap, some over it), ties
    in score, and some seniors: many papers settle at once, the rest need longer paths."""
    rng = np.random.default_rng(seed)
    reviewers = [Reviewer(id=f"r{j}", senior=bool(rng.random() < 0.3)) for j in range(n_r)]
    papers = [Paper(id=f"p{i}") for i in range(n_p)]
    session = Session(
        name=f"mixed leads {seed}", policy=Policy(max_leads=int(rng.integers(1, 4)), cap=40),
        papers=papers, reviewers=reviewers,
    )
    # A few busy reviewers take many papers; the rest take one or two.
    weight = np.where(np.arange(n_r) < n_r // 8, 12.0, 1.0)
    weight /= weight.sum()
    pairs = [
        (f"r{j}", f"p{i}", float(rng.choice([0.25, 0.5, 0.75, 1.0])))
        for i in range(n_p)
        for j in rng.choice(n_r, size=int(rng.integers(1, 4)), replace=False, p=weight)
    ]
    session = with_scores(session, pairs)
    return session, plan_of(session, pairs)


def _sparse_and_dense(
    session: Session, plan: Plan, monkeypatch: pytest.MonkeyPatch
) -> tuple[tuple, tuple]:
    """(papers led, senior leads, lead score) of the sparse and of the dense choice."""
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    choice = pick_leads(session, plan)
    check_plan(session, with_leads(plan, choice), None)
    sparse = value(session, plan, choice.lead_of)
    monkeypatch.undo()
    dense = value(session, plan, pick_leads(session, plan).lead_of)
    return sparse, dense


@pytest.mark.parametrize("seed", range(8))
def test_the_sparse_choice_matches_dense(seed: int, monkeypatch: pytest.MonkeyPatch) -> None:
    session, plan = _mixed_load_case(seed)
    sparse, dense = _sparse_and_dense(session, plan, monkeypatch)
    # Reference: scipy's linear_sum_assignment on the dense slot matrix.
    assert sparse[:2] == dense[:2]
    assert sparse[2] == pytest.approx(dense[2], abs=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_choices_over_random_replans_match_dense(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Re-plans move one or a handful of reviews; each choice is made anew on the new pairs.
    rng = np.random.default_rng(100 + seed)
    session, plan = _mixed_load_case(seed)
    for _ in range(5):
        rows = [(a.reviewer, a.paper, a.score) for a in plan.assignments]
        taken = {(r, p) for r, p, _ in rows}
        for k in rng.choice(len(rows), size=int(rng.integers(1, 6)), replace=False).tolist():
            paper = rows[k][1]
            while (reviewer := f"r{int(rng.integers(len(session.reviewers)))}", paper) in taken:
                pass
            taken.add((reviewer, paper))
            rows[k] = (reviewer, paper, float(rng.choice([0.25, 0.5, 0.75, 1.0])))
        session = with_scores(session, rows)
        plan = plan_of(session, rows)
        sparse, dense = _sparse_and_dense(session, plan, monkeypatch)
        # Reference: scipy's linear_sum_assignment on the dense slot matrix, from scratch.
        assert sparse[:2] == dense[:2]
        assert sparse[2] == pytest.approx(dense[2], abs=1e-9)


def test_a_later_paper_takes_a_lead_from_an_earlier_one() -> None:
    # p0 comes first and takes r0, its only reviewer; p1 scores higher with r0 and has no
    # other reviewer: its path runs back through p0 to p0's "no lead" arc (one paper led
    # either way, so the score decides).
    session = Session(
        name="taken back", policy=Policy(max_leads=1, cap=5),
        papers=[Paper(id="p0"), Paper(id="p1")], reviewers=[Reviewer(id="r0")],
    )
    rows = [("r0", "p0", 0.1), ("r0", "p1", 0.9)]
    session = with_scores(session, rows)
    plan = plan_of(session, rows)
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    mask = leads._leads_by_paths(
        reviewer, paper, np.zeros(2, dtype=bool), np.rint(score * 10_000).astype(np.int64),
        np.ones(1, dtype=np.int64), 2, 2,
    )
    assert mask.tolist() == [False, True]


def test_a_chain_of_reviewers_hands_leads_along() -> None:
    # Each reviewer may lead one paper. p_k prefers r_k, which p_(k+1) needs too, and the last
    # paper has r_k alone: leading every paper needs the whole chain shifted by one.
    n = 6
    reviewers = [Reviewer(id=f"r{j}") for j in range(n + 1)]
    papers = [Paper(id=f"p{i}") for i in range(n + 1)]
    session = Session(
        name="chain", policy=Policy(max_leads=1, cap=5), papers=papers, reviewers=reviewers
    )
    rows = [(f"r{i}", f"p{i}", 0.9) for i in range(n)] + [(f"r{i + 1}", f"p{i}", 0.2)
                                                           for i in range(n)]
    rows.append((f"r{n - 1}", f"p{n}", 0.5))
    session = with_scores(session, rows)
    plan = plan_of(session, rows)
    choice = pick_leads(session, plan)
    # Hand count: 7 papers, 7 reviewers, all led only if p_n takes r_(n-1) and p_(n-1) moves
    # to r_n; the others keep their 0.9 pair.
    assert len(choice.lead_of) == n + 1
    assert choice.lead_of[f"p{n}"] == f"r{n - 1}"
    assert choice.lead_of[f"p{n - 1}"] == f"r{n}"


def _ortools_leads(
    reviewer: np.ndarray, paper: np.ndarray, senior: np.ndarray, steps: np.ndarray,
    slots: np.ndarray, n_p: int,
) -> tuple[int, int, int]:
    """(papers led, senior leads, score steps) of OR-Tools' min-cost flow on the network
    source -> reviewer (capacity: slots) -> paper (assigned pairs) -> sink, with the usual
    lexicographic weights (a lead outweighs every senior and score sum, a senior every score
    sum), each paper's unit free to skip to the sink at cost 0."""
    n_r = len(slots)
    top = int(steps.max(initial=0))
    per_senior = n_p * (top + 1) + 1
    per_lead = n_p * (per_senior + top) + 1
    flow = min_cost_flow.SimpleMinCostFlow()
    source, sink = n_r + n_p, n_r + n_p + 1
    skip = n_r + n_p + 2
    for j in range(n_r):
        flow.add_arc_with_capacity_and_unit_cost(source, j, int(slots[j]), 0)
    arcs = []
    for k in range(len(paper)):
        gain = per_lead + per_senior * int(senior[k]) + int(steps[k])
        arcs.append(flow.add_arc_with_capacity_and_unit_cost(
            int(reviewer[k]), n_r + int(paper[k]), 1, -gain))
    has = np.bincount(paper, minlength=n_p) > 0
    for i in np.flatnonzero(has).tolist():
        flow.add_arc_with_capacity_and_unit_cost(n_r + i, sink, 1, 0)
    # Every paper's unit leaves the source: through a reviewer, or straight along `skip`.
    flow.add_arc_with_capacity_and_unit_cost(source, skip, int(has.sum()), 0)
    flow.add_arc_with_capacity_and_unit_cost(skip, sink, int(has.sum()), 0)
    flow.set_node_supply(source, int(has.sum()))
    flow.set_node_supply(sink, -int(has.sum()))
    assert flow.solve() == flow.OPTIMAL
    chosen = np.array([flow.flow(a) > 0 for a in arcs], dtype=bool)
    return int(chosen.sum()), int(senior[chosen].sum()), int(steps[chosen].sum())


@pytest.mark.parametrize("seed", range(12))
def test_the_kernel_matches_ortools_min_cost_flow(seed: int) -> None:
    rng = np.random.default_rng(700 + seed)
    n_r, n_p = int(rng.integers(5, 60)), int(rng.integers(5, 120))
    pairs = {
        (int(j), i) for i in range(n_p)
        for j in rng.choice(n_r, size=int(rng.integers(1, min(n_r, 5) + 1)), replace=False)
    }
    reviewer = np.array([j for j, _ in sorted(pairs)], dtype=np.int64)
    paper = np.array([i for _, i in sorted(pairs)], dtype=np.int64)
    order = rng.permutation(len(paper))  # any row order
    reviewer, paper = reviewer[order], paper[order]
    senior = (rng.random(n_r) < 0.3)[reviewer]
    steps = rng.integers(0, 50, len(paper)).astype(np.int64)  # small range: many ties
    slots = np.minimum(rng.integers(0, 4, n_r), np.bincount(reviewer, minlength=n_r))
    n_led = int((np.bincount(paper, minlength=n_p) > 0).sum())
    lead = lead_paths_kernel(
        reviewer, paper, n_led + 1 + senior.astype(np.int64), steps, slots.astype(np.int64),
        np.int64(n_p),
    )
    chosen = lead[lead >= 0]
    # Every paper at most once, through its own pairs, every reviewer within its slots.
    assert np.array_equal(paper[chosen], np.flatnonzero(lead >= 0))
    assert (np.bincount(reviewer[chosen], minlength=n_r) <= slots).all()
    got = (len(chosen), int(senior[chosen].sum()), int(steps[chosen].sum()))
    # Reference: OR-Tools' SimpleMinCostFlow on the network with lexicographic weights.
    assert got == _ortools_leads(reviewer, paper, senior, steps, slots, n_p)


def test_each_plan_kernel_compiles_one_signature(monkeypatch: pytest.MonkeyPatch) -> None:
    """The lead kernel and the checker's fused pass are called with the same dtypes from every
    call site (a second signature would compile again, seconds on a cold cache)."""
    import review_alloc.plan.checker as checker
    from review_alloc.plan import make_plan
    from review_alloc.plan.check_pass import pair_block_faults
    from tests.plan.test_planner import random_session

    if not hasattr(lead_paths_kernel, "signatures"):
        pytest.skip("numba's JIT is disabled")
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    monkeypatch.setattr(checker, "FUSED_PAIRS", 0)
    # The cold warm-up's own calls (`flow.compile.also_warm`) must compile that very signature.
    from review_alloc.plan import check_pass, lead_paths

    lead_paths.exercise()
    check_pass.exercise()
    for seed in range(3):
        session, plan = _mixed_load_case(seed)
        pick_leads(session, plan)
        session = random_session(4500 + seed)
        session = session.model_copy(
            update={"policy": session.policy.model_copy(update={"max_leads": 2})}
        )
        first = make_plan(session)
        again = make_plan(session.model_copy(update={"plan": first.plan}), warm=first)
        assert again.check_state is not None
    assert len(lead_paths_kernel.signatures) == 1
    assert len(pair_block_faults.signatures) == 1
