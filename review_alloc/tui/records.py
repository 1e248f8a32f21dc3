"""The Conflicts and History views: declared and inferred conflicts; plans and changes so far."""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.reactive import reactive
from textual.timer import Timer
from textual.widget import Widget
from textual.widgets import Input, Static

from review_alloc.model import Plan
from review_alloc.tui.facts import Facts, PlanChange, plan_change
from review_alloc.tui.grid import RowTable

CONFLICT_COLUMNS = ("Reviewer", "Name", "Paper", "Title", "Kind", "Reasons")
REVISION_COLUMNS = ("No.", "Made", "Reviews", "Score", "Note")
DIFF_COLUMNS = ("Change", "Paper", "Reviewer", "Score")
EVENT_COLUMNS = ("When", "Change", "Subject", "Detail")

SHOWN_AT_MOST = 2000
"""Rows drawn at once in the Conflicts table; the filter narrows the rest."""


class ConflictView(Widget):
    """Every conflicted pair, declared or inferred, with its reasons; `a` declares a new one."""

    BINDINGS = [
        Binding("slash", "focus_filter", "Filter"),
        Binding("a", "add", "Add conflict", tooltip="Declare a conflict of interest"),
    ]

    facts: reactive[Facts | None] = reactive(None, always_update=True)

    @dataclass
    class AddRequest(Message):
        """The chair wants to declare a conflict (pre-filled from the cursor row)."""

        reviewer: str
        paper: str

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._rows: list[tuple[str, str, list[str]]] = []
        self._filter = ""
        self._debounce: Timer | None = None

    def compose(self) -> ComposeResult:
        """Filter, count line and the table."""
        yield Input(
            placeholder="filter (/): reviewer, paper, 'declared', 'inferred' or a reason",
            compact=True,
            classes="filter",
        )
        yield Static("", classes="count")
        yield RowTable(classes="main")

    def watch_facts(self, facts: Facts | None) -> None:
        """Rebuild the rows from the conflict set of the new facts."""
        if facts is None:
            return
        s = facts.session
        rows = []
        for (j, i), why in sorted(facts.conflict_reason.items(), key=lambda x: (x[0][1], x[0][0])):
            r, p = s.reviewers[j], s.papers[i]
            kind = "declared" if why.startswith("declared") else "inferred"
            if kind == "declared" and ";" in why:
                kind = "declared+inferred"
            rows.append((r.id, p.id, [r.id, r.name[:20], p.id, p.title[:26], kind, why]))
        self._rows = rows
        self._redraw()

    def _redraw(self) -> None:
        words = self._filter.casefold().split()
        matching = [r for r in self._rows if all(w in " ".join(r[2]).casefold() for w in words)]
        table = self.query_one(RowTable)
        table.fill(
            CONFLICT_COLUMNS,
            [cells for *_, cells in matching[:SHOWN_AT_MOST]],
            [cells for *_, cells in self._rows[:SHOWN_AT_MOST]],
        )
        self._shown = matching[:SHOWN_AT_MOST]
        declared = sum(r[2][4].startswith("declared") for r in self._rows)
        note = (
            f"{len(self._rows)} conflicted pairs ({declared} declared, "
            f"{len(self._rows) - declared} inferred from e-mail and institution); "
            f"{len(matching)} match"
        )
        if len(matching) > SHOWN_AT_MOST:
            note += f", first {SHOWN_AT_MOST} shown: filter to narrow"
        self.query_one(".count", Static).update(
            Text(note + ".   a: declare a conflict", style="dim")
        )

    def shown_pairs(self) -> list[tuple[str, str]]:
        """(reviewer, paper) of the rows shown."""
        return [(r, p) for r, p, _ in self._shown]

    @on(Input.Changed, ".filter")
    def _filter_changed(self, event: Input.Changed) -> None:
        self._filter = event.value
        if self._debounce is not None:
            self._debounce.stop()
        self._debounce = self.set_timer(0.15, self._redraw)

    @on(Input.Submitted, ".filter")
    def _filter_done(self) -> None:
        self._redraw()
        self.query_one(RowTable).focus()

    def action_focus_filter(self) -> None:
        """Move to the filter line."""
        self.query_one(Input).focus()

    def action_add(self) -> None:
        """Ask the app for the declare-conflict form, pre-filled from the cursor row."""
        table = self.query_one(RowTable)
        shown = getattr(self, "_shown", [])
        reviewer, paper = ("", "")
        if shown and 0 <= table.cursor_row < len(shown):
            reviewer, paper = shown[table.cursor_row][0], ""
        self.post_message(self.AddRequest(reviewer, paper))


@dataclass(frozen=True)
class Revision:
    """A plan made (or loaded) in this sitting, numbered from 1."""

    number: int
    plan: Plan
    note: str


class HistoryView(Widget):
    """Plans made so far, the difference between any two, and every recorded change."""

    BINDINGS = [
        Binding("m", "mark", "Mark base", tooltip="Compare other plans against this one"),
        Binding("u", "undo", "Undo change"),
    ]

    revisions: reactive[list[Revision]] = reactive(list, always_update=True)
    facts: reactive[Facts | None] = reactive(None, always_update=True)

    class UndoRequest(Message):
        """The chair wants the last change taken back."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._base: int | None = None
        self._diffs: dict[tuple[int, int], PlanChange] = {}

    def compose(self) -> ComposeResult:
        """Revisions and their diff side by side; the change log below."""
        with Horizontal(classes="top"):
            with Vertical(classes="revisions-box"):
                yield Static(Text("Plans (m marks the base of the diff)", style="bold"))
                yield RowTable(classes="revisions")
            with Vertical(classes="diff-box"):
                yield Static("", classes="diff-head")
                yield RowTable(classes="diff")
        yield Static(Text("Changes, newest first (u or ctrl+z undoes the last)", style="bold"))
        yield RowTable(classes="events")

    def watch_revisions(self, revisions: list[Revision]) -> None:
        """Redraw the plan list with the newest selected."""
        table = self.query_one(".revisions", RowTable)
        rows = [
            [
                f"{r.number}" + (" (base)" if r.number == self._base else ""),
                r.plan.created_at.strftime("%H:%M:%S"),
                f"{r.plan.figures.coverage}/{r.plan.figures.demand}",
                f"{r.plan.figures.total_score:.2f}",
                r.note,
            ]
            for r in revisions
        ]
        table.fill(REVISION_COLUMNS, rows)
        if revisions:
            table.move_cursor(len(revisions) - 1)
        self._show_diff()

    def watch_facts(self, facts: Facts | None) -> None:
        """Redraw the change log."""
        if facts is None:
            return
        rows = [
            [
                e.at.strftime("%m-%d %H:%M:%S"),
                e.action,
                e.subject,
                (e.detail + (f" ({e.reason})" if e.reason else ""))[:60],
            ]
            for e in reversed(facts.session.events[-500:])
        ]
        self.query_one(".events", RowTable).fill(EVENT_COLUMNS, rows)

    @on(RowTable.Highlighted, ".revisions")
    def _revision_moved(self) -> None:
        self._show_diff()

    def _current(self) -> int | None:
        table = self.query_one(".revisions", RowTable)
        if not self.revisions or not 0 <= table.cursor_row < len(self.revisions):
            return None
        return table.cursor_row

    def _show_diff(self) -> None:
        head = self.query_one(".diff-head", Static)
        table = self.query_one(".diff", RowTable)
        k = self._current()
        if k is None:
            table.fill(DIFF_COLUMNS, [])
            head.update(Text("No plans yet: press r to plan.", style="dim"))
            return
        target = self.revisions[k]
        base_no = self._base if self._base is not None else target.number - 1
        base = next((r for r in self.revisions if r.number == base_no), None)
        pair = (base.number if base else 0, target.number)
        change = self._diffs.get(pair)
        if change is None:
            change = self._diffs[pair] = plan_change(base.plan if base else None, target.plan)
        title = f"plan {target.number} against " + (f"plan {base.number}" if base else "nothing")
        head.update(Text(f"{title}: {change.headline()}", style="bold"))
        rows = [("added", p, r, f"{s:.2f}") for p, r, s in change.added]
        rows += [("removed", p, r, f"{s:.2f}") for p, r, s in change.removed]
        table.fill(DIFF_COLUMNS, rows[:3000])

    def diff_rows(self) -> list[tuple[str, ...]]:
        """The diff table's rows as text (for the tests)."""
        table = self.query_one(".diff", RowTable)
        return [tuple(table.row_at(k)) for k in range(table.row_count)]

    def action_mark(self) -> None:
        """Make the plan under the cursor the base the others are compared against."""
        k = self._current()
        if k is None:
            return
        number = self.revisions[k].number
        self._base = None if self._base == number else number
        self.revisions = self.revisions
        if k < len(self.revisions):
            self.query_one(".revisions", RowTable).move_cursor(k)

    def action_undo(self) -> None:
        """Ask the app to take back the last change."""
        self.post_message(self.UndoRequest())
