"""Re-plans warm-started from the previous outcome: same optimum as a cold plan, still checked.

These exercise `make_plan(session, warm=...)`, whose warm-start mapping lives beside the engine
it feeds; the reference is HiGHS solving the tiers one after another (tests/plan/reference.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from review_alloc.model import Conflict, PairRule, Session
from review_alloc.plan import make_plan
from tests.plan.reference import lexicographic_optimum
from tests.plan.test_planner import random_session, reference_instance


def _changed(session: Session, rng: np.random.Generator) -> Session:
    """The session after one edit a chair makes between plans."""
    kind = int(rng.integers(0, 4))
    j = int(rng.integers(0, len(session.reviewers)))
    i = int(rng.integers(0, len(session.papers)))
    reviewers = [r.model_copy() for r in session.reviewers]
    if kind == 0:  # a reviewer withdraws
        reviewers[j] = reviewers[j].model_copy(update={"withdrawn": True})
        return session.model_copy(update={"reviewers": reviewers, "pins": [
            p for p in session.pins if p.reviewer != reviewers[j].id]})
    if kind == 1:  # a cap is lowered
        cap = reviewers[j].cap if reviewers[j].cap is not None else session.policy.cap
        floor = reviewers[j].floor or 0
        reviewers[j] = reviewers[j].model_copy(update={"cap": max(floor, cap - 1)})
        return session.model_copy(update={"reviewers": reviewers})
    pair = {"reviewer": session.reviewers[j].id, "paper": session.papers[i].id}
    taken = [*session.pins, *session.conflicts, *session.blocks]
    if any(p.reviewer == pair["reviewer"] and p.paper == pair["paper"] for p in taken):
        return session
    if kind == 2:  # a new conflict is declared
        return session.model_copy(update={"conflicts": [*session.conflicts, Conflict(**pair)]})
    return session.model_copy(update={"blocks": [*session.blocks, PairRule(**pair)]})


def _reference(session: Session) -> tuple[int, int, int, float]:
    """HiGHS, tier by tier; the reference knows no withdrawals, so they become caps of 0."""
    reviewers = [
        r.model_copy(update={"withdrawn": False, "cap": 0, "floor": 0}) if r.withdrawn else r
        for r in session.reviewers
    ]
    return lexicographic_optimum(
        reference_instance(session.model_copy(update={"reviewers": reviewers}))
    )


@pytest.mark.parametrize("seed", range(12))
def test_warm_re_plans_match_cold_plans_and_the_highs_reference(seed: int) -> None:
    rng = np.random.default_rng(2000 + seed)
    session = random_session(300 + seed, pins=seed % 4 == 0)
    outcome = make_plan(session)
    for _ in range(5):
        session = Session.model_validate(_changed(session, rng).model_dump())
        warm = make_plan(session, warm=outcome)
        cold = make_plan(session)
        assert warm.plan.checked
        w, c = warm.plan.figures, cold.plan.figures
        assert (w.required_coverage, w.coverage, w.floors_met) == (
            c.required_coverage, c.coverage, c.floors_met)
        assert w.total_score == pytest.approx(c.total_score, abs=1e-9)
        # Reference: HiGHS (scipy.optimize.linprog) solving the tiers one after another.
        ref = _reference(session)
        assert (w.required_coverage, w.coverage, w.floors_met) == ref[:3]
        assert w.total_score == pytest.approx(ref[3], abs=1e-6)
        outcome = warm


def test_warm_start_from_a_different_session_shape_still_plans() -> None:
    # A previous outcome of another session (other reviewers and papers) is only a hint.
    before = make_plan(random_session(400))
    session = random_session(401)
    warm = make_plan(session, warm=before)
    ref = lexicographic_optimum(reference_instance(session))  # HiGHS, tier by tier
    f = warm.plan.figures
    assert (f.required_coverage, f.coverage, f.floors_met) == ref[:3]
    assert f.total_score == pytest.approx(ref[3], abs=1e-6)


def _warm_arguments(monkeypatch: pytest.MonkeyPatch) -> list[object]:
    """Record the `warm` argument of every engine call the planner makes (a re-solve from an
    earlier optimum's kept residual state counts as a warm start: the state itself)."""
    import review_alloc.plan.solve as solve
    from review_alloc.flow import KeptFlow

    seen: list[object] = []
    engine = solve.min_cost_flow
    resolve = KeptFlow.resolve

    def recording(*args: object, **kwargs: object) -> object:
        seen.append(kwargs.get("warm"))
        return engine(*args, **kwargs)

    def recording_resolve(self: KeptFlow, *args: object, **kwargs: object) -> object:
        seen.append(self)
        return resolve(self, *args, **kwargs)

    monkeypatch.setattr(solve, "min_cost_flow", recording)
    monkeypatch.setattr(KeptFlow, "resolve", recording_resolve)
    return seen


@pytest.mark.parametrize("seed", range(6))
def test_re_plans_that_keep_earlier_pairs_start_warm_once_the_weights_agree(
    seed: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The workspace re-plans a session that holds its plan, so the keep tier is on; the first
    # re-plan after a fresh plan weighs the tiers differently and must not start warm.
    rng = np.random.default_rng(3000 + seed)
    session = random_session(500 + seed)
    outcome = make_plan(session)
    seen = _warm_arguments(monkeypatch)
    warm_used = []
    for step in range(4):
        session = Session.model_validate(
            _changed(session, rng).model_copy(update={"plan": outcome.plan}).model_dump()
        )
        seen.clear()
        warm = make_plan(session, warm=outcome)
        warm_used.append(any(s is not None for s in seen))
        if step == 0:
            assert not warm_used[0], "potentials of a fresh plan cannot price a keep tier"
        cold = make_plan(session)
        w, c = warm.plan.figures, cold.plan.figures
        assert warm.plan.checked
        assert (w.required_coverage, w.coverage, w.floors_met) == (
            c.required_coverage, c.coverage, c.floors_met)
        kept = {(a.reviewer, a.paper) for a in session.plan.assignments}
        assert sum((a.reviewer, a.paper) in kept for a in warm.plan.assignments) == sum(
            (a.reviewer, a.paper) in kept for a in cold.plan.assignments)
        assert w.total_score == pytest.approx(c.total_score, abs=1e-9)
        # Reference: HiGHS (scipy.optimize.linprog), tier by tier, for the tiers above keep.
        ref = _reference(session)
        assert (w.required_coverage, w.coverage, w.floors_met) == ref[:3]
        outcome = warm
    assert any(warm_used[1:]), "keep-to-keep re-plans should start from the earlier optimum"
