"""Lead picks against brute force and against scipy's linear_sum_assignment."""

from __future__ import annotations

import itertools
from datetime import UTC, datetime

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

import review_alloc.plan.leads as leads
from review_alloc.model import (
    MAX_SCORE,
    Assignment,
    Paper,
    Plan,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.plan import PlanCheckError, check_plan
from review_alloc.plan.figures import assignment_indices, plan_figures
from review_alloc.plan.leads import pick_leads, with_leads


def with_scores(session: Session, pairs: list[tuple[str, str, float]]) -> Session:
    """The session with a score row for every given (reviewer, paper, score)."""
    r_at, p_at = session.reviewer_index(), session.paper_index()
    table = ScoreTable.from_arrays(
        np.array([r_at[r] for r, _, _ in pairs], dtype=np.int32),
        np.array([p_at[p] for _, p, _ in pairs], dtype=np.int32),
        np.array([v for _, _, v in pairs], dtype=np.float64),
    )
    return session.model_copy(update={"scores": table})


def plan_of(session: Session, pairs: list[tuple[str, str, float]]) -> Plan:
    """A plan with the given (reviewer, paper, score) assignments and its figures."""
    rows = [Assignment(reviewer=r, paper=p, score=s) for r, p, s in pairs]
    reviewer, paper, score = assignment_indices(session, rows)
    return Plan(
        assignments=rows,
        figures=plan_figures(session, reviewer, paper, score),
        created_at=datetime(2027, 1, 1, tzinfo=UTC),
        checked=False,
        method="test",
    )


def lead_case(seed: int) -> tuple[Session, Plan]:
    """A small random session and plan: every paper gets 1-3 of the reviewers."""
    rng = np.random.default_rng(seed)
    n_r, n_p = int(rng.integers(2, 5)), int(rng.integers(2, 6))
    reviewers = [Reviewer(id=f"r{j}", senior=bool(rng.random() < 0.4)) for j in range(n_r)]
    papers = [Paper(id=f"p{i}") for i in range(n_p)]
    session = Session(
        name=f"leads {seed}",
        policy=Policy(max_leads=int(rng.integers(1, 3)), cap=10),
        papers=papers,
        reviewers=reviewers,
    )
    pairs = []
    for i in range(n_p):
        chosen = rng.choice(n_r, size=int(rng.integers(1, min(3, n_r) + 1)), replace=False)
        for j in chosen:
            pairs.append((f"r{j}", f"p{i}", float(np.round(rng.uniform(0, 1), 2))))
    session = with_scores(session, pairs)
    return session, plan_of(session, pairs)


def value(session: Session, plan: Plan, lead_of: dict[str, str]) -> tuple[int, int, float]:
    """(papers led, senior leads, total lead score) of a lead choice."""
    senior = {r.id: r.senior for r in session.reviewers}
    score = {(a.reviewer, a.paper): a.score for a in plan.assignments}
    return (
        len(lead_of),
        sum(senior[r] for r in lead_of.values()),
        round(sum(score[(r, p)] for p, r in lead_of.items()), 6),
    )


def brute_force(session: Session, plan: Plan) -> tuple[int, int, float]:
    """The best (papers led, senior leads, lead score) over every choice within the lead cap."""
    by_paper: dict[str, list[str | None]] = {}
    for a in plan.assignments:
        by_paper.setdefault(a.paper, [None]).append(a.reviewer)
    papers = sorted(by_paper)
    best = (-1, -1, -1.0)
    for choice in itertools.product(*(by_paper[p] for p in papers)):
        counts: dict[str, int] = {}
        for r in choice:
            if r is not None:
                counts[r] = counts.get(r, 0) + 1
        if any(c > session.policy.max_leads for c in counts.values()):
            continue
        lead_of = {p: r for p, r in zip(papers, choice, strict=True) if r is not None}
        best = max(best, value(session, plan, lead_of))
    return best


@pytest.mark.parametrize("seed", range(40))
def test_leads_match_brute_force(seed: int) -> None:
    session, plan = lead_case(seed)
    choice = pick_leads(session, plan)
    # Reference: exhaustive search over every lead choice (lexicographic order of the three).
    got = value(session, plan, choice.lead_of)
    want = brute_force(session, plan)
    assert got[:2] == want[:2]
    assert got[2] == pytest.approx(want[2], abs=1e-9)
    led = with_leads(plan, choice)
    check_plan(session, led, None)


def test_linear_sum_assignment_docs_example_smoke() -> None:
    # Source: scipy.optimize.linear_sum_assignment documentation example, cost
    # [[4, 1, 3], [2, 0, 5], [3, 2, 2]] has minimum total 5.
    cost = np.array([[4, 1, 3], [2, 0, 5], [3, 2, 2]])
    rows, cols = linear_sum_assignment(cost)
    assert cost[rows, cols].sum() == 5
    # The same case as leads: every reviewer on every paper, one lead each, score = 5 - cost,
    # so the best leads score 3 * 5 - 5 = 10.
    reviewers = [Reviewer(id=f"r{j}") for j in range(3)]
    papers = [Paper(id=f"p{i}") for i in range(3)]
    session = Session(
        name="docs example", policy=Policy(max_leads=1), papers=papers, reviewers=reviewers
    )
    pairs = [(f"r{j}", f"p{i}", float(5 - cost[i, j])) for i in range(3) for j in range(3)]
    plan = plan_of(session, pairs)
    choice = pick_leads(session, plan)
    assert len(choice.lead_of) == 3
    total = sum(5 - cost[int(p[1:]), int(r[1:])] for p, r in choice.lead_of.items())
    assert 15 - total == 5


@pytest.mark.parametrize("seed", range(15))
def test_one_lead_each_matches_unexpanded_linear_sum_assignment(seed: int) -> None:
    rng = np.random.default_rng(900 + seed)
    n = int(rng.integers(2, 7))
    score = np.round(rng.uniform(0, 1, size=(n, n)), 2)
    reviewers = [Reviewer(id=f"r{j}") for j in range(n)]
    papers = [Paper(id=f"p{i}") for i in range(n)]
    session = Session(name="square", policy=Policy(max_leads=1), papers=papers, reviewers=reviewers)
    plan = plan_of(
        session, [(f"r{j}", f"p{i}", float(score[i, j])) for i in range(n) for j in range(n)]
    )
    choice = pick_leads(session, plan)
    # Reference: scipy's linear_sum_assignment on the plain paper x reviewer score matrix.
    rows, cols = linear_sum_assignment(score, maximize=True)
    got = sum(score[int(p[1:]), int(r[1:])] for p, r in choice.lead_of.items())
    assert got == pytest.approx(score[rows, cols].sum(), abs=1e-9)


def test_papers_without_a_senior_lead_are_reported() -> None:
    reviewers = [Reviewer(id="s", senior=True), Reviewer(id="j")]
    papers = [Paper(id=f"p{i}") for i in range(3)]
    session = Session(
        name="few seniors", policy=Policy(max_leads=2), papers=papers, reviewers=reviewers
    )
    plan = plan_of(session, [(r, f"p{i}", 0.5) for i in range(3) for r in ("s", "j")])
    choice = pick_leads(session, plan)
    assert len(choice.lead_of) == 3
    assert len(choice.no_senior_lead) == 1
    assert sum(r == "s" for r in choice.lead_of.values()) == 2


def test_checker_rejects_too_many_leads() -> None:
    reviewers = [Reviewer(id="a"), Reviewer(id="b")]
    papers = [Paper(id=f"p{i}") for i in range(3)]
    session = Session(
        name="lead cap", policy=Policy(max_leads=1), papers=papers, reviewers=reviewers
    )
    pairs = [("a", f"p{i}", 0.5) for i in range(3)]
    session = with_scores(session, pairs)
    plan = plan_of(session, pairs)
    forged = plan.model_copy(
        update={"assignments": [a.model_copy(update={"lead": True}) for a in plan.assignments]}
    )
    with pytest.raises(PlanCheckError, match="max_leads"):
        check_plan(session, forged, None)


@pytest.mark.parametrize("seed", range(40))
def test_sparse_path_matches_brute_force(seed: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # Large venues take the sparse shortest-path choice; force it on the small cases.
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    session, plan = lead_case(seed)
    choice = pick_leads(session, plan)
    # Reference: exhaustive search over every lead choice (lexicographic order of the three).
    got = value(session, plan, choice.lead_of)
    want = brute_force(session, plan)
    assert got[:2] == want[:2]
    assert got[2] == pytest.approx(want[2], abs=1e-9)
    check_plan(session, with_leads(plan, choice), None)


def _larger_lead_case(seed: int) -> tuple[Session, Plan]:
    """A few hundred papers with three reviewers each, so that lead limits bind somewhere."""
    rng = np.random.default_rng(seed)
    n_r, n_p = 60, 200
    reviewers = [Reviewer(id=f"r{j}", senior=bool(rng.random() < 0.3)) for j in range(n_r)]
    papers = [Paper(id=f"p{i}") for i in range(n_p)]
    session = Session(
        name=f"many leads {seed}", policy=Policy(max_leads=3, cap=20),
        papers=papers, reviewers=reviewers,
    )
    pairs = [
        (f"r{j}", f"p{i}", float(np.round(rng.uniform(0, 1), 2)))
        for i in range(n_p)
        for j in rng.choice(n_r, size=3, replace=False)
    ]
    session = with_scores(session, pairs)
    return session, plan_of(session, pairs)


@pytest.mark.parametrize(("seed", "senior"), [(0, True), (1, False), (2, True), (3, False)])
def test_sparse_path_with_all_or_no_seniors(
    seed: int, senior: bool, monkeypatch: pytest.MonkeyPatch
) -> None:
    # With every reviewer senior, or none, the senior part of every gain is the same.
    session, plan = _larger_lead_case(seed)
    session = session.model_copy(
        update={"reviewers": [r.model_copy(update={"senior": senior}) for r in session.reviewers]}
    )
    monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
    sparse = value(session, plan, pick_leads(session, plan).lead_of)
    monkeypatch.undo()
    # Reference: scipy's linear_sum_assignment on the dense slot matrix.
    dense = value(session, plan, pick_leads(session, plan).lead_of)
    assert sparse[:2] == dense[:2]
    assert sparse[2] == pytest.approx(dense[2], abs=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_sparse_choices_after_moved_reviews_match_dense(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A re-plan moves a few reviews; the sparse choice is made again on the new pairs.
    rng = np.random.default_rng(seed)
    session, plan = _larger_lead_case(seed)
    for _ in range(3):
        rows = [(a.reviewer, a.paper, a.score) for a in plan.assignments]
        drop = set(rng.choice(len(rows), size=8, replace=False).tolist())
        taken = {(r, p) for r, p, _ in rows}
        # Each dropped review moves to another reviewer of the same paper.
        for k in sorted(drop):
            paper = rows[k][1]
            while (reviewer := f"r{int(rng.integers(60))}", paper) in taken:
                pass
            taken.add((reviewer, paper))
            rows[k] = (reviewer, paper, float(np.round(rng.uniform(0, 1), 2)))
        session = with_scores(session, rows)
        plan = plan_of(session, rows)
        monkeypatch.setattr(leads, "DENSE_LIMIT", 0)
        choice = pick_leads(session, plan)
        sparse = value(session, plan, choice.lead_of)
        monkeypatch.undo()
        # Reference: scipy's linear_sum_assignment on the dense slot matrix, from scratch.
        dense = value(session, plan, pick_leads(session, plan).lead_of)
        assert sparse[:2] == dense[:2]
        assert sparse[2] == pytest.approx(dense[2], abs=1e-9)
        check_plan(session, with_leads(plan, choice), None)


def _milp_leads(session: Session, plan: Plan) -> tuple[int, int, float]:
    """(papers led, senior leads, lead score) by HiGHS integer programs, one tier at a time."""
    from scipy.optimize import Bounds, LinearConstraint, milp

    rows = plan.assignments
    senior = {r.id: r.senior for r in session.reviewers}
    papers = sorted({x.paper for x in rows})
    people = sorted({x.reviewer for x in rows})
    matrix = np.zeros((len(papers) + len(people), len(rows)))
    for k, x in enumerate(rows):
        matrix[papers.index(x.paper), k] = 1
        matrix[len(papers) + people.index(x.reviewer), k] = 1
    low = [-np.inf] * len(matrix)
    high = [1.0] * len(papers) + [float(session.policy.max_leads)] * len(people)
    top = max(x.score for x in rows)
    stages = [
        np.ones(len(rows)),
        np.array([float(senior[x.reviewer]) for x in rows]),
        np.array([x.score / top for x in rows]),  # scaled, so that HiGHS sees numbers near 1
    ]
    found = []
    for c in stages:
        res = milp(
            -c,
            constraints=LinearConstraint(matrix, low, high),
            bounds=Bounds(0, 1),
            integrality=np.ones(len(rows)),
        )
        assert res.status == 0
        found.append(-res.fun)
        matrix = np.vstack([matrix, c])
        low.append(found[-1] - 1e-6)
        high.append(np.inf)
    return int(round(found[0])), int(round(found[1])), found[2] * top


def _huge_score_case(seed: int, scale: float = MAX_SCORE / 1.5) -> tuple[Session, Plan]:
    """Scores around `scale` on 40 papers, up to the largest score a session admits (the model
    refuses more): before, lead weights at 1/10,000 steps overflowed int64 at scores near 1e13."""
    rng = np.random.default_rng(seed)
    n_r, n_p = 12, 40
    reviewers = [Reviewer(id=f"r{j}", senior=bool(rng.random() < 0.4)) for j in range(n_r)]
    papers = [Paper(id=f"p{i}") for i in range(n_p)]
    session = Session(
        name=f"huge scores {seed}",
        policy=Policy(max_leads=3, cap=20),
        papers=papers,
        reviewers=reviewers,
    )
    pairs = [
        (f"r{j}", f"p{i}", float(np.round(rng.uniform(0.5, 1.5) * scale)))
        for i in range(n_p)
        for j in rng.choice(n_r, size=3, replace=False)
    ]
    session = with_scores(session, pairs)
    return session, plan_of(session, pairs)


@pytest.mark.parametrize("scale", [MAX_SCORE / 1.5, MAX_SCORE / 150])
@pytest.mark.parametrize("seed", range(3))
def test_huge_scores_never_overflow_the_lead_choice(seed: int, scale: float) -> None:
    session, plan = _huge_score_case(seed, scale)
    got = value(session, plan, pick_leads(session, plan).lead_of)
    # Reference: HiGHS (scipy.optimize.milp), papers led, then senior leads, then lead score.
    want = _milp_leads(session, plan)
    assert got[:2] == want[:2]
    # The score steps are coarser here (as the plan's own are for huge scores): each lead may
    # lose at most one step, far below a millionth of the total.
    assert got[2] == pytest.approx(want[2], rel=1e-6)
    check_plan(session, with_leads(plan, pick_leads(session, plan)), None)


def test_score_steps_stay_fine_where_they_fit_and_coarsen_where_not() -> None:
    score = np.array([0.0, 0.25, 1.0])
    assert leads.score_steps(score, lambda top: True).tolist() == [0, 2_500, 10_000]
    coarse = leads.score_steps(score * 1e13, lambda top: top <= 1_000)
    assert coarse.tolist() == [0, 250, 1_000]


def test_the_dense_choice_is_kept_where_its_costs_are_exact() -> None:
    # Scores in 0..1 on a few thousand papers: the dense costs stay below 2**53 at full steps.
    assert leads._dense_fits(10_000, 3_000)
    # Near 1e13 per score they do not, and the sparse choice (two-part costs) takes over.
    assert not leads._dense_fits(10**17, 40)
    assert leads._paths_fit(10**13, 40, 60)
    # Its sums must stay inside int64: beyond, the score steps coarsen.
    assert not leads._paths_fit(2**60, 40, 60)


def test_a_plan_with_the_largest_scores_gets_its_leads() -> None:
    from review_alloc.plan import make_plan

    session, _ = _huge_score_case(7)
    outcome = make_plan(session)
    # At the largest admitted scores the plan's score steps stay whole (no coarsening).
    assert outcome.plan.checked and "scores in steps of" not in outcome.plan.method
    assert outcome.leads is not None
    # Reference: HiGHS (scipy.optimize.milp) on the plan's pairs, as above.
    want = _milp_leads(session, outcome.plan)
    assert len(outcome.leads.lead_of) == want[0]
    assert sum(a.lead for a in outcome.plan.assignments) == want[0]
