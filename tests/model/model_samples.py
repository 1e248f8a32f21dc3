"""A small invented session for the model tests (no real people or institutions)."""

from __future__ import annotations

from datetime import UTC, datetime

from review_alloc.model import (
    Assignment,
    Conflict,
    PairRule,
    Paper,
    Plan,
    PlanFigures,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)


def make_session() -> Session:
    """Three papers, three reviewers, one declared conflict, a pin, a block and a plan."""
    papers = [
        Paper(
            id="P1",
            title="Tidal sensing with drifting buoys",
            topics=["buoys"],
            authors=["ada.quill@northmere.example"],
            institutions=["Northmere Institute"],
        ),
        Paper(id="P2", title="Sediment models", reviews=2, min_reviews=1),
        Paper(id="P3", title="Sonar calibration", reviews=1, withdrawn=True),
    ]
    reviewers = [
        Reviewer(id="R1", name="Cyra Vellmarsh", email="cyra@wrenholt.example", cap=4, floor=1),
        Reviewer(id="R2", name="Dario Holtkvist", email="dario@ashmere.example", senior=True),
        Reviewer(id="R3", name="Eun Steadlind", cap=2),
    ]
    plan = Plan(
        assignments=[
            Assignment(paper="P1", reviewer="R1", score=0.75),
            Assignment(paper="P2", reviewer="R2", score=0.5),
        ],
        figures=PlanFigures(
            required_coverage=2,
            required_demand=3,
            coverage=2,
            demand=5,
            floors_met=1,
            floors_demand=1,
            total_score=1.25,
            assigned=2,
        ),
        created_at=datetime(2027, 3, 1, 9, 30, tzinfo=UTC),
        checked=True,
        method="min-cost flow",
    )
    return Session(
        name="Harbour Workshop 2027",
        policy=Policy(reviews=3, min_reviews=2, cap=5, floor=3),
        papers=papers,
        reviewers=reviewers,
        conflicts=[Conflict(reviewer="R3", paper="P1", reason="former advisor")],
        scores=ScoreTable.from_arrays([0, 1, 2, 0], [0, 1, 1, 1], [0.75, 0.5, 0.25, 0.0]),
        pins=[PairRule(reviewer="R1", paper="P1", reason="chair's choice")],
        blocks=[PairRule(reviewer="R2", paper="P1")],
        plan=plan,
    )
