"""The pair view: one pair's rules, standing and score parts, as `review-alloc pair` prints them.

Opened from a pair list (the detail table of Papers, Reviewers or Gaps) on the pair under its
cursor; the report comes from the Workspace, this module only shows it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static, TabbedContent

from review_alloc.plan.score_parts import PairReport
from review_alloc.tui.entity_views import EntityView

if TYPE_CHECKING:
    from review_alloc.tui.app import ReviewAllocApp


class PairView(ModalScreen[None]):
    """One pair explained; escape or enter closes it."""

    BINDINGS = [Binding("escape,enter", "app.pop_screen", "Close")]

    def __init__(self, report: PairReport) -> None:
        super().__init__()
        self.report = report

    def compose(self) -> ComposeResult:
        """The report's lines and the key that closes it."""
        with Vertical(classes="dialog"):
            lines = "\n".join(self.report.lines())
            yield Static(Text(lines), classes="question", id="pair-report")
            yield Static(Text("escape: close", style="dim"), classes="keys")


def show_pair(app: ReviewAllocApp) -> None:
    """Open the pair view on the pair under the cursor of the active tab's pair list."""
    pane = app.query_one(TabbedContent).active_pane
    views = list(pane.query(EntityView)) if pane is not None else []
    chosen = views[0].selected_pair() if views else None
    if chosen is None:
        app.notify(
            "choose a pair in a pair list first (Papers, Reviewers, Gaps)", severity="warning"
        )
        return
    s = app.workspace.session
    report = app.workspace.pair_report(s.reviewers[chosen.reviewer].id, s.papers[chosen.paper].id)
    app.push_screen(PairView(report))
