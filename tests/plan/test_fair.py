"""The fairest plan against a MIP written here from the instance alone (HiGHS via
scipy.optimize.milp), and PeerReview4All's round against that optimum and its stated bound."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from review_alloc.plan import check_plan, make_plan
from review_alloc.plan.fair import fair_plan, fairness_report
from tests.plan.reference import Instance
from tests.plan.test_constraints_reference import rules_session
from tests.plan.test_planner import random_session, reference_instance


def max_min_reference(inst: Instance) -> tuple[float, float]:
    """(highest lowest paper total, then highest total score) over plans with the best required
    coverage and coverage, floors met between the two, by sequential HiGHS MIPs
    (scipy.optimize.milp)."""
    n_r, n_p, n_e = len(inst.cap), len(inst.reviews), len(inst.pairs)
    n = n_e + n_p + n_r + 1  # x per pair, y per paper (required part), z per reviewer, t
    rows: list[np.ndarray] = []
    lo: list[float] = []
    hi: list[float] = []
    for i in range(n_p):
        a = np.zeros(n)
        a[:n_e] = (inst.pairs[:, 1] == i).astype(float)
        rows.append(a)
        lo.append(-np.inf)
        hi.append(float(inst.reviews[i]))
        b = -a.copy()
        b[n_e + i] = 1.0
        rows.append(b)
        lo.append(-np.inf)
        hi.append(0.0)
        c = np.zeros(n)
        c[:n_e] = -(inst.pairs[:, 1] == i).astype(float) * inst.score
        c[-1] = 1.0
        rows.append(c)
        lo.append(-np.inf)
        hi.append(0.0)
    for j in range(n_r):
        a = np.zeros(n)
        a[:n_e] = (inst.pairs[:, 0] == j).astype(float)
        rows.append(a)
        lo.append(-np.inf)
        hi.append(float(inst.cap[j]))
        b = -a.copy()
        b[n_e + n_p + j] = 1.0
        rows.append(b)
        lo.append(-np.inf)
        hi.append(0.0)
    pinned = inst.pinned if inst.pinned is not None else np.zeros(n_e, bool)
    lower = np.concatenate([pinned.astype(float), np.zeros(n_p + n_r), [0.0]])
    upper = np.concatenate(
        [np.ones(n_e), inst.min_reviews.astype(float), inst.floor.astype(float), [1e6]]
    )
    integrality = np.concatenate([np.ones(n_e), np.zeros(n_p + n_r + 1)])
    objectives = []
    for part in ("required", "coverage", "fair", "floors", "score"):
        c = np.zeros(n)
        if part == "required":
            c[n_e : n_e + n_p] = 1.0
        elif part == "coverage":
            c[:n_e] = 1.0
        elif part == "fair":
            c[-1] = 1.0
        elif part == "floors":
            c[n_e + n_p : n_e + n_p + n_r] = 1.0
        else:
            c[:n_e] = inst.score
        res = milp(
            -c,
            constraints=LinearConstraint(np.array(rows), lo, hi),
            integrality=integrality,
            bounds=Bounds(lower, upper),
            options={"mip_rel_gap": 1e-9},
        )
        assert res.status == 0, res.message
        objectives.append(-res.fun)
        rows.append(c)
        lo.append(-res.fun - 1e-6)
        hi.append(np.inf)
    return objectives[2], objectives[4]


@pytest.mark.parametrize("seed", range(30))
def test_fairest_plan_matches_a_highs_mip(seed: int) -> None:
    session = random_session(seed, pins=seed % 4 == 0)
    outcome = fair_plan(session)
    record = outcome.plan.fairness
    assert record is not None and record.exact
    # Reference: HiGHS via scipy.optimize.milp on the instance written here (tiers, then max-min).
    best_min, best_total = max_min_reference(reference_instance(session))
    assert record.lowest_paper_score == pytest.approx(best_min, abs=1e-6)
    assert record.bound == pytest.approx(best_min, abs=1e-6)
    assert outcome.plan.figures.total_score == pytest.approx(best_total, abs=1e-5)
    plain = make_plan(session, fresh=True)
    for name in ("required", "coverage"):
        assert outcome.tiers[name] == plain.tiers[name]
    check_plan(session, outcome.plan, None)
    assert record.lowest_paper_score >= record.plain_lowest_paper_score - 1e-9


@pytest.mark.parametrize("seed", range(12))
def test_peerreview4all_round_stays_below_its_bound(seed: int) -> None:
    session = random_session(seed)
    outcome = fair_plan(session, method="peerreview4all")
    record = outcome.plan.fairness
    assert record is not None and not record.exact
    assert record.method.startswith("PeerReview4All")
    # Reference: the HiGHS MIP optimum lies between the round's result and its stated bound.
    best_min, _ = max_min_reference(reference_instance(session))
    assert record.lowest_paper_score <= best_min + 1e-6
    assert record.bound >= best_min - 1e-6
    assert record.lowest_paper_score >= record.plain_lowest_paper_score - 1e-9
    report = fairness_report(outcome.plan)
    assert report["gap_to_bound"] == pytest.approx(record.bound - record.lowest_paper_score)
    check_plan(session, outcome.plan, None)


@pytest.mark.parametrize("seed", range(10))
def test_fairest_plan_keeps_institution_and_senior_rules(seed: int) -> None:
    session = rules_session(seed, max_per_institution=1, senior_min=1)
    plain = make_plan(session, fresh=True)
    outcome = fair_plan(session, plain=plain)
    record = outcome.plan.fairness
    assert record is not None
    for name in ("required", "seniors", "coverage"):
        assert outcome.tiers[name] >= plain.tiers[name]
    assert record.lowest_paper_score >= record.plain_lowest_paper_score - 1e-9
    # The independent checker derives every rule itself.
    check_plan(session, outcome.plan, None)
    pr4a = fair_plan(session, plain=plain, method="peerreview4all")
    assert pr4a.plan.fairness is not None
    assert pr4a.plan.fairness.lowest_paper_score <= record.lowest_paper_score + 1e-6
    check_plan(session, pr4a.plan, None)


def test_unknown_method_is_refused() -> None:
    with pytest.raises(ValueError, match="choose one of auto, peerreview4all"):
        fair_plan(random_session(1), method="guess")


def test_a_stopped_mip_offers_its_best_plan_and_its_bound(monkeypatch: pytest.MonkeyPatch) -> None:
    from review_alloc.plan import fair

    session = random_session(5)
    exact = fair_plan(session)
    assert exact.plan.fairness is not None and exact.plan.fairness.exact
    net = exact.network
    keys = {(a.reviewer, a.paper) for a in exact.plan.assignments}
    ids_r = [r.id for r in session.reviewers]
    ids_p = [p.id for p in session.papers]
    pairs = zip(net.pair_reviewer.tolist(), net.pair_paper.tolist(), strict=True)
    best = np.array([(ids_r[j], ids_p[i]) in keys for j, i in pairs])
    optimum = exact.plan.fairness.lowest_paper_score

    def stopped(prog: object, deadline: float) -> tuple[np.ndarray, bool, float]:
        return best, False, optimum + 0.25

    monkeypatch.setattr(fair, "_solve_stages", stopped)
    outcome = fair_plan(session)
    record = outcome.plan.fairness
    assert record is not None and not record.exact
    # The better of HiGHS's plan so far and PeerReview4All's round is kept, with the bound.
    assert record.lowest_paper_score == pytest.approx(optimum)
    assert record.bound == pytest.approx(min(optimum + 0.25, fair.weakest_pool_bound(session, net)))
    check_plan(session, outcome.plan, None)
