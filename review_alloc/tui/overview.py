"""The Overview: headline figures of the plan and three text charts a chair reads at a glance."""

from __future__ import annotations

from datetime import datetime

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Grid, VerticalScroll
from textual.reactive import reactive
from textual.widgets import Static

from review_alloc.plan.cautions import PLAN_CAUTION
from review_alloc.workspace.facts import Facts

BAR_WIDTH = 8


def bar(value: int, most: int, width: int = BAR_WIDTH, style: str = "") -> Text:
    """A horizontal bar of `value` out of `most`, drawn with block characters."""
    filled = 0 if most <= 0 else round(width * value / most)
    out = Text("█" * filled, style=style or "")
    out.append("·" * (width - filled), style="dim")
    return out


def _chart(title: str, rows: list[tuple[str, int, int, str, str]]) -> Text:
    """Rows of (label, value, scale, note, style) as labelled bars."""
    text = Text(title + "\n", style="bold")
    if not rows:
        text.append("(no plan yet: press r to plan)", style="dim")
        return text
    width = max(len(label) for label, *_ in rows)
    for label, value, most, note, style in rows:
        text.append(f"{label:<{width}} ")
        text.append_text(bar(value, most, style=style))
        text.append(f" {note}\n")
    return text


class Overview(VerticalScroll):
    """Headline figures, then load bands, score distribution and coverage per topic."""

    facts: reactive[Facts | None] = reactive(None, always_update=True)
    changed_since: reactive[bool] = reactive(False)

    def compose(self) -> ComposeResult:
        """The figures block, the caution and a grid of three charts."""
        yield Static("", id="figures")
        yield Static(Text(PLAN_CAUTION, style="italic"), id="caution")
        with Grid(id="charts"):
            yield Static("", id="chart-load", classes="chart")
            yield Static("", id="chart-score", classes="chart")
            yield Static("", id="chart-topic", classes="chart")

    def watch_facts(self, facts: Facts | None) -> None:
        """Redraw everything from new facts."""
        if facts is None:
            return
        self.query_one("#figures", Static).update(self._figures(facts))
        self.query_one("#chart-load", Static).update(self._load_chart(facts))
        self.query_one("#chart-score", Static).update(self._score_chart(facts))
        self.query_one("#chart-topic", Static).update(self._topic_chart(facts))

    def _figures(self, facts: Facts) -> Text:
        s = facts.session
        noun = facts.noun
        papers = sum(not p.withdrawn for p in s.papers)
        reviewers = sum(not r.withdrawn for r in s.reviewers)
        out = Text()
        out.append(f"{s.name}", style="bold")
        out.append(f"   {papers} {noun}s · {reviewers} reviewers · {len(s.scores)} scores\n")
        plan = s.plan
        if plan is None:
            out.append("No plan yet. ", style="bold yellow")
            out.append("Press r to make one (it takes a moment on large sessions).")
            return out
        f = plan.figures
        gaps = facts.gaps()
        over, under = facts.load_issues()
        below_min = sum(g.missing_required > 0 for g in gaps)
        rows = [
            (
                "required reviews",
                f"{f.required_coverage} of {f.required_demand}",
                "OK" if f.required_coverage == f.required_demand else "SHORT",
            ),
            (
                "all reviews",
                f"{f.coverage} of {f.demand}",
                "OK" if f.coverage == f.demand else "SHORT",
            ),
            (
                f"{noun}s short",
                f"{len(gaps)} ({below_min} below minimum)",
                "OK" if not gaps else "SEE GAPS (5)",
            ),
            ("overloads", str(len(over)), "OK" if not over else "CHECK"),
            ("below floor", str(len(under)), "OK" if not under else "CHECK"),
            ("total score", f"{f.total_score:.2f}", ""),
            ("mean score", f"{f.total_score / f.assigned:.3f}" if f.assigned else "-", ""),
            ("plan made", _when(plan.created_at), "checked" if plan.checked else "NOT CHECKED"),
            (
                "data since",
                "changed: plan again (r)" if self.changed_since else "unchanged",
                "STALE" if self.changed_since else "OK",
            ),
        ]
        for label, value, state in rows:
            out.append(f"{label:>17}  ", style="dim")
            out.append(f"{value:<34}")
            style = "green" if state in ("OK", "checked") else "bold yellow"
            out.append(f"{state}\n", style=style if state else "")
        return out

    def _load_chart(self, facts: Facts) -> Text:
        bands = facts.load_bands() if facts.session.plan else []
        most = max((n for _, n in bands), default=0)
        styles = {"over cap": "red", "at cap": "green", "idle": "yellow"}
        return _chart(
            "Reviewers by load against cap",
            [(label, n, most, str(n), styles.get(label, "cyan")) for label, n in bands],
        )

    def _score_chart(self, facts: Facts) -> Text:
        bins = facts.score_histogram()
        most = max((n for _, n in bins), default=0)
        return _chart(
            "Scores of assigned pairs", [(label, n, most, str(n), "magenta") for label, n in bins]
        )

    def _topic_chart(self, facts: Facts) -> Text:
        rows = []
        if facts.session.plan is not None:
            for topic, placed, wanted in facts.topic_coverage():
                short = "" if placed == wanted else f" -{wanted - placed}"
                note = f"{placed}/{wanted}{short}"
                style = "green" if placed == wanted else "yellow"
                rows.append((topic[:13], placed, wanted, note, style))
        return _chart("Coverage per topic", rows)


def _when(moment: datetime) -> str:
    """A plan's time in UTC, to the minute."""
    return moment.strftime("%Y-%m-%d %H:%M UTC")
