"""What-if scenarios side by side: previews the chair kept (fixes, cap raises, recruits,
overload), compared figure by figure in one table, one of which may be accepted."""

from __future__ import annotations

from collections.abc import Callable

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from review_alloc.model import Session
from review_alloc.plan.whatif import WhatIf
from review_alloc.tui.grid import RowTable

COLUMNS = ("Scenario", "Req", "All", "Score", "Short", "Over", "Moved", "Tell", "New", "Changes")
"""One column per figure a chair weighs (short names, so that all fit 80 columns; `LEGEND`
spells them out); the first row is the session as it is."""

LEGEND = (
    "Req: required reviews · All: all reviews · Short: {noun}s short · Over: reviewers above "
    "cap · Moved: pairs moved and Tell: reviewers to tell, against the current plan · New: "
    "people to recruit"
)


def parse_pairs(text: str, what: str) -> tuple[dict[str, int], list[str]]:
    """'NAME=N, NAME=N' as a mapping (names may hold spaces), or the problems with it."""
    found: dict[str, int] = {}
    problems: list[str] = []
    for part in (p.strip() for p in text.split(",")):
        if not part:
            continue
        name, eq, amount = part.rpartition("=")
        if not eq or not name.strip():
            problems.append(f"{what}: {part!r} is not of the form NAME=N")
            continue
        try:
            n = int(amount)
        except ValueError:
            problems.append(f"{what}: {part!r}: {amount.strip()!r} is not a whole number")
            continue
        if n < 1:
            problems.append(f"{what}: {part!r}: the number must be 1 or more")
            continue
        found[name.strip()] = found.get(name.strip(), 0) + n
    return found, problems


def scenario_label(w: WhatIf) -> str:
    """A scenario's changes in a few words (the detail below the table lists them all)."""
    asked = w.request
    parts: list[str] = []
    fixes = getattr(asked, "fixes", ())
    parts += [f"fix {key}" for key in fixes]
    raises = getattr(asked, "raise_caps", {}) or {}
    if raises:
        parts.append(f"raise {len(raises)} caps +{sum(raises.values())}")
    recruits = getattr(asked, "add_reviewers", {}) or {}
    if recruits:
        parts.append(f"add {sum(recruits.values())} reviewers")
    overload = getattr(asked, "allow_overload", None)
    if overload is not None:
        parts.append(f"overload up to {overload}")
    if parts:
        return "; ".join(parts)
    if not w.changes:
        return "(no change)"
    return w.changes[0] + (f" (+{len(w.changes) - 1} more)" if len(w.changes) > 1 else "")


def base_row(w: WhatIf) -> list[object]:
    """The session as it is, from a scenario's 'before' plan (the same for every scenario)."""
    b = w.before.figures
    return [
        "as it is",
        f"{b.required_coverage}/{b.required_demand}",
        f"{b.coverage}/{b.demand}",
        f"{b.total_score:.2f}",
        len(w.gaps_before),
        "",
        "",
        "",
        "",
        "",
    ]


def scenario_row(number: int, w: WhatIf, current: Session) -> list[object]:
    """One kept scenario's figures, marked when the session has changed since it was made."""
    a = w.after.figures
    moved = "-" if w.moves is None else len(w.moves.added) + len(w.moves.removed)
    tell = "-" if w.moves is None else len(w.to_tell())
    stale = "" if w.base is current else " (out of date)"
    return [
        f"S{number}{stale}",
        f"{a.required_coverage}/{a.required_demand}",
        f"{a.coverage}/{a.demand}",
        f"{a.total_score:.2f}",
        len(w.gaps_after),
        len(w.overloads),
        moved,
        tell,
        len(w.recruits()),
        scenario_label(w),
    ]


class ScenarioScreen(ModalScreen[int | None]):
    """The kept scenarios in one table; `a` accepts the one under the cursor, `d` drops it.

    Dismisses with the index of the scenario to accept, or None."""

    BINDINGS = [
        Binding("escape", "close", "Close"),
        Binding("a", "accept", "Accept scenario"),
        Binding("d", "drop", "Drop scenario"),
    ]

    def __init__(
        self, scenarios: list[WhatIf], current: Session, dropped: Callable[[int], None]
    ) -> None:
        super().__init__()
        self.scenarios, self.current, self.dropped = scenarios, current, dropped

    def compose(self) -> ComposeResult:
        """A heading, the table and the scenario's changes in full."""
        with Vertical(classes="dialog scenarios"):
            yield Static(Text("What-if scenarios side by side", style="bold"))
            yield Static(
                Text(
                    "a: accept the scenario under the cursor · d: drop it · escape: close\n"
                    + LEGEND.format(noun=self.current.noun),
                    style="dim",
                ),
                classes="keys",
            )
            yield RowTable(classes="scenario-table")
            yield Static("", classes="scenario-detail")

    def on_mount(self) -> None:
        """Fill the table and start on the first scenario."""
        self._fill()
        self.query_one(RowTable).focus()

    def _fill(self, cursor: int = 1) -> None:
        rows: list[list[object]] = []
        if self.scenarios:
            rows.append(base_row(self.scenarios[0]))
        rows += [scenario_row(k, w, self.current) for k, w in enumerate(self.scenarios, 1)]
        # The cursor stays on a scenario row (the one after a dropped one, else the last).
        at = min(cursor, len(rows) - 1)
        self.query_one(RowTable).fill(COLUMNS, rows, widest=40, cursor=max(at, 0))
        self._show_detail()

    def table_rows(self) -> list[list[str]]:
        """The table as text (for the tests)."""
        table = self.query_one(RowTable)
        return [table.row_at(k) for k in range(table.row_count)]

    def chosen(self) -> int | None:
        """The index of the scenario under the cursor (None on the 'as it is' row)."""
        row = self.query_one(RowTable).cursor_row
        return row - 1 if 1 <= row <= len(self.scenarios) else None

    def _show_detail(self) -> None:
        k = self.chosen()
        out = Text()
        if k is None:
            out.append("the session as it is, with its plan" if self.scenarios else "")
        else:
            w = self.scenarios[k]
            out.append(f"S{k + 1}: ", style="bold")
            # One wrapped paragraph, so that a long fix still fits under the table at 80x24.
            out.append("; ".join(w.changes[:12]))
            if len(w.changes) > 12:
                out.append(f"; … and {len(w.changes) - 12} more")
        self.query_one(".scenario-detail", Static).update(out)

    @on(RowTable.Highlighted)
    def _moved(self) -> None:
        self._show_detail()

    def action_accept(self) -> None:
        """Accept the scenario under the cursor."""
        k = self.chosen()
        if k is None:
            self.notify("choose a scenario (S1, S2, …) to accept", severity="warning")
            return
        self.dismiss(k)

    def action_drop(self) -> None:
        """Forget the scenario under the cursor."""
        k = self.chosen()
        if k is None:
            return
        self.dropped(k)
        self._fill(k + 1)
        if not self.scenarios:
            self.dismiss(None)

    def action_close(self) -> None:
        """Close without accepting."""
        self.dismiss(None)
