"""Randomised plans against outside references: HiGHS LPs for the fractional optimum, and the
sampling guarantees of dependent rounding checked empirically over many seeded draws."""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest
from scipy.optimize import linprog
from scipy.sparse import csr_matrix, vstack

from review_alloc.model import Session
from review_alloc.plan import PlanInputError, check_plan, make_plan
from review_alloc.plan.assemble import assemble_plan
from review_alloc.plan.randomized import (
    draw_pairs,
    fractional_plan,
    random_plan,
    redraw,
    rounding_graph,
)
from review_alloc.plan.rounding import RoundingError, dependent_round
from tests.plan.reference import Instance
from tests.plan.test_constraints_reference import rules_session
from tests.plan.test_planner import random_session, reference_instance

NOW = datetime(2027, 3, 1, tzinfo=UTC)


def capped_lexicographic_lp(inst: Instance, q: float) -> tuple[float, float, float, float]:
    """(required coverage, coverage, floors, score) of the LP with every unpinned x <= q, by
    sequential HiGHS LPs (scipy.optimize.linprog), each stage on the previous optimal face."""
    n_r, n_p, n_e = len(inst.cap), len(inst.reviews), len(inst.pairs)
    n_var = n_e + n_p + n_r  # x per pair, y per paper (required part), z per reviewer (floor)
    rows: list[int] = []
    cols: list[int] = []
    vals: list[float] = []
    b: list[float] = []

    def row(entries: list[tuple[int, float]], bound: float) -> None:
        for c, v in entries:
            rows.append(len(b))
            cols.append(c)
            vals.append(v)
        b.append(bound)

    for i in range(n_p):
        row([(int(e), 1.0) for e in np.flatnonzero(inst.pairs[:, 1] == i)], float(inst.reviews[i]))
        row(
            [(n_e + i, 1.0)] + [(int(e), -1.0) for e in np.flatnonzero(inst.pairs[:, 1] == i)],
            0.0,
        )
    for j in range(n_r):
        row([(int(e), 1.0) for e in np.flatnonzero(inst.pairs[:, 0] == j)], float(inst.cap[j]))
        row(
            [(n_e + n_p + j, 1.0)]
            + [(int(e), -1.0) for e in np.flatnonzero(inst.pairs[:, 0] == j)],
            0.0,
        )
    a_ub = csr_matrix((vals, (rows, cols)), shape=(len(b), n_var))
    b_ub = np.array(b)
    pinned = inst.pinned if inst.pinned is not None else np.zeros(n_e, bool)
    bounds = (
        [(1.0, 1.0) if pinned[e] else (0.0, q) for e in range(n_e)]
        + [(0.0, float(m)) for m in inst.min_reviews]
        + [(0.0, float(f)) for f in inst.floor]
    )
    stages = []
    for part in ("required", "coverage", "floors", "score"):
        c = np.zeros(n_var)
        if part == "required":
            c[n_e : n_e + n_p] = 1.0
        elif part == "coverage":
            c[:n_e] = 1.0
        elif part == "floors":
            c[n_e + n_p :] = 1.0
        else:
            c[:n_e] = inst.score
        res = linprog(-c, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
        assert res.status == 0, res.message
        stages.append(-res.fun)
        a_ub = vstack([a_ub, csr_matrix(-c.reshape(1, -1))]).tocsr()
        b_ub = np.append(b_ub, res.fun + 1e-7)
    return stages[0], stages[1], stages[2], stages[3]


@pytest.mark.parametrize("seed", range(25))
@pytest.mark.parametrize("q", [0.5, 0.34, 1.0])
def test_fractional_optimum_matches_highs_lp(seed: int, q: float) -> None:
    session = random_session(seed, pins=seed % 3 == 0)
    plain = make_plan(session, fresh=True)
    frac = fractional_plan(session, q, plain=plain.plan)
    # Reference: HiGHS via scipy.optimize.linprog, the capped LP solved tier by tier.
    ref = capped_lexicographic_lp(reference_instance(session), int(q * 1000) / 1000)
    got = frac.tiers
    assert got["required"] == pytest.approx(ref[0], abs=1e-6)
    assert got["coverage"] == pytest.approx(ref[1], abs=1e-6)
    assert got["floors"] == pytest.approx(ref[2], abs=1e-6)
    assert got["score"] == pytest.approx(ref[3], abs=1e-4)
    probabilities = frac.pair_flow / frac.scale
    free = ~frac.network.pair_pinned
    assert np.all(probabilities[free] <= q + 1e-12)
    assert np.all(probabilities[frac.network.pair_pinned] == 1.0)


def test_no_cap_gives_the_plain_optimum() -> None:
    # With Q = 1 the LP of a network has an integral optimum: the plain plan's tiers.
    session = random_session(4)
    plain = make_plan(session, fresh=True)
    frac = fractional_plan(session, 1.0, plain=plain.plan)
    for name in ("required", "coverage", "floors"):
        assert frac.tiers[name] == plain.tiers[name]
    assert frac.tiers["score"] == pytest.approx(plain.tiers["score"], abs=1e-6)


def _draw_statistics(session: Session, q: float, draws: int) -> None:
    """Every pair's frequency over `draws` seeded draws within 4 standard deviations of its
    probability; every draw passes the checker with counts and loads at the floor or ceiling
    of the fractional ones (the guarantees of dependent rounding, Gandhi et al., J. ACM 2006)."""
    plain = make_plan(session, fresh=True)
    frac = fractional_plan(session, q, plain=plain.plan)
    net = frac.network
    positive = frac.pair_flow > 0
    reviewer, paper = net.pair_reviewer[positive], net.pair_paper[positive]
    units = frac.pair_flow[positive]
    p = units / frac.scale
    assert np.any((p > 0) & (p < 1)), "the instance should be fractional somewhere"
    count_frac = np.bincount(paper, weights=p, minlength=len(session.papers))
    load_frac = np.bincount(reviewer, weights=p, minlength=len(session.reviewers))
    hits = np.zeros(len(p))
    for seed in range(draws):
        chosen = draw_pairs(session, reviewer, paper, units, frac.scale, seed)
        hits += chosen
        counts = np.bincount(paper[chosen], minlength=len(session.papers))
        loads = np.bincount(reviewer[chosen], minlength=len(session.reviewers))
        assert np.all(counts >= np.floor(count_frac + 1e-9))
        assert np.all(counts <= np.ceil(count_frac - 1e-9))
        assert np.all(loads >= np.floor(load_frac + 1e-9))
        assert np.all(loads <= np.ceil(load_frac - 1e-9))
        plan, _ = assemble_plan(
            session, reviewer[chosen], paper[chosen], net.pair_score[positive][chosen], NOW, "d"
        )
        check_plan(session, plan, None)
        # Required coverage is an integer in the fractional optimum of these instances, and
        # dependent rounding keeps every paper's count at floor/ceil: the draw meets it.
        assert plan.figures.required_coverage >= np.floor(frac.tiers["required"] + 1e-9)
    freq = hits / draws
    sd = np.sqrt(p * (1 - p) / draws)
    assert np.all(np.abs(freq - p) <= 4 * sd + 1e-12)


def test_two_thousand_draws_keep_every_probability() -> None:
    _draw_statistics(random_session(0, pins=True), 0.5, 2000)


def test_draws_keep_institution_and_senior_rules() -> None:
    session = rules_session(2, max_per_institution=1, senior_min=1)
    _draw_statistics(session, 0.4, 600)


def test_draws_keep_a_hard_senior_rule() -> None:
    session = rules_session(4, max_per_institution=2, senior_min=1, senior_hard=True)
    _draw_statistics(session, 0.6, 400)


def test_plan_stores_what_redraws_it() -> None:
    session = random_session(3, pins=True)
    outcome = random_plan(session, 0.5, seed=12345, now=NOW)
    draw = outcome.plan.draw
    assert draw is not None and draw.seed == 12345 and draw.max_probability == 0.5
    assert outcome.plan.checked
    pairs = sorted((a.reviewer, a.paper) for a in outcome.plan.assignments)
    assert sorted(redraw(session, draw)) == pairs
    again = random_plan(session, 0.5, seed=12345, now=NOW)
    assert [(a.reviewer, a.paper) for a in again.plan.assignments] == [
        (a.reviewer, a.paper) for a in outcome.plan.assignments
    ]
    assert draw.expected["total_score"] == pytest.approx(outcome.tiers["score"])
    assert draw.plain is not None
    assert draw.plain["total_score"] == make_plan(session, fresh=True).plan.figures.total_score


def test_a_cap_below_the_step_is_refused() -> None:
    session = random_session(1)
    with pytest.raises(PlanInputError, match="below the probability step"):
        random_plan(session, 0.0004, seed=1)
    with pytest.raises(PlanInputError, match="at most 1"):
        random_plan(session, 1.5, seed=1)


def test_rounding_refuses_a_flow_that_is_not_conserved() -> None:
    tails = np.array([0, 1, 2])
    heads = np.array([1, 2, 0])
    with pytest.raises(RoundingError, match="not conserved"):
        dependent_round(3, tails, heads, np.array([500, 500, 300]), 1000, 0)


def test_rounding_graph_has_one_arc_per_pair() -> None:
    session = rules_session(1, max_per_institution=1, senior_min=1)
    net = make_plan(session, fresh=True).network
    graph = rounding_graph(session, net.pair_reviewer, net.pair_paper)
    assert len(np.unique(graph.pair_arc)) == len(net.pair_reviewer)
    assert np.all(graph.tails[graph.pair_arc] == 1 + net.pair_reviewer)


@pytest.mark.parametrize("seed", range(16))
def test_every_draw_keeps_the_hard_rules(seed: int) -> None:
    session = rules_session(
        seed, max_per_institution=1 + seed % 2, senior_min=1, senior_hard=seed % 3 == 0
    )
    try:
        plain = make_plan(session, fresh=True)
    except PlanInputError:
        pytest.skip("the hard senior rule cannot be met in this instance")
    try:
        frac = fractional_plan(session, 0.4, plain=plain.plan)
    except PlanInputError as error:
        assert "hard senior rule cannot be met with each pair at most 0.4" in str(error)
        assert session.policy.senior_hard
        return
    net = frac.network
    positive = frac.pair_flow > 0
    reviewer, paper = net.pair_reviewer[positive], net.pair_paper[positive]
    for draw_seed in range(60):
        chosen = draw_pairs(session, reviewer, paper, frac.pair_flow[positive], 1000, draw_seed)
        plan, _ = assemble_plan(
            session, reviewer[chosen], paper[chosen], net.pair_score[positive][chosen], NOW, "d"
        )
        # The independent checker (its own derivation of every rule) passes each draw.
        check_plan(session, plan, None)
