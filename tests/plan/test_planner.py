"""The planner against outside references: HiGHS sequential LPs and OR-tools max flow."""

from __future__ import annotations

import numpy as np
import pytest
from ortools.graph.python import max_flow as ortools_max_flow

from review_alloc.model import (
    Conflict,
    ConflictRules,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.plan import PlanCheckError, PlanInputError, check_plan, make_plan
from tests.plan.reference import Instance, lexicographic_optimum

NO_INFERENCE = ConflictRules(author_email=False, institution=False, email_domain=False)


def random_session(seed: int, *, unscored: str = "zero", pins: bool = False) -> Session:
    """A seeded random session with declared conflicts, blocks, floors and overrides."""
    rng = np.random.default_rng(seed)
    n_r, n_p = int(rng.integers(2, 9)), int(rng.integers(2, 12))
    reviewers = [
        Reviewer(
            id=f"r{j}",
            cap=int(rng.integers(0, 5)) if rng.random() < 0.7 else None,
            floor=int(rng.integers(0, 2)) if rng.random() < 0.3 else None,
        )
        for j in range(n_r)
    ]
    policy = Policy(
        reviews=3, min_reviews=2, cap=3, floor=0, unscored=unscored, conflict_rules=NO_INFERENCE
    )
    for j, r in enumerate(reviewers):  # keep floor <= cap valid
        cap = r.cap if r.cap is not None else policy.cap
        if r.floor is not None and r.floor > cap:
            reviewers[j] = r.model_copy(update={"floor": cap})
    papers = [
        Paper(id=f"p{i}", reviews=int(rng.integers(1, 5)) if rng.random() < 0.3 else None)
        for i in range(n_p)
    ]
    for i, p in enumerate(papers):
        if p.reviews is not None and rng.random() < 0.5:
            papers[i] = p.model_copy(update={"min_reviews": int(rng.integers(0, p.reviews + 1))})
    all_pairs = [(j, i) for j in range(n_r) for i in range(n_p)]
    rng.shuffle(all_pairs)
    k = len(all_pairs)
    scored = all_pairs[: int(k * 0.7)]
    conflicted = all_pairs[int(k * 0.7) : int(k * 0.8)]
    blocked = all_pairs[int(k * 0.8) : int(k * 0.85)]
    conflicts = [Conflict(reviewer=f"r{j}", paper=f"p{i}") for j, i in conflicted]
    blocks = [PairRule(reviewer=f"r{j}", paper=f"p{i}") for j, i in blocked]
    values = np.round(rng.uniform(0, 1, size=len(scored)), 2)
    scores = ScoreTable.from_arrays(
        np.array([j for j, _ in scored], dtype=np.int32),
        np.array([i for _, i in scored], dtype=np.int32),
        values,
    )
    pin_rows: list[PairRule] = []
    if pins:
        load: dict[int, int] = {}
        for j, i in scored[:3]:
            cap = reviewers[j].cap if reviewers[j].cap is not None else policy.cap
            want = papers[i].reviews if papers[i].reviews is not None else policy.reviews
            if load.get(j, 0) < cap and sum(1 for p in pin_rows if p.paper == f"p{i}") < want:
                load[j] = load.get(j, 0) + 1
                pin_rows.append(PairRule(reviewer=f"r{j}", paper=f"p{i}"))
    return Session(
        name=f"random {seed}",
        policy=policy,
        papers=papers,
        reviewers=reviewers,
        conflicts=conflicts,
        scores=scores,
        blocks=blocks,
        pins=pin_rows,
    )


def reference_instance(session: Session) -> Instance:
    """Eligible pairs computed straight from the session's rows, without the planner's code."""
    n_r, n_p = len(session.reviewers), len(session.papers)
    rid = {r.id: j for j, r in enumerate(session.reviewers)}
    pid = {p.id: i for i, p in enumerate(session.papers)}
    banned = {(rid[c.reviewer], pid[c.paper]) for c in session.conflicts}
    banned |= {(rid[b.reviewer], pid[b.paper]) for b in session.blocks}
    score = {
        (int(j), int(i)): float(v)
        for j, i, v in zip(
            session.scores.reviewer, session.scores.paper, session.scores.value, strict=True
        )
    }
    pinned = {(rid[p.reviewer], pid[p.paper]) for p in session.pins}
    pairs = []
    for j in range(n_r):
        for i in range(n_p):
            ok = (j, i) in score or session.policy.unscored == "zero" or (j, i) in pinned
            if ok and (j, i) not in banned:
                pairs.append((j, i))
    pol = session.policy
    cap = np.array([r.cap if r.cap is not None else pol.cap for r in session.reviewers])
    floor = np.array([r.floor if r.floor is not None else pol.floor for r in session.reviewers])
    reviews = np.array(
        [p.reviews if p.reviews is not None else pol.reviews for p in session.papers]
    )
    minimum = np.array(
        [
            p.min_reviews if p.min_reviews is not None else min(pol.min_reviews, reviews[i])
            for i, p in enumerate(session.papers)
        ]
    )
    arr = np.array(pairs, dtype=np.int64).reshape(-1, 2)
    return Instance(
        cap=cap,
        floor=np.minimum(floor, cap),
        reviews=reviews,
        min_reviews=minimum,
        pairs=arr,
        score=np.array([score.get((j, i), 0.0) for j, i in pairs]),
        pinned=np.array([(j, i) in pinned for j, i in pairs], dtype=bool),
    )


@pytest.mark.parametrize("seed", range(40))
@pytest.mark.parametrize("unscored", ["zero", "exclude"])
def test_plan_matches_highs_lexicographic_reference(seed: int, unscored: str) -> None:
    session = random_session(seed, unscored=unscored, pins=seed % 3 == 0)
    outcome = make_plan(session)
    f = outcome.plan.figures
    # Reference: HiGHS (scipy.optimize.linprog) solving the tiers one after another.
    ref = lexicographic_optimum(reference_instance(session))
    assert (f.required_coverage, f.coverage, f.floors_met) == ref[:3]
    assert f.total_score == pytest.approx(ref[3], abs=1e-6)
    assert outcome.plan.checked


@pytest.mark.parametrize("seed", range(20))
def test_coverage_matches_ortools_max_flow(seed: int) -> None:
    session = random_session(100 + seed)
    inst = reference_instance(session)
    n_r, n_p = len(inst.cap), len(inst.reviews)
    # Reference: OR-tools SimpleMaxFlow on source -> reviewer (cap) -> paper -> sink (reviews).
    solver = ortools_max_flow.SimpleMaxFlow()
    s, t = n_r + n_p, n_r + n_p + 1
    for j in range(n_r):
        solver.add_arc_with_capacity(s, j, int(inst.cap[j]))
    for j, i in inst.pairs:
        solver.add_arc_with_capacity(int(j), n_r + int(i), 1)
    for i in range(n_p):
        solver.add_arc_with_capacity(n_r + i, t, int(inst.reviews[i]))
    assert solver.solve(s, t) == solver.OPTIMAL
    assert make_plan(session).plan.figures.coverage == solver.optimal_flow()


@pytest.mark.parametrize("seed", range(30))
def test_plan_keeps_every_hard_rule(seed: int) -> None:
    session = random_session(200 + seed, unscored="exclude" if seed % 2 else "zero", pins=True)
    plan = make_plan(session).plan
    pairs = [(a.reviewer, a.paper) for a in plan.assignments]
    assert len(pairs) == len(set(pairs))
    assert not set(pairs) & {(c.reviewer, c.paper) for c in session.conflicts}
    assert not set(pairs) & {(b.reviewer, b.paper) for b in session.blocks}
    assert {(p.reviewer, p.paper) for p in session.pins} <= set(pairs)
    caps = session.reviewer_cap_array()
    rid = session.reviewer_index()
    loads = np.bincount([rid[r] for r, _ in pairs], minlength=len(session.reviewers))
    assert np.all(loads <= caps)


def test_checker_rejects_a_conflicted_pair_and_a_forged_certificate() -> None:
    session = random_session(7)
    outcome = make_plan(session)
    plan = outcome.plan
    bad_pair = session.conflicts[0]
    forged = plan.model_copy(
        update={
            "assignments": [
                *plan.assignments,
                type(plan.assignments[0])(
                    paper=bad_pair.paper, reviewer=bad_pair.reviewer, score=0.0
                ),
            ]
        }
    )
    with pytest.raises(PlanCheckError, match="conflicted pair"):
        check_plan(session, forged, outcome.potentials)
    with pytest.raises(PlanCheckError, match="certificate"):
        check_plan(session, plan, outcome.potentials + np.arange(len(outcome.potentials)) * 7)


def test_a_worse_plan_fails_the_certificate() -> None:
    session = random_session(11)
    outcome = make_plan(session)
    plan = outcome.plan
    assert plan.assignments, "the case needs at least one assignment"
    fewer = plan.assignments[1:]
    from review_alloc.plan.figures import assignment_indices, plan_figures

    r, p, s = assignment_indices(session, fewer)
    weaker = plan.model_copy(
        update={"assignments": fewer, "figures": plan_figures(session, r, p, s)}
    )
    with pytest.raises(PlanCheckError, match="certificate"):
        check_plan(session, weaker, outcome.potentials)


def test_conflicted_pin_is_refused_with_its_reason() -> None:
    session = random_session(3)
    c = session.conflicts[0]
    session = session.model_copy(update={"conflicts": session.conflicts})
    with pytest.raises(ValueError, match="conflict"):
        Session.model_validate(
            {**session.model_dump(), "pins": [{"reviewer": c.reviewer, "paper": c.paper}]}
        )


def test_pin_over_cap_is_refused() -> None:
    session = random_session(5)
    r = session.reviewers[0]
    r_cap = session.reviewer_cap(0)
    banned = {(c.reviewer, c.paper) for c in session.conflicts} | {
        (b.reviewer, b.paper) for b in session.blocks
    }
    free = [p.id for p in session.papers if (r.id, p.id) not in banned][: r_cap + 1]
    if len(free) <= r_cap:
        pytest.skip("not enough unconflicted papers for this reviewer in the seeded case")
    pinned = session.model_copy(update={"pins": [PairRule(reviewer=r.id, paper=p) for p in free]})
    with pytest.raises(PlanInputError, match="cap"):
        make_plan(pinned)
