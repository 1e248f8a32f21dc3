"""The plan as a real workbook (.xlsx): by paper, by reviewer, the papers short, a summary.

Written with xlsxwriter, each cell with its type: every text with `write_string`, so a title
such as `=HYPERLINK(...)` is stored as text and can never become a formula (unlike CSV, a
workbook cell carries its type, so no quote marker is added and the title reads as the author
wrote it); scores, loads and counts with `write_number`, so they stay numbers. The header row
of each sheet is bold, frozen and filterable; columns are as wide as their longest cell, within
limits. The file is built in memory; the workspace writes it atomically.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from typing import Any

from review_alloc.io.cells import Cell
from review_alloc.io.export import plan_table
from review_alloc.model import Session

SHEETS = ("By paper", "By reviewer", "Short of reviews", "Summary")
"""The sheets of an exported workbook, in order."""

_MIN_WIDTH, _MAX_WIDTH = 6, 60
_OPTIONS = {
    "in_memory": True,
    # Never guess a type from text: a title stays text, an id like 00123 keeps its zeros.
    "strings_to_numbers": False,
    "strings_to_formulas": False,
    "strings_to_urls": False,
}


def reviewer_table(session: Session) -> tuple[tuple[str, ...], list[tuple[Cell, ...]]]:
    """(header, rows) of every active reviewer: load against cap and floor, papers, leads."""
    assert session.plan is not None
    papers: dict[str, list[str]] = {}
    leads: dict[str, int] = {}
    for a in session.plan.assignments:
        papers.setdefault(a.reviewer, []).append(a.paper)
        leads[a.reviewer] = leads.get(a.reviewer, 0) + int(a.lead)
    header = (
        "reviewer_id",
        "name",
        "email",
        "institution",
        "load",
        "cap",
        "floor",
        "leads",
        "state",
        "papers",
    )
    rows: list[tuple[Cell, ...]] = []
    for j, r in enumerate(session.reviewers):
        if r.withdrawn:
            continue
        load = len(papers.get(r.id, []))
        cap, floor = session.reviewer_cap(j), session.reviewer_floor(j)
        state = "above cap" if load > cap else "below floor" if load < floor else ""
        rows.append(
            (
                r.id,
                r.name,
                r.email,
                r.institution,
                load,
                cap,
                floor,
                leads.get(r.id, 0),
                state,
                "; ".join(sorted(papers.get(r.id, []))),
            )
        )
    return header, rows


def gap_table(summary: dict[str, Any]) -> tuple[tuple[str, ...], list[tuple[Cell, ...]]]:
    """(header, rows) of the papers short of reviews, from the plan summary's gaps."""
    header = (
        "paper_id",
        "title",
        "assigned",
        "reviews",
        "min_reviews",
        "missing",
        "missing_required",
        "why",
    )
    rows: list[tuple[Cell, ...]] = [
        (
            g["paper"],
            g["title"],
            g["assigned"],
            g["reviews"],
            g["min_reviews"],
            g["missing"],
            g["missing_required"],
            g.get("reason", ""),
        )
        for g in summary["gaps"]
    ]
    return header, rows


def summary_table(
    session: Session, summary: dict[str, Any], caution: str
) -> tuple[tuple[str, ...], list[tuple[Cell, ...]]]:
    """(header, rows) of the headline figures, one figure a row."""
    noun = session.noun
    load = summary["load"]
    rows: list[tuple[Cell, ...]] = [
        ("session", session.name),
        ("plan made", summary["created_at"]),
        ("checked", "yes" if summary["checked"] else "no"),
        (f"{noun}s", summary["papers"]),
        ("reviewers", summary["reviewers"]),
        ("assignments", len(summary["assignments"])),
        ("required reviews placed", summary["required_coverage"]),
        ("required reviews needed", summary["required_demand"]),
        ("reviews placed", summary["coverage"]),
        ("reviews wanted", summary["demand"]),
        ("reviewer floors met", summary["floors_met"]),
        ("reviewer floors wanted", summary["floors_demand"]),
        ("total score", float(summary["total_score"])),
        ("mean score", float(summary["mean_score"])),
        ("least load", load["min"]),
        ("most load", load["max"]),
        ("mean load", float(load["mean"])),
        (f"{noun}s short of reviews", len(summary["gaps"])),
        ("reviews missing", sum(g["missing"] for g in summary["gaps"])),
        ("reviewers above cap", len(summary["overloads"])),
        ("reviewers below floor", len(summary["underloads"])),
        ("caution", caution),
    ]
    return ("figure", "value"), rows


def _width(value: Cell) -> int:
    text = value if isinstance(value, str) else f"{value:g}"
    return max((len(line) for line in text.splitlines()), default=0)


def _sheet(
    book: Any,
    name: str,
    header: Sequence[str],
    rows: Sequence[Sequence[Cell]],
    bold: Any,
    lead_column: int | None = None,
    lead_format: Any = None,
) -> None:
    sheet = book.add_worksheet(name)
    widths = [len(h) for h in header]
    for c, title in enumerate(header):
        sheet.write_string(0, c, title, bold)
    for r, row in enumerate(rows, start=1):
        marked = lead_column is not None and row[lead_column] == "yes"
        style = lead_format if marked else None
        for c, value in enumerate(row):
            if isinstance(value, bool):
                raise TypeError("write a flag as text (yes/no), not as a bool")
            if isinstance(value, int | float):
                if not math.isfinite(value):
                    raise ValueError(f"a number cell must be finite, not {value!r}")
                sheet.write_number(r, c, value, style)
            else:
                sheet.write_string(r, c, value, style)
            widths[c] = max(widths[c], _width(value))
    for c, width in enumerate(widths):
        sheet.set_column(c, c, min(max(width + 2, _MIN_WIDTH), _MAX_WIDTH))
    sheet.freeze_panes(1, 0)
    sheet.autofilter(0, 0, max(len(rows), 1), len(header) - 1)


def workbook_bytes(session: Session, summary: dict[str, Any], caution: str) -> bytes:
    """The .xlsx file of the session's plan (sheets `SHEETS`), as bytes."""
    import xlsxwriter

    out = io.BytesIO()
    book = xlsxwriter.Workbook(out, _OPTIONS)
    bold = book.add_format({"bold": True, "bottom": 1})
    lead = book.add_format({"bold": True})
    header, rows = plan_table(session, "paper")
    _sheet(book, SHEETS[0], header, rows, bold, header.index("lead"), lead)
    _sheet(book, SHEETS[1], *reviewer_table(session), bold)
    _sheet(book, SHEETS[2], *gap_table(summary), bold)
    _sheet(book, SHEETS[3], *summary_table(session, summary, caution), bold)
    book.close()
    return out.getvalue()
