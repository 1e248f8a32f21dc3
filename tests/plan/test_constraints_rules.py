"""Bottleneck, eligibility reasons, refused pins, the checker's rule checks, CLI and samples."""

from __future__ import annotations

import json
import shutil
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_flow

from review_alloc.model import (
    Conflict,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
    load_session,
)
from review_alloc.plan import PlanCheckError, PlanInputError, check_plan, make_plan, plan_summary
from review_alloc.plan.rules import PairRules, Rule
from tests.plan.constraint_reference import lexicographic_rules_optimum, rule_instance
from tests.plan.test_constraints_reference import NO_INFERENCE, rules_session

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"


def scipy_coverage(inst, threshold: float | None, cap_field: str) -> int:  # noqa: ANN001
    """Max flow source → reviewer (cap) → paper → sink (min_reviews or reviews) with scipy."""
    n_r, n_p = len(inst.cap), len(inst.reviews)
    s, t = 0, 1 + n_r + n_p
    rows, cols, caps = [], [], []
    for j in range(n_r):
        rows.append(s)
        cols.append(1 + j)
        caps.append(int(inst.cap[j]))
    for (j, i), v in zip(inst.pairs.tolist(), inst.score.tolist(), strict=True):
        if threshold is None or v >= threshold - 1e-9:
            rows.append(1 + j)
            cols.append(1 + n_r + i)
            caps.append(1)
    for i in range(n_p):
        rows.append(1 + n_r + i)
        cols.append(t)
        caps.append(int(getattr(inst, cap_field)[i]))
    graph = csr_matrix(
        (np.array(caps, dtype=np.int32), (rows, cols)), shape=(t + 1, t + 1), dtype=np.int32
    )
    return int(maximum_flow(graph, s, t).flow_value)


def scipy_bottleneck(inst) -> float:  # noqa: ANN001
    """Highest score threshold keeping required coverage and coverage at their optimum."""
    target = [scipy_coverage(inst, None, f) for f in ("min_reviews", "reviews")]
    best = float(np.min(inst.score))
    for t in np.unique(inst.score):  # a plain sorted-threshold scan, no binary search
        if [scipy_coverage(inst, float(t), f) for f in ("min_reviews", "reviews")] == target:
            best = float(t)
    return best


@pytest.mark.parametrize("seed", range(20))
def test_bottleneck_matches_a_scipy_threshold_search(seed: int) -> None:
    session = rules_session(700 + seed, bottleneck=True)
    # No senior rule here: the planner's bottleneck also keeps the senior tier, the scan not.
    papers = [p.model_copy(update={"senior_min": None}) for p in session.papers]
    session = session.model_copy(update={"papers": papers})
    inst = rule_instance(session)
    if len(inst.pairs) == 0:
        pytest.skip("no eligible pair in this seeded case")
    outcome = make_plan(session)
    # Reference: sorted-threshold scan with scipy.sparse.csgraph.maximum_flow.
    want = scipy_bottleneck(inst)
    assert outcome.plan.bottleneck == pytest.approx(want)
    assert min(a.score for a in outcome.plan.assignments) == pytest.approx(want)
    # Below the bottleneck, floors and score are optimal over the pairs at or above it
    # (reference: HiGHS via scipy.optimize.milp on the thresholded instance).
    keep = inst.score >= want - 1e-9
    from dataclasses import replace

    ref = lexicographic_rules_optimum(
        replace(inst, pairs=inst.pairs[keep], score=inst.score[keep], pinned=inst.pinned[keep])
    )
    assert ref is not None
    for name in ("required", "coverage", "floors", "score"):
        assert outcome.tiers[name] == pytest.approx(ref[name], abs=1e-6), name


def small_session(**policy: object) -> Session:
    """Three reviewers (two from one lab), two papers, one conflict and one block."""
    reviewers = [
        Reviewer(id="a", institution="Lab Oster", topics=["alpha"], senior=True),
        Reviewer(id="b", institution="lab  oster", topics=["beta"]),
        Reviewer(id="c", institution="Lab Calvale", topics=["alpha"]),
        Reviewer(id="d", institution="Lab Calvale", topics=["alpha"], withdrawn=True),
    ]
    papers = [Paper(id="p", topics=["alpha"], reviews=2), Paper(id="q", topics=["beta"])]
    scores = ScoreTable.from_arrays(
        np.array([0, 1, 2, 0, 1, 3], dtype=np.int32),
        np.array([0, 0, 0, 1, 1, 0], dtype=np.int32),
        np.array([0.9, 0.2, 0.6, 0.5, 0.7, 0.8]),
    )
    base = Policy(reviews=2, min_reviews=1, unscored="exclude", conflict_rules=NO_INFERENCE)
    return Session(
        name="small",
        policy=base.model_copy(update=policy),
        papers=papers,
        reviewers=reviewers,
        scores=scores,
        conflicts=[Conflict(reviewer="c", paper="q", reason="recent co-author")],
        blocks=[PairRule(reviewer="b", paper="q", reason="chair's call")],
    )


def why_not(session: Session, reviewer: str, paper: str) -> str | None:
    """The rules' reason for a pair given by ids."""
    j, i = session.reviewer_index()[reviewer], session.paper_index()[paper]
    return PairRules(session).why_not(j, i)


def test_why_not_names_each_reason() -> None:
    session = small_session(min_score=0.3, require_shared_topic=True)
    assert why_not(session, "a", "p") is None
    assert why_not(session, "b", "p") == "below min score (0.2 < 0.3)"
    assert why_not(session, "c", "q").startswith("conflict: declared: recent co-author")
    assert why_not(session, "b", "q") == "blocked by the chair"
    assert why_not(session, "d", "p") == "withdrawn reviewer"
    assert why_not(session, "c", "p") is None
    session = small_session(require_shared_topic=True)
    assert why_not(session, "a", "q") == "no shared topic"
    kinds = {(x.reviewer, x.paper): x.kind for x in PairRules(session).excluded_pairs()}
    assert kinds == {
        ("a", "q"): Rule.NO_SHARED_TOPIC,
        ("b", "p"): Rule.NO_SHARED_TOPIC,
        ("b", "q"): Rule.BLOCKED,
        ("d", "p"): Rule.WITHDRAWN,
    }
    assert why_not(small_session(), "c", "q").startswith("conflict")
    unscored = small_session()
    assert why_not(unscored, "c", "q").startswith("conflict")
    assert why_not(unscored.model_copy(update={"conflicts": []}), "c", "q") == (
        "not eligible: unscored"
    )


def test_the_plan_keeps_the_eligibility_rules() -> None:
    session = small_session(min_score=0.3, require_shared_topic=True)
    pairs = {(a.reviewer, a.paper) for a in make_plan(session).plan.assignments}
    assert pairs == {("a", "p"), ("c", "p")}


@pytest.mark.parametrize(
    ("policy", "pin", "message"),
    [
        ({"min_score": 0.3}, ("b", "p"), "below the policy's min_score"),
        ({"require_shared_topic": True}, ("a", "q"), "share no topic"),
    ],
)
def test_pins_breaking_an_eligibility_rule_are_refused(
    policy: dict, pin: tuple[str, str], message: str
) -> None:
    session = small_session(**policy).model_copy(
        update={"pins": [PairRule(reviewer=pin[0], paper=pin[1])]}
    )
    with pytest.raises(PlanInputError, match=message):
        make_plan(session)


def test_pins_over_the_institution_limit_are_refused() -> None:
    session = small_session(max_per_institution=1).model_copy(
        update={"pins": [PairRule(reviewer="a", paper="p"), PairRule(reviewer="b", paper="p")]}
    )
    with pytest.raises(PlanInputError, match="max_per_institution 1"):
        make_plan(session)


def test_junior_pins_that_crowd_out_hard_seniors_are_refused() -> None:
    session = small_session(senior_min=1, senior_hard=True).model_copy(
        update={"pins": [PairRule(reviewer="b", paper="p"), PairRule(reviewer="c", paper="p")]}
    )
    with pytest.raises(PlanInputError, match="seats for the 1 seniors"):
        make_plan(session)


def test_hard_seniors_that_cannot_be_met_are_refused_with_the_rule_named() -> None:
    session = small_session(senior_min=1, senior_hard=True)
    session = session.model_copy(
        update={"reviewers": [r.model_copy(update={"senior": False}) for r in session.reviewers]}
    )
    with pytest.raises(PlanInputError, match="senior_hard"):
        make_plan(session)


def test_checker_rejects_two_reviewers_of_one_institution_and_a_low_score() -> None:
    from datetime import UTC, datetime

    from review_alloc.model import Assignment, Plan
    from review_alloc.plan.figures import assignment_indices, plan_figures

    strict = small_session(max_per_institution=1, min_score=0.3)
    rows = [
        Assignment(reviewer="a", paper="p", score=0.9),
        Assignment(reviewer="b", paper="p", score=0.2),
    ]
    r, p, sc = assignment_indices(strict, rows)
    forged = Plan(
        assignments=rows,
        figures=plan_figures(strict, r, p, sc),
        created_at=datetime(2027, 1, 1, tzinfo=UTC),
        checked=False,
        method="forged",
    )
    with pytest.raises(PlanCheckError, match="max_per_institution") as caught:
        check_plan(strict, forged, None)
    assert "below min_score" in str(caught.value)
    check_plan(small_session(), forged, None)  # without the rules the same plan is fine


def test_a_gap_caused_by_the_institution_limit_says_so() -> None:
    session = Session(
        name="one lab",
        policy=Policy(reviews=2, min_reviews=1, max_per_institution=1, conflict_rules=NO_INFERENCE),
        papers=[Paper(id="q")],
        reviewers=[
            Reviewer(id="a", institution="Lab Oster"),
            Reviewer(id="b", institution="Lab Oster"),
        ],
    )
    summary = plan_summary(session, make_plan(session).plan)
    gaps = {g["paper"]: g["reason"] for g in summary["gaps"]}
    assert "max_per_institution 1" in gaps["q"]


def test_plan_command_saves_the_rules_and_reports_them(tmp_path: Path) -> None:
    from review_alloc.cli import main

    target = tmp_path / "workshop.json"
    shutil.copy(SAMPLES / "workshop.json", target)
    args = ["plan", str(target), "--senior-min", "1", "--max-per-institution", "1"]
    args += ["--balance", "0.1", "--max-leads", "2", "--json"]
    assert main(args) == 0
    policy = load_session(target).policy
    assert (policy.senior_min, policy.max_per_institution, policy.balance) == (1, 1, 0.1)
    assert policy.max_leads == 2
    assert main(["plan", str(target), "--max-per-institution", "off"]) == 0
    assert load_session(target).policy.max_per_institution is None


def test_plan_json_has_the_rule_keys(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    from review_alloc.cli import main

    target = tmp_path / "workshop.json"
    shutil.copy(SAMPLES / "workshop.json", target)
    assert main(["plan", str(target), "--senior-min", "1", "--bottleneck", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    for key in ("assignments", "coverage", "required_coverage", "total_score", "gaps"):
        assert key in summary
    assert {"spread", "histogram", "min", "max"} <= set(summary["load"])
    # The bottleneck is found on the planner's score grid (1 / SCORE_RESOLUTION); the
    # workshop's scores, made by the score recipe, lie between its steps.
    assert summary["bottleneck"] == pytest.approx(summary["lowest_unpinned_score"], abs=1e-4)
    first = summary["per_paper"][0]
    assert {"reviewers", "lead", "seniors", "institutions"} <= set(first)
    assert summary["seniors"]["met"] == summary["seniors"]["wanted"]


def test_conference_sample_meets_every_rule() -> None:
    session = load_session(SAMPLES / "conference.json")
    assert (session.policy.senior_min, session.policy.max_per_institution) == (1, 1)
    outcome = make_plan(session)
    plan = outcome.plan
    assert plan.checked
    # The crossing rules leave too many arcs free for the integer program; the linear
    # relaxation with the group limits is integral and meets its checked bound: proven optimal.
    assert outcome.proven_optimal and plan.bound is None
    assert outcome.proof is not None and outcome.proof.proven and outcome.proof.gap == 0
    senior = {r.id for r in session.reviewers if r.senior}
    where = {r.id: r.institution for r in session.reviewers}
    by_paper: dict[str, list[str]] = {}
    for a in plan.assignments:
        by_paper.setdefault(a.paper, []).append(a.reviewer)
    assert all(any(r in senior for r in rs) for rs in by_paper.values())
    assert all(max(Counter(where[r] for r in rs).values()) == 1 for rs in by_paper.values())
    leads = Counter(a.paper for a in plan.assignments if a.lead)
    assert set(leads) == set(by_paper) and max(leads.values()) == 1
    summary = plan_summary(session, plan)
    # The scarce topic's papers stay short of reviews on purpose (the sample shows gaps).
    assert summary["gaps"] and all(g["reason"] for g in summary["gaps"])


@pytest.mark.large
def test_conference_sample_balanced_narrows_the_spread() -> None:
    session = load_session(SAMPLES / "conference.json")
    session = session.model_copy(
        update={"policy": session.policy.model_copy(update={"balance": 0.05})}
    )
    plan = make_plan(session).plan
    load = plan_summary(session, plan)["load"]
    assert load["spread"] < load["before"]["spread"]


def test_session_files_without_the_rule_fields_still_load() -> None:
    data = json.loads((SAMPLES / "workshop.json").read_text())
    for key in ("senior_min", "senior_hard", "max_per_institution", "balance", "max_leads"):
        data["policy"].pop(key, None)
    for paper in data["papers"]:
        paper.pop("senior_min", None)
    session = Session.model_validate(data)
    assert session.policy.senior_min == 0 and session.policy.max_per_institution is None
    assert session.policy.max_leads == 3 and session.policy.balance == 0


def test_crossing_rules_on_the_panel_are_proven_optimal_by_the_mip() -> None:
    from review_alloc.plan import solve

    session = load_session(SAMPLES / "panel.json")
    session = session.model_copy(
        update={
            "policy": session.policy.model_copy(update={"senior_min": 1, "max_per_institution": 1})
        }
    )
    outcome = make_plan(session)
    # The panel's labs mix seniors and juniors, so the relaxation breaks the crossing rule and
    # the exact program (HiGHS) settles the split: status optimal, gap 0, no bound.
    assert outcome.proof is not None and outcome.proof.proven and outcome.proof.solved
    assert outcome.proof.gap == 0 and outcome.plan.bound is None and outcome.proven_optimal
    assert "optimal, gap 0" in outcome.plan.method
    assert set(solve.OBJECTIVE_TIERS) <= set(outcome.tiers)
    assert plan_summary(session, outcome.plan)["institutions"]["over_limit"] == 0
    assert plan_summary(session, outcome.plan)["optimality"]["proven"]


def _crossing_panel() -> Session:
    session = load_session(SAMPLES / "panel.json")
    return session.model_copy(
        update={
            "policy": session.policy.model_copy(update={"senior_min": 1, "max_per_institution": 1})
        }
    )


def test_a_venue_too_large_for_the_mip_is_proven_by_the_checked_linear_bound(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from review_alloc.plan import exact

    session = _crossing_panel()
    # The reference: the integer program on the reduced-cost-fixed arcs (HiGHS, status optimal).
    reference = make_plan(session)
    assert reference.proof is not None and reference.proof.proven
    monkeypatch.setattr(exact, "MAX_FREE_ARCS", 0)
    outcome = make_plan(session)
    assert outcome.proven_optimal and outcome.plan.bound is None
    assert outcome.proof is not None and outcome.proof.proven and outcome.proof.by_bound
    assert "checked bound" in outcome.plan.method
    assert outcome.tiers == reference.tiers


def test_a_venue_too_large_for_the_mip_reports_its_bound_and_gap(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from review_alloc.plan import exact, solve

    session = _crossing_panel()
    monkeypatch.setattr(exact, "MAX_FREE_ARCS", 0)
    # The linear stage out of time: the relaxation's bound and the dive's plan, gap measured.
    monkeypatch.setattr(exact, "_lp_stage", lambda *args: None)
    outcome = make_plan(session)
    bound = outcome.plan.bound
    assert bound is not None and not outcome.proven_optimal and bound["gap"] >= 0
    for name in solve.OBJECTIVE_TIERS:
        assert outcome.tiers[name] <= bound[name] + 1e-9
    assert plan_summary(session, outcome.plan)["institutions"]["over_limit"] == 0
