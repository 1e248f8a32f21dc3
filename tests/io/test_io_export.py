"""Plan exports: columns, order, row count, atomic writes."""

from __future__ import annotations

import csv
from datetime import UTC, datetime
from pathlib import Path

import pytest

import review_alloc.model.storage as storage
from review_alloc.io import export_plan_csv
from review_alloc.model import (
    Assignment,
    InputError,
    Paper,
    Plan,
    PlanFigures,
    Reviewer,
    Session,
)


def _session(with_plan: bool = True) -> Session:
    pairs = [("P2", "R1", 0.5), ("P10", "R2", 0.25), ("P2", "R2", 1.0), ("P1", "R1", 0.0)]
    plan = Plan(
        assignments=[
            Assignment(paper=p, reviewer=r, score=s, lead=(p, r) == ("P2", "R2"))
            for p, r, s in pairs
        ],
        figures=PlanFigures(
            required_coverage=4,
            required_demand=6,
            coverage=4,
            demand=9,
            floors_met=0,
            floors_demand=0,
            total_score=1.75,
            assigned=4,
        ),
        created_at=datetime(2027, 3, 1, tzinfo=UTC),
        checked=True,
        method="min-cost flow",
    )
    return Session(
        name="Harbour Workshop",
        papers=[
            Paper(id="P1", title='Buoys, "drift" and sonar'),
            Paper(id="P2", title="Tides"),
            Paper(id="P10", title="Sediment"),
        ],
        reviewers=[
            Reviewer(id="R1", name="Cyra Vellmarsh", email="cyra@wrenholt.example"),
            Reviewer(id="R2", name="Dario Holtkvist"),
        ],
        plan=plan if with_plan else None,
    )


def _read(path: Path) -> list[list[str]]:
    with path.open(newline="", encoding="utf-8") as handle:
        return list(csv.reader(handle))


def test_export_by_paper(tmp_path: Path) -> None:
    path = tmp_path / "plan.csv"
    assert export_plan_csv(_session(), path) == 4
    assert _read(path) == [
        ["paper_id", "title", "reviewer_id", "reviewer_name", "reviewer_email", "score", "lead"],
        [
            "P1",
            'Buoys, "drift" and sonar',
            "R1",
            "Cyra Vellmarsh",
            "cyra@wrenholt.example",
            "0.0",
            "no",
        ],
        ["P10", "Sediment", "R2", "Dario Holtkvist", "", "0.25", "no"],
        ["P2", "Tides", "R1", "Cyra Vellmarsh", "cyra@wrenholt.example", "0.5", "no"],
        ["P2", "Tides", "R2", "Dario Holtkvist", "", "1.0", "yes"],
    ]


def test_export_by_reviewer(tmp_path: Path) -> None:
    path = tmp_path / "plan.csv"
    assert export_plan_csv(_session(), path, by="reviewer") == 4
    rows = _read(path)
    assert rows[0] == [
        "reviewer_id",
        "reviewer_name",
        "reviewer_email",
        "paper_id",
        "title",
        "score",
        "lead",
    ]
    assert [(r[0], r[3]) for r in rows[1:]] == [
        ("R1", "P1"),
        ("R1", "P2"),
        ("R2", "P10"),
        ("R2", "P2"),
    ]


def test_export_without_a_plan_writes_nothing(tmp_path: Path) -> None:
    path = tmp_path / "plan.csv"
    with pytest.raises(InputError, match="Harbour Workshop: plan: the session has no plan"):
        export_plan_csv(_session(with_plan=False), path)
    assert not path.exists()


def test_export_refuses_an_unknown_order(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="by must be 'paper' or 'reviewer'"):
        export_plan_csv(_session(), tmp_path / "plan.csv", by="score")  # type: ignore[arg-type]


def test_failed_export_leaves_the_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "plan.csv"
    path.write_text("old contents\n")

    def broken_replace(src: str, dst: str) -> None:
        raise OSError(13, "Permission denied")

    monkeypatch.setattr(storage.os, "replace", broken_replace)
    with pytest.raises(InputError, match=r"plan.csv: cannot write \(Permission denied\)"):
        export_plan_csv(_session(), path)
    assert path.read_text() == "old contents\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.csv"]
