"""The Overview: headline figures of the plan and three text charts a chair reads at a glance."""

from __future__ import annotations

from datetime import datetime

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical, VerticalScroll
from textual.geometry import Size
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Static

from review_alloc.plan.cautions import FAIR_CAUTION, PLAN_CAUTION, RANDOM_CAUTION
from review_alloc.workspace.facts import Facts

BAR_WIDTH = 8
"""The narrowest bar drawn; charts widen their bars to the width they are given."""
LABEL_WIDEST = 40
"""Labels longer than this are cut (with an ellipsis); topic names rarely come close."""

ChartRow = tuple[str, int, int, str, str]
"""(label, value, scale, note, style) of one bar."""


def bar(value: int, most: int, width: int = BAR_WIDTH, style: str = "") -> Text:
    """A horizontal bar of `value` out of `most`, drawn with block characters."""
    filled = 0 if most <= 0 else round(width * value / most)
    out = Text("█" * filled, style=style or "")
    out.append("·" * (width - filled), style="dim")
    return out


def _chart(title: str, rows: list[ChartRow], width: int = 0) -> Text:
    """Rows of (label, value, scale, note, style) as labelled bars filling `width` cells."""
    text = Text(title + "\n", style="bold")
    if not rows:
        text.append("(no plan yet: press r to plan)", style="dim")
        return text
    label_width = min(max(len(label) for label, *_ in rows), LABEL_WIDEST)
    note_width = max(len(note) for *_, note, _ in rows)
    bar_width = max(BAR_WIDTH, width - label_width - note_width - 2)
    for label, value, most, note, style in rows:
        if len(label) > label_width:
            label = label[: label_width - 1] + "…"
        text.append(f"{label:<{label_width}} ")
        text.append_text(bar(value, most, width=bar_width, style=style))
        text.append(f" {note}\n")
    text.rstrip()
    return text


class Chart(Widget):
    """One bar chart, as wide as its place on screen: labels whole, bars fill the rest."""

    DEFAULT_CSS = """
    Chart {
        height: auto;
    }
    """

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.title = ""
        self.rows: list[ChartRow] = []

    def show(self, title: str, rows: list[ChartRow]) -> None:
        """Draw `rows` under `title`."""
        self.title, self.rows = title, rows
        self.refresh(layout=True)

    def render(self) -> Text:
        """The chart at the current width."""
        return _chart(self.title, self.rows, self.content_size.width)

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        """A line for the title and one per bar (or one for the empty note)."""
        return 1 + max(len(self.rows), 1)


def topic_rows(coverage: list[tuple[str, int, int]]) -> list[ChartRow]:
    """Topics worst first (largest shortfall, then the larger share missing), then by name."""
    ordered = sorted(
        coverage,
        key=lambda t: (-(t[2] - t[1]), -((t[2] - t[1]) / t[2]) if t[2] else 0.0, t[0]),
    )
    rows = []
    for topic, placed, wanted in ordered:
        short = "" if placed == wanted else f"  SHORT {wanted - placed}"
        rows.append(
            (topic, placed, wanted, f"{placed}/{wanted}{short}", "green" if not short else "yellow")
        )
    return rows


class Overview(VerticalScroll, can_focus=True):
    """Headline figures, then coverage per topic (worst first), load bands and scores.

    It takes the focus when its tab is shown, so arrows and page keys scroll it at once."""

    facts: reactive[Facts | None] = reactive(None, always_update=True)
    changed_since: reactive[bool] = reactive(False)

    def compose(self) -> ComposeResult:
        """The figures block, the caution and three full-width charts, topics first."""
        yield Static("", id="figures")
        yield Static(Text(PLAN_CAUTION, style="italic"), id="caution")
        with Vertical(id="charts"):
            yield Chart(id="chart-topic", classes="chart")
            yield Chart(id="chart-load", classes="chart")
            yield Chart(id="chart-score", classes="chart")

    def watch_facts(self, facts: Facts | None) -> None:
        """Redraw everything from new facts."""
        if facts is None:
            return
        self.query_one("#figures", Static).update(self._figures(facts))
        self.query_one("#caution", Static).update(Text(_cautions(facts), style="italic"))
        self.query_one("#chart-topic", Chart).show(*self._topic_chart(facts))
        self.query_one("#chart-load", Chart).show(*self._load_chart(facts))
        self.query_one("#chart-score", Chart).show(*self._score_chart(facts))

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
            *_kind_rows(facts),
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

    def _load_chart(self, facts: Facts) -> tuple[str, list[ChartRow]]:
        bands = facts.load_bands() if facts.session.plan else []
        most = max((n for _, n in bands), default=0)
        styles = {"over cap": "red", "at cap": "green", "idle": "yellow"}
        return (
            "Reviewers by load against cap",
            [(label, n, most, str(n), styles.get(label, "cyan")) for label, n in bands],
        )

    def _score_chart(self, facts: Facts) -> tuple[str, list[ChartRow]]:
        bins = facts.score_histogram()
        most = max((n for _, n in bins), default=0)
        return (
            "Scores of assigned pairs",
            [(label, n, most, str(n), "magenta") for label, n in bins],
        )

    def _topic_chart(self, facts: Facts) -> tuple[str, list[ChartRow]]:
        rows = topic_rows(facts.topic_coverage()) if facts.session.plan is not None else []
        short = sum(r[1] < r[2] for r in rows)
        title = "Reviews placed per topic, worst first" + (
            f" ({short} topic(s) short)" if short else ""
        )
        return title, rows


def _cautions(facts: Facts) -> str:
    """The plan's caution, and the randomised or fairest plan's beside it."""
    plan = facts.session.plan
    lines = [PLAN_CAUTION]
    if plan is not None and plan.draw is not None:
        lines.append(RANDOM_CAUTION)
    elif plan is not None and plan.fairness is not None:
        lines.append(FAIR_CAUTION)
    return "\n".join(lines)


def _kind_rows(facts: Facts) -> list[tuple[str, str, str]]:
    """For a randomised or fairest plan: what kind it is, and its figures beside the optimal
    plan's (what the randomness or the fairness costs)."""
    plan = facts.session.plan
    if plan is None:
        return []
    if plan.draw is not None:
        d = plan.draw
        rows = [("plan kind", f"randomised: each pair at most {d.max_probability:g}", "")]
        rows.append(("seed", f"{d.seed} (o: plan options; r draws again with it)", ""))
        expected = d.expected.get("total_score")
        if expected is not None and d.plain is not None:
            plain = d.plain["total_score"]
            given = f"-{plain - expected:.2f}"
            rows.append(("expected score", f"{expected:.2f} vs {plain:.2f} optimal", given))
        return rows
    if plan.fairness is not None:
        f = plan.fairness
        rows = [("plan kind", "fairest" + ("" if f.exact else " found (not proven)"), "")]
        low = f"{f.lowest_paper_score:.2f}"
        if f.plain_lowest_paper_score is not None:
            low += f" vs {f.plain_lowest_paper_score:.2f} optimal"
        rows.append((f"lowest {facts.noun} total", low, f"bound {f.bound:.2f}"))
        if f.plain is not None:
            plain = f.plain["total_score"]
            total = plan.figures.total_score
            given = f"-{plain - total:.2f}"
            rows.append(("score vs optimal", f"{total:.2f} vs {plain:.2f}", given))
        return rows
    return []


def _when(moment: datetime) -> str:
    """A plan's time in UTC, to the minute."""
    return moment.strftime("%Y-%m-%d %H:%M UTC")
