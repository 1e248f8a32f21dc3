"""The Gaps tab's second pane: why papers are short (shortfall groups) and the computed fixes.

The app asks the Workspace for an `Explanation` in a worker thread and hands it down; the view
shows it and asks for a what-if preview or for accepting a fix by posting `FixRequest`
(messages up). Only
cap raises and recruits are fixes; conflicts and blocks are listed as information and can be
neither previewed nor accepted.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Static

from review_alloc.plan.cautions import FIX_CAUTIONS
from review_alloc.plan.explain import ShortfallGroup
from review_alloc.plan.explanation import Explanation
from review_alloc.plan.whatif import WhatIf
from review_alloc.tui.grid import RowTable
from review_alloc.workspace import FixMenu, TargetFix

_TIER_WORDS = {"min_reviews": "required", "reviews": "all"}
_TARGET_WORDS = {"minimum": "minimum", "full": "full"}
"""Fix labels by target: 'minimum' reaches every paper's required reviews, 'full' all."""
_KIND_WORDS = {"raise-caps": "raise caps", "recruit": "recruit"}
"""Group labels by tier: 'required 1' is the CLI's min_reviews-1, 'all 1' its reviews-1."""


class PaneHint(Static):
    """The Gaps tab's hint line; a click on it switches the tab's pane."""

    async def on_click(self) -> None:
        """Switch between the short papers and the groups and fixes."""
        await self.app.run_action("gap_pane_toggle")


def _short(ids: tuple[str, ...], most: int = 8) -> str:
    shown = ", ".join(ids[:most])
    return shown + (f" … ({len(ids)} in all)" if len(ids) > most else "")


def _cost(fix: TargetFix) -> str:
    """What a fix costs in people and caps, in a few words."""
    if fix.kind == "raise-caps":
        who = "reviewer" if fix.people == 1 else "reviewers"
        return f"{fix.people} {who} asked, caps +{fix.caps}"
    return f"{fix.people} new {'reviewer' if fix.people == 1 else 'reviewers'}, no cap raised"


def moves_lines(w: WhatIf, most: int = 6) -> list[str]:
    """How many pairs a preview moves and whom to tell, a few lines (shared by the views)."""
    recruits = w.recruits()
    found = f"; {len(recruits)} new reviewers to find" if recruits else ""
    if w.moves is None:
        return [f"pairs moved: none (no plan yet, so nobody has been told){found}"]
    moves, tell = w.moves, w.to_tell()
    lines = [
        f"pairs moved: {len(moves.added) + len(moves.removed)} "
        f"(+{len(moves.added)} / -{len(moves.removed)} against the current plan)",
        f"reviewers to tell: {len(tell)}{found}",
    ]
    names = {r.id: r.name for r in w.session.reviewers}
    for rid in tell[:most]:
        change = moves.by_reviewer[rid]
        papers = ", ".join([f"+{p}" for p in change.added] + [f"-{p}" for p in change.removed])
        lines.append(f"  {rid} {names.get(rid, '')}: {papers}")
    if len(tell) > most:
        lines.append(f"  … and {len(tell) - most} more")
    return lines


class ExplainView(Widget):
    """Shortfall groups over the fixes; the detail shows the chosen row, a preview, cautions."""

    BINDINGS = [
        Binding("v", "preview", "Preview fix", tooltip="Plan a copy with the fix: before/after"),
        Binding("a", "accept", "Accept fix", tooltip="Apply the fix to the session, then plan"),
        Binding("x", "app.gap_pane('papers')", "Short papers", tooltip="Back to the paper list"),
        Binding(
            "k",
            "app.keep_scenario",
            "Keep the preview as a scenario",
            show=False,
            tooltip="Keep the preview to compare it with others (c)",
        ),
        Binding("c", "app.compare_scenarios", "Compare", tooltip="The kept scenarios side by side"),
        Binding(
            "n",
            "app.new_whatif",
            "Try a what-if (cap raises, recruits, overload)",
            show=False,
            tooltip="Try cap raises, recruits or overload on a copy",
        ),
    ]

    explanation: reactive[Explanation | None] = reactive(None, always_update=True)
    menu: FixMenu | None = None
    """The fixes for both targets, of the same session as `explanation` (set before it)."""
    state: reactive[str] = reactive("", always_update=True)
    preview: reactive[WhatIf | None] = reactive(None, always_update=True)

    @dataclass
    class FixRequest(Message):
        """Preview or accept one fix (`kind` is one of `FIX_KEYS`)."""

        action: str
        kind: str

    GROUP_COLUMNS = ("Group", "Topic", "Papers", "Eligible", "Needed", "Avail", "Short")

    def group_columns(self) -> tuple[str, ...]:
        """The group table's headings, in the session's own noun."""
        noun = f"{self._noun().capitalize()}s"
        return tuple(noun if c == "Papers" else c for c in self.GROUP_COLUMNS)
    FIX_COLUMNS = ("Fix", "Cost", "Coverage")

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._fix_kinds: list[str | None] = []

    def compose(self) -> ComposeResult:
        """A state line, the groups, the fixes and a scrolling detail."""
        yield Static("", classes="explain-state")
        with Vertical(classes="explain-tables"):
            yield RowTable(classes="groups")
            yield RowTable(classes="fixes")
        with VerticalScroll(classes="explain-detail"):
            yield Static("", classes="explain-text")

    # -- drawing --------------------------------------------------------------------------

    def watch_state(self, state: str) -> None:
        """The line that says whether an explanation is being computed."""
        self.query_one(".explain-state", Static).update(Text(state, style="bold"))

    def watch_explanation(self, explanation: Explanation | None) -> None:
        """Fill both tables from a new explanation."""
        groups = self.query_one(".groups", RowTable)
        fixes = self.query_one(".fixes", RowTable)
        if explanation is None:
            groups.fill(self.group_columns(), [])
            fixes.fill(self.FIX_COLUMNS, [])
            self._fix_kinds = []
            self._show_detail()
            return
        groups.fill(
            self.group_columns(),
            [
                [
                    f"{_TIER_WORDS[g.tier]} {k}",
                    g.topics[0] if g.topics else "-",
                    len(g.papers),
                    len(g.reviewers),
                    g.needed,
                    g.available,
                    g.shortfall,
                ]
                for k, g in self._numbered(explanation)
            ],
            widest=24,
        )
        rows: list[list[object]] = []
        self._fix_kinds = []
        for fix in self._offered(explanation):
            rows.append(
                [
                    f"{_TARGET_WORDS[fix.target]}: {_KIND_WORDS[fix.kind]}",
                    _cost(fix),
                    f"{fix.coverage_before} -> {fix.coverage_after}/{fix.demand}"
                    + (" required" if fix.target == "minimum" else ""),
                ]
            )
            self._fix_kinds.append(fix.key)
        for loss in explanation.losses:
            gain = f"+{loss.gain}" if loss.exact else f"at least +{loss.gain}"
            rows.append([f"info: {loss.kind}", f"{loss.reviewer}, {len(loss.papers)} pairs", gain])
            self._fix_kinds.append(None)
        fixes.fill(self.FIX_COLUMNS, rows)
        self._show_detail()

    def watch_preview(self) -> None:
        """Show a finished what-if preview."""
        self._show_detail()

    def _offered(self, explanation: Explanation) -> tuple[TargetFix, ...]:
        """The fixes to list: both targets' when the menu is of this session, else none."""
        menu = self.menu
        if menu is None or menu.session is not explanation.session:
            return ()
        return menu.offered()

    def chosen_target_fix(self) -> TargetFix | None:
        """The fix under the fix table's cursor, None on an information row."""
        key = self.chosen_fix()
        if key is None or self.menu is None:
            return None
        return self.menu.get(key)

    @staticmethod
    def _numbered(explanation: Explanation) -> list[tuple[int, ShortfallGroup]]:
        """Groups with their number inside their tier (as `explain` names them)."""
        out: list[tuple[int, ShortfallGroup]] = []
        seen: dict[str, int] = {}
        for g in explanation.groups:
            seen[g.tier] = seen.get(g.tier, 0) + 1
            out.append((seen[g.tier], g))
        return out

    def group_rows(self) -> list[list[str]]:
        """The group table's rows as text (for the app and the tests)."""
        table = self.query_one(".groups", RowTable)
        return [table.row_at(k) for k in range(table.row_count)]

    def chosen_fix(self) -> str | None:
        """The fix kind under the fix table's cursor, None on an information row."""
        table = self.query_one(".fixes", RowTable)
        if not self._fix_kinds or not 0 <= table.cursor_row < len(self._fix_kinds):
            return None
        return self._fix_kinds[table.cursor_row]

    def choose_fix(self, kind: str) -> bool:
        """Put the fix table's cursor on a fix kind."""
        if kind not in self._fix_kinds:
            return False
        self.query_one(".fixes", RowTable).move_cursor(self._fix_kinds.index(kind))
        return True

    def detail_text(self) -> str:
        """The detail pane as plain text."""
        return str(self.query_one(".explain-text", Static).render())

    def _show_detail(self) -> None:
        out = Text()
        explanation = self.explanation
        if explanation is None:
            self.query_one(".explain-text", Static).update(out)
            return
        if not explanation.groups:
            out.append(
                f"No shortfall: every {self._noun()} can get all its reviews.\n", style="green"
            )
        focused = self.app.focused if self.is_mounted else None
        groups = self.query_one(".groups", RowTable)
        fixes = self.query_one(".fixes", RowTable)
        if focused is fixes and self._fix_kinds:
            self._fix_detail(out, explanation)
        elif explanation.groups and 0 <= groups.cursor_row < len(explanation.groups):
            self._group_detail(out, explanation.groups[groups.cursor_row])
        if self.preview is not None:
            self._preview_detail(out, self.preview)
        out.append("\nCautions\n", style="bold")
        for line in FIX_CAUTIONS:
            out.append(f"• {line}\n", style="yellow")
        self.query_one(".explain-text", Static).update(out)

    def _noun(self) -> str:
        """'proposal' for a grant panel, 'paper' otherwise."""
        e = self.explanation
        return e.session.noun if e is not None else "paper"

    def _group_detail(self, out: Text, g: ShortfallGroup) -> None:
        noun = self._noun()
        out.append(f"{len(g.papers)} {noun}s short of {_TIER_WORDS[g.tier]} reviews", style="bold")
        out.append(
            f": needed {g.needed}, available {g.available}, shortfall {g.shortfall}\n"
            f"{noun}s: {_short(g.papers)}\n"
            f"eligible reviewers: {_short(g.reviewers)}\n"
        )
        out.append(f"cause: {g.cause}\n", style="italic")
        out.append(
            "tab to the fixes below; v previews one, a accepts it; n tries a what-if of your "
            "own (cap raises, recruits, overload)\n",
            style="dim",
        )

    def _fix_detail(self, out: Text, explanation: Explanation) -> None:
        fix = self.chosen_target_fix()
        table = self.query_one(".fixes", RowTable)
        noun = self._noun()
        if fix is not None:
            aim = (
                f"every {noun} at its minimum (required reviews)"
                if fix.target == "minimum"
                else f"every {noun} fully reviewed"
            )
            reach = "reaches" if fix.reaches else "comes as close as it can to"
            out.append(f"{_KIND_WORDS[fix.kind].capitalize()}: {reach} {aim}\n", style="bold")
            out.append(f"  cost: {_cost(fix)}\n")
        if fix is not None and fix.caps_fix is not None:
            caps = fix.caps_fix
            for r in caps.raises:
                out.append(f"  {r.reviewer} {r.name}: cap {r.cap} -> {r.new_cap} (+{r.raise_by})\n")
            for u in caps.unclosable:
                out.append(f"  cannot close {u.paper} this way: {u.reason}\n")
        elif fix is not None and fix.recruit_fix is not None:
            rec = fix.recruit_fix
            out.append(f"  each recruit takes up to {rec.recruit_cap} {noun}s\n")
            for need in rec.needs:
                out.append(f"  {need.profile}\n")
            if rec.note:
                out.append(f"  note: {rec.note}\n")
            out.append(
                "  accepting adds placeholder reviewers named 'recruit k for TOPIC'; in the "
                "Reviewers tab, n names the real person\n"
            )
        else:
            k = table.cursor_row - sum(x is not None for x in self._fix_kinds)
            loss = explanation.losses[k]
            out.append(
                f"Information only, not a fix: {loss.reviewer} ({loss.kind})\n", style="bold"
            )
            for pid, why in zip(loss.papers, loss.reasons, strict=True):
                out.append(f"  {pid}: {why}\n")
            out.append("  No fix lifts a conflict of interest or a block.\n")
        if fix is not None:
            out.append(
                "v previews this fix on a copy; a accepts it (its plan becomes the next "
                "revision)\n",
                style="dim",
            )

    def _preview_detail(self, out: Text, w: WhatIf) -> None:
        b, a = w.before.figures, w.after.figures
        out.append("\nWhat if (a copy; the session is unchanged)\n", style="bold")
        for change in w.changes[:8]:
            out.append(f"  - {change}\n")
        if len(w.changes) > 8:
            out.append(f"  … and {len(w.changes) - 8} more\n")
        out.append(
            f"  required reviews {b.required_coverage} -> {a.required_coverage} of "
            f"{a.required_demand}\n"
            f"  all reviews      {b.coverage} -> {a.coverage} of {a.demand}\n"
            f"  total score      {b.total_score:.2f} -> {a.total_score:.2f}\n"
            f"  {self._noun()}s short: {len(w.gaps_before)} -> {len(w.gaps_after)}\n"
        )
        for line in moves_lines(w):
            out.append(f"  {line}\n")
        out.append(
            "  a accepts it: this plan becomes the next revision; ctrl+z takes it back. "
            "k keeps it as a scenario, c compares the kept ones side by side\n",
            style="dim",
        )

    # -- events ---------------------------------------------------------------------------

    @on(RowTable.Highlighted)
    def _moved(self) -> None:
        self._show_detail()

    @on(RowTable.Chosen, ".groups")
    def _group_chosen(self) -> None:
        self.query_one(".fixes", RowTable).focus()
        self._show_detail()

    @on(RowTable.Chosen, ".fixes")
    def _fix_chosen(self) -> None:
        self.action_preview()

    def on_descendant_focus(self) -> None:
        """The detail follows the table that has focus."""
        self._show_detail()

    def _request(self, action: str) -> None:
        kind = self.chosen_fix()
        if kind is None:
            self.notify(
                "choose a fix in the lower table (conflicts and blocks are never a fix)",
                severity="warning",
            )
            return
        self.post_message(self.FixRequest(action, kind))

    def action_preview(self) -> None:
        """Ask for a what-if preview of the fix under the cursor."""
        self._request("preview")

    def action_accept(self) -> None:
        """Ask to apply the fix under the cursor."""
        self._request("accept")
