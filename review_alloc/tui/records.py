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

from review_alloc.plan.diff import PlanDiff
from review_alloc.tui.grid import FilterInput, RowTable
from review_alloc.workspace import HistoryEntry
from review_alloc.workspace.facts import Facts

CONFLICT_COLUMNS = ("Reviewer", "Paper", "Kind", "Reasons", "Name", "Title")
"""Headings of the Conflicts table; "Paper" is said in the session's noun."""
REVISION_COLUMNS = ("No.", "From", "Made (UTC)", "Reviews", "Score", "Kept", "Changes")
DIFF_COLUMNS = ("Reviewer", "Papers added", "Papers removed")
"""Headings of a diff; "Papers" is said in the session's noun."""


def in_noun(headings: tuple[str, ...], noun: str) -> tuple[str, ...]:
    """Headings with 'Paper' said as the session's noun ('Proposal' for a grant panel)."""
    return tuple(h.replace("Paper", noun.capitalize()) for h in headings)


def described(action: str, text: str, noun: str) -> str:
    """An event's line with its action in the session's noun ('withdraw-proposal ...')."""
    if noun != "paper" and text.startswith(action):
        return action.replace("paper", noun) + text[len(action) :]
    return text
EVENT_COLUMNS = ("When (UTC)", "Change")

SHOWN_AT_MOST = 2000
"""Rows drawn at once in the Conflicts table; the filter narrows the rest."""


def _people(count: int) -> str:
    """'1 reviewer', '3 reviewers'."""
    return f"{count} reviewer" + ("" if count == 1 else "s")


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
        self._filter = ""
        self._debounce: Timer | None = None
        self._noun = "paper"
        self._source: dict[tuple[int, int], str] | None = None
        self._drawn_noun = ""
        self._order: list[tuple[int, int]] = []
        self._rev: list[tuple[str, str]] = []
        self._pap: list[tuple[str, str]] = []
        self._built: list[tuple[str, str, list[str]]] | None = None
        self._declared = 0
        self._shown: list[tuple[str, str, list[str]]] = []

    def compose(self) -> ComposeResult:
        """Filter, count line and the table."""
        yield FilterInput(
            placeholder="filter (/): reviewer, paper, 'declared', 'inferred' or a reason",
            compact=True,
            classes="filter",
        )
        yield Static("", classes="count")
        yield RowTable(classes="main")
        yield Static("", classes="conflict-note")

    def watch_facts(self, facts: Facts | None) -> None:
        """Rebuild the rows from the conflict set of the new facts."""
        if facts is None:
            return
        s = facts.session
        self._noun = s.noun
        self.query_one(Input).placeholder = (
            f"filter (/): reviewer, {s.noun}, 'declared', 'inferred' or a reason"
        )
        if facts.conflict_reason is self._source and s.noun == self._drawn_noun:
            # The same conflicts (a pin, a block or a plan leaves them alone): nothing to redo.
            return
        reasons = facts.conflict_reason
        self._source, self._drawn_noun = reasons, s.noun
        self._rev = [(r.id, r.name[:20]) for r in s.reviewers]
        self._pap = [(p.id, p.title[:26]) for p in s.papers]
        n_r = max(len(self._rev), 1)
        # Rows are built only when drawn or filtered: 20,000 rows of cells up front cost a
        # third of a second on the large sample, mostly in the garbage collector.
        self._order = sorted(reasons, key=lambda pair: pair[1] * n_r + pair[0])
        self._declared = sum(why.startswith("declared") for why in reasons.values())
        self._built = None
        self._redraw()

    def _row(self, pair: tuple[int, int]) -> tuple[str, str, list[str]]:
        j, i = pair
        why = self._source[pair] if self._source is not None else ""
        if why.startswith("declared"):
            kind = "declared+inferred" if ";" in why else "declared"
        else:
            kind = "inferred"
        (rid, name), (pid, title) = self._rev[j], self._pap[i]
        return rid, pid, [rid, pid, kind, why, name, title]

    def _all_rows(self) -> list[tuple[str, str, list[str]]]:
        if self._built is None:
            self._built = [self._row(pair) for pair in self._order]
        return self._built

    def _redraw(self) -> None:
        words = self._filter.casefold().split()
        total = len(self._order)
        head = [self._row(pair) for pair in self._order[:SHOWN_AT_MOST]]
        if words:
            matching = [
                r for r in self._all_rows() if all(w in " ".join(r[2]).casefold() for w in words)
            ]
            count = len(matching)
            shown = matching[:SHOWN_AT_MOST]
        else:
            count, shown = total, head
        table = self.query_one(RowTable)
        table.fill(
            in_noun(CONFLICT_COLUMNS, self._noun),
            [cells for *_, cells in shown],
            [cells for *_, cells in head],
        )
        self._shown = shown
        self._show_note()
        declared = self._declared
        note = (
            f"{total} conflicted pairs: {declared} declared, "
            f"{total - declared} inferred (e-mail, institution) · {count} match"
        )
        if count > SHOWN_AT_MOST:
            note += f" · first {SHOWN_AT_MOST} shown, / narrows"
        self.query_one(".count", Static).update(Text(note + " · a: declare one", style="dim"))

    @on(RowTable.Highlighted)
    def _show_note(self) -> None:
        """The cursor row in full, wrapped: its reasons are never cut off at any width."""
        table = self.query_one(RowTable)
        shown = self._shown
        note = self.query_one(".conflict-note", Static)
        if not shown or not 0 <= table.cursor_row < len(shown):
            note.update("")
            return
        reviewer, paper, cells = shown[table.cursor_row]
        text = Text(f"{reviewer} {cells[4]} × {paper} {cells[5]} ({cells[2]}): ", style="bold")
        text.append(cells[3])
        note.update(text)

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
    @on(FilterInput.Left, ".filter")
    def _filter_done(self) -> None:
        if self._debounce is not None:
            self._debounce.stop()
        self._redraw()
        self.query_one(RowTable).focus()

    def action_focus_filter(self) -> None:
        """Move to the filter line."""
        self.query_one(Input).focus()

    def set_filter(self, text: str) -> None:
        """Filter the table as if the text had been typed."""
        self.query_one(Input).value = text
        self._filter = text
        self._redraw()

    def action_add(self) -> None:
        """Ask the app for the declare-conflict form, pre-filled from the cursor row."""
        table = self.query_one(RowTable)
        shown = self._shown
        reviewer, paper = ("", "")
        if shown and 0 <= table.cursor_row < len(shown):
            reviewer, paper = shown[table.cursor_row][0], ""
        self.post_message(self.AddRequest(reviewer, paper))


class HistoryView(Widget):
    """Revisions (every plan made), the difference between any two, and every change."""

    BINDINGS = [
        Binding("m", "mark", "Mark base", tooltip="Compare other revisions against this one"),
        Binding("u", "undo", "Undo", tooltip="Go back one step, like ctrl+z"),
        Binding("f", "redo", "Redo", tooltip="Go forward to the revision undone last, like ctrl+y"),
    ]

    noun: str = "paper"
    """'proposal' for a grant panel; set by the app before `entries`."""

    entries: reactive[list[HistoryEntry]] = reactive(list, always_update=True)
    diff: reactive[PlanDiff | None] = reactive(None, always_update=True)
    facts: reactive[Facts | None] = reactive(None, always_update=True)

    @dataclass
    class DiffWanted(Message):
        """Show the difference from revision `base` to revision `target` (None: its parent)."""

        base: int | None
        target: int

    class UndoRequest(Message):
        """The chair wants to go back to the previous revision."""

    class RedoRequest(Message):
        """The chair wants to go forward to the revision undone last."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._base: int | None = None

    def compose(self) -> ComposeResult:
        """Revisions and their diff side by side; the change log below."""
        with Horizontal(classes="top"):
            with Vertical(classes="revisions-box"):
                yield Static(Text("Revisions (m marks the base of the diff)", style="bold"))
                yield RowTable(classes="revisions")
            with Vertical(classes="diff-box"):
                yield Static("", classes="diff-head")
                yield RowTable(classes="diff")
        yield Static(Text("Changes, newest first", style="bold"))
        yield RowTable(classes="events")

    def watch_entries(self, entries: list[HistoryEntry]) -> None:
        """Redraw the revision list with the current revision under the cursor."""
        rows = [
            [
                f"{e.number}"
                + (" ◀ now" if e.current else "")
                + (" base" if e.number == self._base else ""),
                e.parent if e.parent is not None else "-",
                e.created_at.strftime("%m-%d %H:%M"),
                f"{e.figures.coverage}/{e.figures.demand}",
                f"{e.figures.total_score:.2f}",
                "fresh"
                if e.fresh
                else (f"{e.kept}/{e.parent_pairs}" if e.kept is not None else "-"),
                len(e.changes),
            ]
            for e in entries
        ]
        current = next((k for k, e in enumerate(entries) if e.current), len(entries) - 1)
        self.query_one(".revisions", RowTable).fill(REVISION_COLUMNS, rows, cursor=max(current, 0))
        self._want_diff()

    def watch_diff(self, diff: PlanDiff | None) -> None:
        """Show one diff, reviewer by reviewer (the people a chair has to tell)."""
        head = self.query_one(".diff-head", Static)
        table = self.query_one(".diff", RowTable)
        if diff is None:
            head.update(Text("No revisions yet: press r to plan.", style="dim"))
            table.fill(in_noun(DIFF_COLUMNS, self.noun), [])
            return
        old = f"revision {diff.old}" if diff.old is not None else "no plan"
        head.update(
            Text(
                f"revision {diff.new} against {old}: +{len(diff.added)} / -{len(diff.removed)} "
                f"pairs, {diff.kept} kept; {_people(len(diff.by_reviewer))} to tell",
                style="bold",
            )
        )
        rows = [
            [reviewer, " ".join(c.added) or "-", " ".join(c.removed) or "-"]
            for reviewer, c in diff.by_reviewer.items()
        ]
        table.fill(in_noun(DIFF_COLUMNS, self.noun), rows, widest=200)

    def watch_facts(self, facts: Facts | None) -> None:
        """Redraw the change log."""
        if facts is None:
            return
        noun = facts.session.noun
        rows = [
            [e.at.strftime("%m-%d %H:%M:%S"), described(e.action, e.describe(), noun)[:160]]
            for e in reversed(facts.session.events[-500:])
        ]
        self.query_one(".events", RowTable).fill(EVENT_COLUMNS, rows, widest=120)

    @on(RowTable.Highlighted, ".revisions")
    def _revision_moved(self) -> None:
        self._want_diff()

    def _current(self) -> int | None:
        k = self.query_one(".revisions", RowTable).cursor_row
        return k if 0 <= k < len(self.entries) else None

    def _want_diff(self) -> None:
        k = self._current()
        if k is None:
            self.diff = None
            return
        target = self.entries[k].number
        base = self._base if self._base != target else None
        self.post_message(self.DiffWanted(base, target))

    def diff_rows(self) -> list[tuple[str, ...]]:
        """The diff table's rows as text (for the tests)."""
        table = self.query_one(".diff", RowTable)
        return [tuple(table.row_at(k)) for k in range(table.row_count)]

    def action_mark(self) -> None:
        """Make the revision under the cursor the base the others are compared against."""
        k = self._current()
        if k is None:
            return
        number = self.entries[k].number
        self._base = None if self._base == number else number
        self.entries = self.entries
        self.query_one(".revisions", RowTable).move_cursor(k)

    def action_undo(self) -> None:
        """Ask the app to return to the previous revision."""
        self.post_message(self.UndoRequest())

    def action_redo(self) -> None:
        """Ask the app to go forward to the revision undone last."""
        self.post_message(self.RedoRequest())
