"""Fixes for both targets (every paper at its minimum, every paper fully reviewed): the least
cap raise of each target against an integer program solved by HiGHS, and re-planning."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

from review_alloc.model import Session
from review_alloc.plan import make_plan
from review_alloc.plan.fixes import FIX_KEYS, fix_menu
from review_alloc.plan.whatif import apply_cap_fix, apply_recruit_fix
from tests.plan.test_explain_fixes import random_topic_session
from tests.plan.test_planner import random_session, reference_instance

TIER_OF = {"minimum": "min_reviews", "full": "reviews"}


def _highs_least_raise(session: Session, target: str) -> tuple[int, int]:
    """(best coverage of the target with any raise, least total raise reaching it).

    Written from the session's rows alone (`reference_instance`) as an integer program solved
    by HiGHS (scipy.optimize.milp): binary pairs x, integer raises u, covered reviews c with
    c_i <= demand_i and c_i <= the pairs into i, each reviewer's pairs <= cap + u; first the
    most coverage, then the least sum of u at that coverage.
    """
    inst = reference_instance(session)
    demand = inst.min_reviews if target == "minimum" else inst.reviews
    n_r, n_p, n_x = len(inst.cap), len(demand), len(inst.pairs)
    pr, pp = inst.pairs[:, 0], inst.pairs[:, 1]
    # With unlimited caps every paper gets min(demand, its eligible reviewers).
    best = int(np.minimum(demand, np.bincount(pp, minlength=n_p)).sum())
    x0, u0, c0, n_var = 0, n_x, n_x + n_r, n_x + n_r + n_p
    rows, cols, vals = [], [], []
    # Reviewer j: sum of x over j's pairs - u_j <= cap_j.
    rows += [pr, np.arange(n_r)]
    cols += [x0 + np.arange(n_x), u0 + np.arange(n_r)]
    vals += [np.ones(n_x), -np.ones(n_r)]
    # Paper i: c_i - sum of x into i <= 0.
    rows += [n_r + np.arange(n_p), n_r + pp]
    cols += [c0 + np.arange(n_p), x0 + np.arange(n_x)]
    vals += [np.ones(n_p), -np.ones(n_x)]
    # Coverage: -sum of c <= -best.
    rows.append(np.full(n_p, n_r + n_p))
    cols.append(c0 + np.arange(n_p))
    vals.append(-np.ones(n_p))
    matrix = coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(n_r + n_p + 1, n_var),
    )
    upper = np.concatenate([inst.cap, np.zeros(n_p), [-best]]).astype(float)
    objective = np.zeros(n_var)
    objective[u0 : u0 + n_r] = 1.0
    hi = np.concatenate([np.ones(n_x), np.full(n_r, n_x), demand]).astype(float)
    found = milp(
        objective,
        constraints=[LinearConstraint(matrix, -np.inf, upper)],
        integrality=np.ones(n_var),
        bounds=Bounds(np.zeros(n_var), hi),
    )
    assert found.success
    return best, int(round(found.fun))


@pytest.mark.parametrize("seed", range(30))
@pytest.mark.parametrize("target", ["minimum", "full"])
def test_least_cap_raise_of_each_target_matches_highs(seed: int, target: str) -> None:
    session = random_session(4200 + seed, unscored="exclude" if seed % 2 else "zero")
    fix = fix_menu(session).get("raise-caps-min" if target == "minimum" else "raise-caps")
    # Reference: HiGHS through scipy.optimize.milp on the program above.
    best, least = _highs_least_raise(session, target)
    assert (fix.coverage_after, fix.caps) == (best, least)
    assert fix.people == len(fix.caps_fix.raises)
    assert fix.caps == sum(r.raise_by for r in fix.caps_fix.raises)
    # Re-planning the changed copy reaches what the fix promises in the target's tier.
    plan = make_plan(apply_cap_fix(session, fix.caps_fix)).plan
    got = plan.figures.required_coverage if target == "minimum" else plan.figures.coverage
    assert got == fix.coverage_after


@pytest.mark.parametrize("seed", range(12))
def test_the_minimum_fix_is_never_larger_and_recruits_reach_the_minimum(seed: int) -> None:
    session = random_topic_session(4300 + seed, removed=0.2)
    menu = fix_menu(session)
    assert [f.key for f in menu.fixes] == list(FIX_KEYS)
    low, full = menu.get("raise-caps-min"), menu.get("raise-caps")
    # A raise reaching every paper's reviews reaches every minimum too, so the least raise for
    # the minimum can be no larger (a property of the two programs, checked exactly above).
    if full.reaches and low.reaches:
        assert low.caps <= full.caps
    recruits = menu.get("recruit-min")
    assert recruits.caps == 0 and recruits.people == recruits.recruit_fix.total
    changed = apply_recruit_fix(session, recruits.recruit_fix)
    assert make_plan(changed).plan.figures.required_coverage == recruits.coverage_after
    assert menu.shortfall["minimum"] == low.demand - low.coverage_before
