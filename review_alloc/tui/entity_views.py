"""The Papers, Reviewers and Gaps views: a filterable, sortable table with a detail pane.

Each view gets `facts` from the app (attributes down) and asks for changes by posting
`PairRequest` or `EntityRequest` (messages up); it never changes the session itself.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.message import Message
from textual.reactive import reactive
from textual.timer import Timer
from textual.widget import Widget
from textual.widgets import Input, Static

from review_alloc.plan.whatif import is_recruit_placeholder
from review_alloc.tui.grid import FilterInput, RowTable
from review_alloc.tui.grid import cell_text as _cell_text
from review_alloc.workspace.facts import Candidate, Facts

ID_WIDTH = 14
"""The Reviewers table's Id column at its widest: a recruit placeholder's long id would push
the other columns aside; the detail pane shows the id in full."""

Row = tuple[str, list[object]]
"""A table row: its key (the entity id) and its cells."""


def _sort_key(value: object) -> tuple[int, float, str]:
    """Numbers sort as numbers, text as text; blanks last."""
    text = _cell_text(value).strip()
    head = text.split("/")[0].split()[0] if text else ""
    try:
        return (0, float(head), "")
    except ValueError:
        return (1 if text else 2, 0.0, text.casefold())


def _state(text: str) -> Text:
    """A state word styled by class; the word itself carries the meaning."""
    lowered = text.lower()
    if lowered.startswith(("below min", "over cap", "conflict", "blocked")):
        style = "bold red"
    elif lowered.startswith(("short", "below floor", "cap full", "unplanned", "pinned (")):
        style = "yellow"
    elif lowered.startswith(("covered", "assigned", "pinned", "at cap")):
        style = "green"
    elif lowered.startswith("withdrawn"):
        style = "dim strike"
    else:
        style = ""
    return Text(text, style=style)


def got_plan(facts: Facts) -> bool:
    """Whether the session has a plan (leads exist only in a plan)."""
    return facts.session.plan is not None


def _lead_cell(facts: Facts, i: int) -> str:
    """The id of the reviewer who leads paper `i`, '-' when none was chosen, '' with no plan."""
    if not got_plan(facts) or facts.session.papers[i].withdrawn:
        return ""
    lead = facts.lead_of_paper[i]
    return "-" if lead is None else facts.session.reviewers[lead].id


def _standing(c: Candidate) -> Text:
    """A pair's standing, with 'lead' added when the reviewer leads the paper."""
    return _state(c.status + (" · lead" if c.lead else ""))


def _probability(facts: Facts, c: Candidate) -> str:
    """A pair's probability in the randomised plan's draw, to three places."""
    value = facts.probability(c.reviewer, c.paper)
    return "" if value is None else f"{value:.3f}"


class EntityView(Widget):
    """A table of papers or reviewers, a filter line above it and the chosen row's detail."""

    BINDINGS = [
        Binding("slash", "focus_filter", "Filter", tooltip="Type to filter the table"),
        Binding("s", "cycle_sort", "Sort", tooltip="Sort by the next column"),
        Binding("p", "pin", "Pin/unpin", tooltip="Pin or unpin the pair under the pair cursor"),
        Binding("b", "block", "Block/unblock", tooltip="Block or unblock that pair"),
        Binding("w", "withdraw", "Withdraw/reinstate"),
        Binding("e", "edit", "Edit limits"),
        Binding("c", "edit_pair_cap", "Pair's reviewer cap", show=False),
    ]

    facts: reactive[Facts | None] = reactive(None, always_update=True)

    @dataclass
    class PairRequest(Message):
        """Pin, unpin, block or unblock one pair."""

        action: str
        reviewer: str
        paper: str

    @dataclass
    class EntityRequest(Message):
        """Withdraw, reinstate or edit one paper or reviewer."""

        action: str
        kind: str
        ident: str

    kind = "paper"
    columns: tuple[str, ...] = ()
    column_limits: dict[int, int] = {}
    """Widest a column may be drawn, by its index (a longer cell is cut with '…')."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._rows: list[Row] = []
        self._filter = ""
        self._sort_column = 0
        self._sort_reverse = False
        self._debounce: Timer | None = None
        self._shown_key: str | None = None
        self._pairs: list[Candidate] = []
        self._visible_keys: list[str] = []

    def compose(self) -> ComposeResult:
        """A filter line, the main table, then the detail (heading and pair table)."""
        yield FilterInput(placeholder=self.filter_hint(), compact=True, classes="filter")
        with Vertical(classes="split"):
            table = RowTable(classes="main")
            yield table
            with Vertical(classes="detail"):
                yield Static("", classes="detail-head")
                yield RowTable(classes="pairs")
                yield Static("", classes="pair-note")

    # -- what subclasses provide ----------------------------------------------------------

    def filter_hint(self) -> str:
        """The placeholder text of the filter line."""
        return "filter: any part of a row (id, name, topic, state)"

    def rows(self, facts: Facts) -> list[Row]:
        """Every row of the table."""
        raise ValueError(f"{type(self).__name__} shows no rows")

    def detail(self, facts: Facts, key: str) -> tuple[Text, list[Candidate]]:
        """The heading and pair list of one row."""
        raise ValueError(f"{type(self).__name__} has no detail for {key}")

    def empty_note(self, facts: Facts) -> str:
        """What the detail says when the table has no rows at all (no filter)."""
        return ""

    def pair_columns(self) -> tuple[str, ...]:
        """Columns of the detail's pair table."""
        return ("Id", "Score", "Standing", "Name")

    def pair_cells(self, facts: Facts, c: Candidate) -> list[object]:
        """Cells of one pair in the detail table."""
        raise ValueError(f"{type(self).__name__} has no pair cells")

    # -- drawing --------------------------------------------------------------------------

    def watch_facts(self, facts: Facts | None) -> None:
        """New facts: rebuild rows, redraw, keep the cursor on the same entity."""
        if facts is None:
            return
        self._rows = self.rows(facts)
        self._redraw()

    def _visible(self) -> list[Row]:
        needle = self._filter.casefold().strip()
        rows = self._rows
        if needle:
            words = needle.split()
            rows = [
                r
                for r in rows
                if all(w in " ".join(_cell_text(c) for c in r[1]).casefold() for w in words)
            ]
        if self._sort_column:
            rows = sorted(
                rows, key=lambda r: _sort_key(r[1][self._sort_column]), reverse=self._sort_reverse
            )
        elif self._sort_reverse:
            rows = rows[::-1]
        return rows

    def _redraw(self) -> None:
        table = self.query_one(".main", RowTable)
        keep = self._current_key()
        visible = self._visible()
        self._visible_keys = [key for key, _ in visible]
        at = self._visible_keys.index(keep) if keep in self._visible_keys else 0
        table.fill(
            self.columns,
            [cells for _, cells in visible],
            [c for _, c in self._rows],
            cursor=at,
            limits=self.column_limits,
        )
        self._show_detail()

    def _current_key(self) -> str | None:
        table = self.query_one(".main", RowTable)
        keys = self._visible_keys
        if not keys or table.cursor_row < 0 or table.cursor_row >= len(keys):
            return None
        return keys[table.cursor_row]

    def _show_detail(self) -> None:
        head = self.query_one(".detail-head", Static)
        pairs = self.query_one(".pairs", RowTable)
        key = self._current_key()
        facts = self.facts
        if key is None or facts is None:
            empty = self.empty_note(facts) if facts is not None else ""
            head.update(Text("Nothing matches the filter." if self._filter else empty, style="dim"))
            pairs.fill(self.pair_columns(), [])
            self._pairs = []
            self._show_pair_note()
            return
        heading, self._pairs = self.detail(facts, key)
        head.update(heading)
        row = pairs.cursor_row if key == self._shown_key else 0
        # Narrower than the main table: the note below the list has every standing in full.
        columns = list(self.pair_columns())
        cells = [self.pair_cells(facts, c) for c in self._pairs]
        if facts.randomised:
            # A drawn plan: each pair's probability beside its score.
            columns.insert(2, "Prob")
            for line, c in zip(cells, self._pairs, strict=True):
                line.insert(2, _probability(facts, c))
        pairs.fill(tuple(columns), cells, widest=32)
        if self._pairs:
            pairs.move_cursor(min(row, len(self._pairs) - 1))
        self._shown_key = key
        self._show_pair_note()

    def _show_pair_note(self) -> None:
        """The whole standing of the pair under the pair cursor, wrapped: a long reason (a
        conflict's institutions, a rule's numbers) is never cut off by the column."""
        note = self.query_one(".pair-note", Static)
        facts, c = self.facts, self.selected_pair()
        if facts is None or c is None:
            note.update("")
            return
        s = facts.session
        r, p = s.reviewers[c.reviewer], s.papers[c.paper]
        text = Text(f"{r.id} {r.name} × {p.id}: ", style="bold")
        text.append_text(_standing(c))
        if facts.randomised:
            text.append(f" · probability {_probability(facts, c)} in this draw")
        note.update(text)

    @on(RowTable.Highlighted, ".pairs")
    def _pair_moved(self) -> None:
        self._show_pair_note()

    # -- events ---------------------------------------------------------------------------

    @on(Input.Changed, ".filter")
    def _filter_changed(self, event: Input.Changed) -> None:
        self._filter = event.value
        if self._debounce is not None:
            self._debounce.stop()
        # Typing fast over 1,500 rows redraws once, after a short pause.
        self._debounce = self.set_timer(0.12, self._redraw)

    @on(Input.Submitted, ".filter")
    @on(FilterInput.Left, ".filter")
    def _filter_done(self) -> None:
        if self._debounce is not None:
            self._debounce.stop()
        self._redraw()
        self.query_one(".main", RowTable).focus()

    @on(RowTable.Highlighted, ".main")
    def _row_moved(self) -> None:
        self._show_detail()

    @on(RowTable.Chosen, ".main")
    def _row_chosen(self) -> None:
        self.query_one(".pairs", RowTable).focus()

    @on(RowTable.HeaderClicked, ".main")
    def _header_clicked(self, event: RowTable.HeaderClicked) -> None:
        self.sort_by(event.column)

    def sort_by(self, column: int) -> None:
        """Sort by a column; choosing the same column again reverses the order."""
        if column == self._sort_column:
            self._sort_reverse = not self._sort_reverse
        else:
            self._sort_column, self._sort_reverse = column, False
        self._redraw()
        name = self.columns[self._sort_column]
        self.notify(f"sorted by {name} {'descending' if self._sort_reverse else 'ascending'}")

    def set_filter(self, text: str) -> None:
        """Filter the table as if the text had been typed."""
        self.query_one(".filter", Input).value = text
        self._filter = text
        self._redraw()

    def visible_keys(self) -> list[str]:
        """Ids of the rows shown, in order (for the app and the tests)."""
        return list(self._visible_keys)

    def select(self, key: str) -> bool:
        """Put the cursor on the row of `key`, clearing the filter if it hides it."""
        if key not in self.visible_keys():
            self.set_filter("")
        if key not in self.visible_keys():
            return False
        self.query_one(".main", RowTable).move_cursor(self.visible_keys().index(key))
        self._show_detail()
        return True

    def selected_pair(self) -> Candidate | None:
        """The pair under the detail table's cursor."""
        pairs = self.query_one(".pairs", RowTable)
        if not self._pairs or not 0 <= pairs.cursor_row < len(self._pairs):
            return None
        return self._pairs[pairs.cursor_row]

    def action_focus_filter(self) -> None:
        """Move to the filter line."""
        self.query_one(".filter", Input).focus()

    def action_cycle_sort(self) -> None:
        """Sort by the next column (wrapping to the first)."""
        self.sort_by((self._sort_column + 1) % len(self.columns))

    def _pair_request(self, pinned_or_blocked: set, on: str, off: str) -> None:
        facts, c = self.facts, self.selected_pair()
        if facts is None or c is None:
            self.notify("choose a pair in the lower table first", severity="warning")
            return
        s = facts.session
        action = off if (c.reviewer, c.paper) in pinned_or_blocked else on
        self.post_message(
            self.PairRequest(action, s.reviewers[c.reviewer].id, s.papers[c.paper].id)
        )

    def action_pin(self) -> None:
        """Pin the chosen pair, or release its pin."""
        if self.facts is not None:
            self._pair_request(self.facts.pinned, "pin", "unpin")

    def action_block(self) -> None:
        """Block the chosen pair, or allow it again."""
        if self.facts is not None:
            self._pair_request(self.facts.blocked, "block", "unblock")

    def _withdrawn(self, facts: Facts, key: str) -> bool:
        s = facts.session
        if self.kind == "reviewer":
            return s.reviewers[s.reviewer_index()[key]].withdrawn
        return s.papers[s.paper_index()[key]].withdrawn

    def action_withdraw(self) -> None:
        """Withdraw the chosen row, or reinstate it."""
        key = self._current_key()
        if key is None or self.facts is None:
            return
        action = "reinstate" if self._withdrawn(self.facts, key) else "withdraw"
        self.post_message(self.EntityRequest(action, self.kind, key))

    def action_edit_pair_cap(self) -> None:
        """Change the cap of the reviewer in the pair under the detail's cursor."""
        facts, c = self.facts, self.selected_pair()
        if facts is None or c is None:
            self.notify("choose a pair in the lower table first", severity="warning")
            return
        reviewer = facts.session.reviewers[c.reviewer].id
        self.post_message(self.EntityRequest("edit", "reviewer", reviewer))

    def action_edit(self) -> None:
        """Change the chosen row's cap/floor or reviews/min reviews."""
        key = self._current_key()
        if key is not None:
            self.post_message(self.EntityRequest("edit", self.kind, key))


class PaperView(EntityView):
    """Every paper with its coverage; the detail lists its reviewers and the best unused ones."""

    kind = "paper"
    columns = ("Id", "Has", "Wants", "Min", "State", "Lead", "Mean", "Title", "Topics")

    def rows(self, facts: Facts) -> list[Row]:
        """One row per paper, in session order."""
        out: list[Row] = []
        for i, p in enumerate(facts.session.papers):
            got = facts.assigned_of_paper[i]
            mean = sum(s for _, s in got) / len(got) if got else 0.0
            out.append(
                (
                    p.id,
                    [
                        p.id,
                        len(got),
                        facts.session.paper_reviews(i),
                        facts.session.paper_min_reviews(i),
                        _state(facts.paper_status(i)),
                        _lead_cell(facts, i),
                        f"{mean:.2f}" if got else "",
                        p.title[:34],
                        ", ".join(p.topics)[:24],
                    ],
                )
            )
        return out

    def detail(self, facts: Facts, key: str) -> tuple[Text, list[Candidate]]:
        """The paper's heading, its reviewers and the best-scored people not used."""
        s = facts.session
        i = s.paper_index()[key]
        p = s.papers[i]
        head = Text()
        head.append(f"{p.id}  ", style="bold")
        head.append(p.title or "(no title)")
        head.append(f"\ntopics: {', '.join(p.topics) or '-'}   ")
        head.append(
            f"has {int(facts.counts[i])} of {s.paper_reviews(i)} reviews "
            f"(needs {s.paper_min_reviews(i)})   "
        )
        head.append_text(_state(facts.paper_status(i)))
        lead = facts.lead_of_paper[i]
        if lead is not None:
            r = s.reviewers[lead]
            head.append(f"\nlead: {r.id} {r.name}" + (" (senior)" if r.senior else ""))
        elif got_plan(facts) and not p.withdrawn:
            head.append("\nlead: none chosen", style="yellow")
        return head, facts.candidates_of_paper(i)

    def pair_cells(self, facts: Facts, c: Candidate) -> list[object]:
        """Reviewer id, name, score and standing."""
        r = facts.session.reviewers[c.reviewer]
        score = "-" if c.score is None else f"{c.score:.2f}"
        return [r.id, score, _standing(c), r.name[:20]]

    def filter_hint(self) -> str:
        """Placeholder of the filter line."""
        return "filter (/): id, title, topic or state, e.g. 'short' or 'below min'"


class ReviewerView(EntityView):
    """Every reviewer with their load; the detail lists their papers and the best unused ones."""

    kind = "reviewer"
    columns = ("Id", "Name", "Load", "Cap", "Floor", "State", "Leads", "Mean", "Institution")
    column_limits = {0: ID_WIDTH}
    BINDINGS = [
        Binding(
            "n",
            "name_recruit",
            "Name recruit",
            tooltip="Turn a recruit placeholder into the real person (name, id, e-mail)",
        ),
    ]

    def action_name_recruit(self) -> None:
        """Ask for the real person behind the recruit placeholder under the cursor."""
        key = self._current_key()
        if key is not None:
            self.post_message(self.EntityRequest("name", self.kind, key))

    def rows(self, facts: Facts) -> list[Row]:
        """One row per reviewer, in session order."""
        out: list[Row] = []
        for j, r in enumerate(facts.session.reviewers):
            got = facts.assigned_of_reviewer[j]
            mean = sum(s for _, s in got) / len(got) if got else 0.0
            out.append(
                (
                    r.id,
                    [
                        r.id,
                        r.name[:20] + (" *" if r.senior else ""),
                        len(got),
                        facts.session.reviewer_cap(j),
                        facts.session.reviewer_floor(j),
                        _state(facts.reviewer_status(j)),
                        len(facts.led_by_reviewer[j]) if got_plan(facts) else "",
                        f"{mean:.2f}" if got else "",
                        r.institution[:30],
                    ],
                )
            )
        return out

    def detail(self, facts: Facts, key: str) -> tuple[Text, list[Candidate]]:
        """The reviewer's heading, their papers and their best-scored unused papers."""
        s = facts.session
        j = s.reviewer_index()[key]
        r = s.reviewers[j]
        head = Text()
        head.append(f"{r.id}  ", style="bold")
        head.append(r.name + ("  (senior)" if r.senior else ""))
        head.append(f"\n{r.institution or '-'}   {r.email or ''}\n")
        head.append(
            f"load {int(facts.loads[j])}, cap {s.reviewer_cap(j)}, floor {s.reviewer_floor(j)}   "
        )
        head.append_text(_state(facts.reviewer_status(j)))
        if is_recruit_placeholder(r):
            head.append(
                "\nrecruit placeholder from an accepted fix: n names the real person",
                style="bold yellow",
            )
        led = [s.papers[i].id for i in facts.led_by_reviewer[j]]
        if led:
            shown = ", ".join(led[:12]) + (f", … {len(led) - 12} more" if len(led) > 12 else "")
            head.append(f"\nleads {len(led)}: {shown}")
        elif got_plan(facts):
            head.append("\nleads none")
        return head, facts.candidates_of_reviewer(j)

    def pair_columns(self) -> tuple[str, ...]:
        """Columns of the paper list in the detail."""
        return ("Id", "Score", "Standing", "Title")

    def pair_cells(self, facts: Facts, c: Candidate) -> list[object]:
        """Paper id, title, score and standing."""
        p = facts.session.papers[c.paper]
        score = "-" if c.score is None else f"{c.score:.2f}"
        return [p.id, score, _standing(c), p.title[:24]]

    def filter_hint(self) -> str:
        """Placeholder of the filter line."""
        return "filter (/): id, name, institution or state, e.g. 'at cap' or 'room'"


class GapView(PaperView):
    """Only the papers short of reviews, with who could close each gap and what blocks them."""

    BINDINGS = [
        Binding(
            "x",
            "app.gap_pane('explain')",
            "Why & fixes",
            tooltip="Shortfall groups, the least cap raise, recruits; preview and accept",
        ),
    ]

    columns = PaperView.columns

    def rows(self, facts: Facts) -> list[Row]:
        """Papers below their reviews, the ones below their minimum first."""
        if facts.session.plan is None:
            return []
        rows = [
            row
            for i, row in enumerate(super().rows(facts))
            if not facts.session.papers[i].withdrawn and facts.counts[i] < facts.reviews[i]
        ]
        rows.sort(key=lambda r: (not _cell_text(r[1][4]).startswith("BELOW"), r[0]))
        return rows

    def empty_note(self, facts: Facts) -> str:
        """No gaps: say why the table is empty, in words."""
        if facts.session.plan is None:
            return "No plan yet: press r to plan, then the short ones are listed here."
        return f"No {facts.noun}s are short of reviews in this plan."

    def detail(self, facts: Facts, key: str) -> tuple[Text, list[Candidate]]:
        """The paper's heading and a hint at the fixes the pair list suggests."""
        head, pairs = super().detail(facts, key)
        reasons = [c.status for c in pairs if c.status not in ("assigned", "pinned")]
        full = sum(r.startswith("cap full") for r in reasons)
        conflicted = sum(r.startswith("conflict") for r in reasons)
        free = sum(r.startswith(("eligible", "unscored (counts")) for r in reasons)
        head.append(
            f"\nof the best {len(reasons)} others: {full} at cap, {conflicted} in conflict, "
            f"{free} free. To close it: raise a full cap (c on that pair), pin a free one (p), "
            "or lower this one's reviews (e); then plan (r).",
            style="italic",
        )
        return head, pairs
