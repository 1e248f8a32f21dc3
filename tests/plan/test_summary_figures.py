"""The plan summary's lowest scores under the bottleneck option, and its institution count."""

from __future__ import annotations

import itertools
import json
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from review_alloc.model import (
    Assignment,
    PairRule,
    Paper,
    Plan,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
    save_session,
)
from review_alloc.plan import make_plan, plan_summary
from review_alloc.plan.figures import assignment_indices, plan_figures
from tests.plan.test_constraints_reference import NO_INFERENCE

# Reviewer x paper scores; the pinned pair (a, p0) scores 0.05, far below every other.
SCORES = {
    ("a", "p0"): 0.05, ("b", "p0"): 0.45, ("c", "p0"): 0.9,
    ("a", "p1"): 0.7, ("b", "p1"): 0.6, ("c", "p1"): 0.3,
    ("a", "p2"): 0.2, ("b", "p2"): 0.8, ("c", "p2"): 0.5,
}
PIN = ("a", "p0")


def bottleneck_session() -> Session:
    """Three reviewers, three papers, every pair scored, one low-scoring pin."""
    keys = list(SCORES)
    return Session(
        name="pinned low",
        policy=Policy(
            reviews=2, min_reviews=2, cap=2, bottleneck=True, max_leads=0,
            conflict_rules=NO_INFERENCE,
        ),
        papers=[Paper(id=f"p{i}", title=f"An invented study {i}") for i in range(3)],
        reviewers=[Reviewer(id=r) for r in "abc"],
        scores=ScoreTable.from_arrays(
            np.array(["abc".index(r) for r, _ in keys], dtype=np.int32),
            np.array([int(p[1:]) for _, p in keys], dtype=np.int32),
            np.array([SCORES[k] for k in keys]),
        ),
        pins=[PairRule(reviewer=PIN[0], paper=PIN[1])],
    )


def exhaustive_best() -> tuple[int, float, float]:
    """(reviews, lowest unpinned score, total score) of the best plan, by trying every plan."""
    best: tuple[int, float, float] = (-1, -1.0, -1.0)
    others = [k for k in SCORES if k != PIN]
    for size in range(len(others) + 1):
        for chosen in itertools.combinations(others, size):
            pairs = [PIN, *chosen]
            loads = [sum(r == who for r, _ in pairs) for who in "abc"]
            counts = [sum(p == f"p{i}" for _, p in pairs) for i in range(3)]
            if max(loads) > 2 or max(counts) > 2:
                continue
            lowest = min((SCORES[k] for k in chosen), default=float("inf"))
            key = (len(pairs), lowest, round(sum(SCORES[k] for k in pairs), 9))
            best = max(best, key)
    return best


def test_bottleneck_raises_the_lowest_unpinned_score_and_reports_both(
    tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    from review_alloc.cli import main

    session = bottleneck_session()
    outcome = make_plan(session)
    summary = plan_summary(session, outcome.plan)
    # Reference: exhaustive search over every plan that keeps the pin (coverage first, then
    # the lowest unpinned score, then total score).
    reviews, lowest, total = exhaustive_best()
    assert outcome.plan.figures.coverage == reviews
    assert summary["bottleneck"] == pytest.approx(lowest)
    assert summary["lowest_unpinned_score"] == pytest.approx(lowest)
    assert summary["total_score"] == pytest.approx(total)
    # The pinned pair is assigned and scores lower: the overall figure says so.
    assert summary["lowest_score"] == SCORES[PIN] < summary["lowest_unpinned_score"]

    path = tmp_path / "s.json"
    save_session(session, path)
    capsys.readouterr()
    assert main(["plan", str(path)]) == 0
    text = capsys.readouterr().out
    assert f"lowest unpinned score {lowest}" in text
    assert f"lowest assigned score {SCORES[PIN]}" in text
    assert main(["plan", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert (data["lowest_score"], data["lowest_unpinned_score"]) == (SCORES[PIN], lowest)


def _plan(session: Session, pairs: list[tuple[str, str]]) -> Plan:
    rows = [Assignment(reviewer=r, paper=p, score=0.5) for r, p in pairs]
    reviewer, paper, score = assignment_indices(session, rows)
    return Plan(
        assignments=rows,
        figures=plan_figures(session, reviewer, paper, score),
        created_at=datetime(2027, 1, 1, tzinfo=UTC),
        checked=False,
        method="test",
    )


def test_reviewers_without_an_institution_are_never_over_the_limit() -> None:
    session = Session(
        name="no labs",
        policy=Policy(reviews=3, min_reviews=1, max_per_institution=1, conflict_rules=NO_INFERENCE),
        papers=[Paper(id="p0", title="An invented study")],
        reviewers=[
            Reviewer(id="a"),
            Reviewer(id="b", institution=" "),
            Reviewer(id="c", institution="Lab Oster"),
            Reviewer(id="d", institution="lab  oster"),
        ],
    )
    outcome = make_plan(session)
    on_paper = {a.reviewer for a in outcome.plan.assignments}
    assert {"a", "b"} <= on_paper
    institutions = plan_summary(session, outcome.plan)["institutions"]
    assert institutions["over_limit"] == 0 and institutions["most_on_one_paper"] == 1
    # A real breach (two of one lab, however spelt) still counts, once per paper.
    forged = _plan(session, [("a", "p0"), ("b", "p0"), ("c", "p0"), ("d", "p0")])
    institutions = plan_summary(session, forged)["institutions"]
    assert institutions["over_limit"] == 1 and institutions["most_on_one_paper"] == 2
