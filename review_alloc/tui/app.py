"""The terminal app: one screen of tabs over an open Workspace.

The app owns a `Workspace` and nothing else of the domain: every change, plan, explanation,
preview and acceptance goes through it (slow ones run its request objects in worker threads
and hand the result back to it on the main thread), and the views only get `Facts`
(attributes down) and post requests (messages up).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from time import monotonic

from rich.text import Text
from textual import on, work
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.command import DiscoveryHit, Hit, Hits, Provider
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.widgets import (
    Label,
    ProgressBar,
    Static,
    TabbedContent,
    TabPane,
    Tabs,
)

from review_alloc.model import InputError, Session
from review_alloc.plan import PlanCheckError, PlanOutcome
from review_alloc.plan.explanation import Explanation
from review_alloc.plan.whatif import WhatIf
from review_alloc.tui import heap
from review_alloc.tui.dialogs import (
    Confirm,
    Field,
    Form,
    HelpScreen,
    ImportFiles,
    ImportForm,
    whole_or_default,
)
from review_alloc.tui.entity_views import EntityView, GapView, PaperView, ReviewerView
from review_alloc.tui.footer import KeysFooter
from review_alloc.tui.gapfix import ExplainView, PaneHint
from review_alloc.tui.grid import RowTable
from review_alloc.tui.overview import Overview
from review_alloc.tui.pairview import show_pair
from review_alloc.tui.planopts import PlanChoice, PlanOptions
from review_alloc.tui.records import ConflictView, HistoryView
from review_alloc.tui.scenarios import ScenarioScreen, parse_pairs
from review_alloc.workspace import (
    ChangeSet,
    FileChanged,
    FixMenu,
    PlanRequest,
    Workspace,
    prepare_solver,
    ready_for_replan,
)
from review_alloc.workspace.facts import Facts
from review_alloc.workspace.offsite import OffsiteClosed, OffsiteExplainer

TABS = ("overview", "papers", "reviewers", "conflicts", "gaps", "history")


def _utc_now() -> datetime:
    return datetime.now(UTC)


class ChairCommands(Provider):
    """The app's own commands in the command palette (ctrl+p)."""

    async def discover(self) -> Hits:
        """Every command, for an empty palette."""
        app = self.app
        assert isinstance(app, ReviewAllocApp)
        for name, help_text, run in app.palette_commands():
            yield DiscoveryHit(name, run, help=help_text)

    async def search(self, query: str) -> Hits:
        """Commands whose name matches what was typed."""
        app = self.app
        assert isinstance(app, ReviewAllocApp)
        matcher = self.matcher(query)
        for name, help_text, run in app.palette_commands():
            score = matcher.match(name)
            if score > 0:
                yield Hit(score, matcher.highlight(name), run, help=help_text)


class ReviewAllocApp(App[None]):
    """Plan reviewer assignments for one session, keyboard first."""

    CSS_PATH = "app.tcss"
    TITLE = "review-alloc"
    COMMANDS = App.COMMANDS | {ChairCommands}
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (110, "-wide")]
    BINDINGS = [
        Binding("ctrl+q", "quit", "Quit", priority=True),
        Binding("r", "plan", "Plan", tooltip="Make the optimal plan in the background"),
        Binding("escape", "cancel_plan", "Cancel plan", show=False),
        Binding("ctrl+s", "save", "Save"),
        Binding("R", "plan(True)", "Plan fresh", show=False),
        Binding(
            "o",
            "plan_options",
            "Plan options",
            show=False,
            tooltip="Plan randomised (probability cap, seed) or fairest, or optimal again",
        ),
        Binding("ctrl+z", "undo", "Undo"),
        Binding("ctrl+y", "redo", "Redo", show=False),
        Binding("i", "import", "Import CSV", show=False),
        Binding("l", "pair_view", "Look at the pair: its rules, score parts", show=False),
        Binding("question_mark,f1", "help", "Keys"),
        Binding("1", "tab('overview')", "Overview", show=False),
        Binding("2", "tab('papers')", "Papers", show=False),
        Binding("3", "tab('reviewers')", "Reviewers", show=False),
        Binding("4", "tab('conflicts')", "Conflicts", show=False),
        Binding("5", "tab('gaps')", "Gaps", show=False),
        Binding("6", "tab('history')", "History", show=False),
    ]

    @dataclass
    class PlanReady(Message):
        """A plan finished in the worker (`generation` tells stale results apart)."""

        generation: int
        request: PlanRequest
        outcome: PlanOutcome

    @dataclass
    class PlanFailed(Message):
        """The planner refused the session or its checker withheld the plan."""

        generation: int
        lines: list[str]

    @dataclass
    class ExplainReady(Message):
        """The explanation of `session` finished in its worker."""

        session: Session
        explanation: Explanation | None
        lines: list[str]
        menu: FixMenu | None = None

    @dataclass
    class PreviewReady(Message):
        """A what-if preview of one fix finished in its worker."""

        explanation: Explanation | None
        preview: WhatIf | None
        lines: list[str]
        kind: str = ""
        accept: bool = False
        """Accept the fix as soon as its preview is ready (the chair pressed `a`)."""
        keep: bool = False
        """Keep the preview as a scenario (a what-if the chair typed in)."""

    def __init__(
        self,
        workspace: Workspace,
        *,
        clock: Callable[[], datetime] = _utc_now,
        notice: str | None = None,
    ) -> None:
        super().__init__()
        self.workspace = workspace
        self._notice = notice
        self.clock = clock
        self.facts = Facts.of(workspace.session, rules=workspace.rules())
        self._generation = 0
        self._planning_since: float | None = None
        self._shown_version: dict[str, int] = {}
        self._version = 0
        self._history_mark: tuple[int, int | None] | None = None
        self._explaining: Session | None = None
        self._offsite = OffsiteExplainer()
        self._offsite.prepare()
        self.scenarios: list[WhatIf] = []
        """Previews the chair kept to compare side by side (`c`) before accepting one."""

    # -- layout ---------------------------------------------------------------------------

    @property
    def noun(self) -> str:
        """'proposal' for a panel session, 'paper' otherwise."""
        return self.workspace.noun

    def compose(self) -> ComposeResult:
        """The session bar, the planning strip, the tabs and the footer."""
        noun = self.noun.capitalize()
        yield Static("", id="bar")
        with Horizontal(id="planning"):
            yield Label("", id="planning-label")
            yield ProgressBar(total=None, show_eta=False, id="planning-progress")
        with TabbedContent(id="tabs"):
            with TabPane("1 Overview", id="overview"):
                yield Overview(id="overview-view")
            with TabPane(f"2 {noun}s", id="papers"):
                yield PaperView(id="papers-view")
            with TabPane("3 Reviewers", id="reviewers"):
                yield ReviewerView(id="reviewers-view")
            with TabPane("4 Conflicts", id="conflicts"):
                yield ConflictView(id="conflicts-view")
            with TabPane("5 Gaps", id="gaps"), Vertical(id="gaps-box"):
                yield PaneHint(
                    "x: why short and the fixes (shortfall groups, cap raises, recruits)",
                    id="gaps-hint",
                )
                yield GapView(id="gaps-view")
                yield ExplainView(id="explain-view")
            with TabPane("6 History", id="history"):
                yield HistoryView(id="history-view")
        yield KeysFooter()

    def on_mount(self) -> None:
        """Draw the first screen at once; warm the solver up behind it."""
        self.query_one("#planning").display = False
        self.query_one(ExplainView).display = False
        self._refresh_all()
        self.query_one(Overview).focus()
        heap.start()
        self.set_interval(heap.SETTLE_EVERY, heap.settle)
        self._warm_up()
        if self._notice:
            self.notify(self._notice, title="The demo session", timeout=15)
        problems = self.workspace.plan_problems
        if problems:
            self.notify(
                "\n".join(problems[:5])
                + (f"\n… and {len(problems) - 5} more" if len(problems) > 5 else "")
                + "\nThose pairs are not shown; press r to plan again.",
                title="The stored plan breaks the session's rules",
                severity="warning",
                timeout=20,
            )

    def on_unmount(self) -> None:
        """End the explanation process; give the objects set aside back to the collector."""
        self._offsite.close()
        heap.release()

    # Every worker names itself: by default Textual writes the repr of the call's arguments into
    # the worker's description, and the repr of a 1,500-paper session took 0.25 s of the screen.
    @work(thread=True, group="warm-up", exit_on_error=False, description="prepare the solver")
    def _warm_up(self) -> None:
        """Compile or load the flow kernels so that the first plan starts at full speed."""
        # Only a cold cache compiles (seconds, once per machine); say so, or a first plan
        # that waits on it looks stuck.
        prepare_solver(lambda line: self.call_from_thread(self.notify, line))

    # -- drawing --------------------------------------------------------------------------

    def _refresh_all(self) -> None:
        """New facts after a change; redraw the bar and the visible view now, others on show."""
        self.facts = Facts.of(self.workspace.session, self.facts, rules=self.workspace.rules())
        self._version += 1
        self._draw_bar()
        history = self.query_one(HistoryView)
        mark = (len(self.workspace.revisions), self.workspace.session.revision)
        if mark != self._history_mark:
            self._history_mark = mark
            history.noun = self.noun
            history.entries = self.workspace.history()
        active = self.query_one(TabbedContent).active or "overview"
        self._show_view(active)
        if active == "gaps":
            self._maybe_explain()

    def _show_view(self, tab: str) -> None:
        if self._shown_version.get(tab) == self._version:
            return
        self._shown_version[tab] = self._version
        view = self.query_one(f"#{tab}-view")
        if isinstance(view, Overview):
            view.changed_since = self.workspace.data_changed_since_plan()
        view.facts = self.facts  # type: ignore[attr-defined]

    @on(TabbedContent.TabActivated)
    def _tab_shown(self, event: TabbedContent.TabActivated) -> None:
        if event.pane.id:
            self._show_view(event.pane.id)
            if isinstance(self.focused, Tabs):
                # A click on a tab: its view takes the keys, as with the digit keys.
                self.action_tab(event.pane.id)
        if event.pane.id == "gaps":
            self._maybe_explain()

    def _draw_bar(self) -> None:
        self.query_one("#bar", Static).update(self.bar_text(self.size.width or 120))

    def on_resize(self) -> None:
        """Fit the session bar to the new width."""
        self._draw_bar()

    def bar_text(self, width: int) -> Text:
        """The session bar: name, saved mark, plan state and file, fitted into `width` cells.

        The marks come in a long and a short wording; the short ones are used when the long do
        not fit, and then the session's name gives way, so the file name always shows."""
        ws = self.workspace
        s = ws.session
        marks: list[tuple[str, str, str]] = []  # (long, short, style)
        if ws.dirty:
            marks.append((" ● UNSAVED (ctrl+s) ", " ● UNSAVED ", "bold black on yellow"))
        else:
            marks.append((" saved ", " saved ", "green"))
        if s.plan is None:
            marks.append((" no plan yet: press r ", " no plan: r ", "yellow"))
        elif ws.plan_problems:
            marks.append(
                (
                    f" plan STALE: {len(ws.plan_problems)} stored pair(s) broke a rule, press r ",
                    " plan STALE: r ",
                    "bold yellow",
                )
            )
        elif ws.data_changed_since_plan():
            marks.append((" plan STALE: data changed, press r ", " plan STALE: r ", "bold yellow"))
        else:
            number = f" {s.revision}" if s.revision is not None else ""
            marks.append(
                (f" plan current (revision{number}) ", f" plan current{number} ", "green")
            )
        if s.kind == "panel":
            marks.append((" grant panel ", " panel ", "dim"))
        # The file name only: a folder path would push the marks off the screen.
        file = f" {ws.path.name if ws.path else '(not saved yet)'}"
        wanted = sum(len(m[0]) for m in marks) + len(file) + min(len(s.name), 20) + 2
        wording = 0 if wanted <= width else 1
        room = width - sum(len(m[wording]) for m in marks) - len(file) - 2
        name = s.name if len(s.name) <= min(room, 30) else s.name[: max(min(room, 30) - 1, 4)] + "…"
        text = Text()
        text.append(f" {name} ", style="bold reverse")
        for mark in marks:
            text.append(mark[wording], style=mark[2])
        text.append(file, style="dim")
        return text

    # -- planning -------------------------------------------------------------------------

    @property
    def planning(self) -> bool:
        """Whether a plan is being made right now."""
        return self._planning_since is not None

    def action_plan_options(self) -> None:
        """Ask which kind of plan to make (optimal, randomised, fairest), then make it."""
        if self.planning:
            self.notify("a plan is already being made (escape cancels it)")
            return
        plan = self.workspace.session.plan
        draw = plan.draw if plan is not None else None
        mode = "optimal"
        if draw is not None:
            mode = "randomised"
        elif plan is not None and plan.fairness is not None:
            mode = "fairest"

        def chosen(choice: PlanChoice | None) -> None:
            if choice is not None:
                self.plan_with(choice)

        self.push_screen(
            PlanOptions(
                mode=mode,
                cap=draw.max_probability if draw is not None else None,
                seed=draw.seed if draw is not None else None,
            ),
            chosen,
        )

    def plan_with(self, choice: PlanChoice) -> None:
        """Make the plan the options dialog asked for, in a worker thread."""
        try:
            request = self.workspace.plan_request(
                choice.fresh,
                max_probability=choice.max_probability,
                seed=choice.seed,
                fair=choice.mode == "fairest",
                plain=choice.mode == "optimal",
            )
        except InputError as error:
            self.notify("\n".join(error.lines), title="No plan", severity="warning")
            return
        words = {"randomised": "a randomised plan", "fairest": "the fairest plan"}
        self.action_plan(choice.fresh, request=request, what=words.get(choice.mode, ""))

    def action_plan(
        self, fresh: bool = False, *, request: PlanRequest | None = None, what: str = ""
    ) -> None:
        """Make the optimal plan in a worker thread; the screen stays live.

        A re-plan keeps as many pairs of the current revision as coverage and floors allow
        (so few reviewers have to be told); `fresh` ignores them. A randomised plan stays
        randomised (same cap and seed) until the plan options ask for another kind.
        """
        if self.planning:
            self.notify("a plan is already being made (escape cancels it)")
            return
        self._generation += 1
        snapshot = self.workspace.session
        self._planning_since = monotonic()
        strip = self.query_one("#planning")
        strip.display = True
        papers = sum(not p.withdrawn for p in snapshot.papers)
        self.query_one("#planning-label", Label).update(
            f"planning {papers} {self.noun}s" + (f" ({what})" if what else " exactly")
            + "... escape cancels "
        )
        # Warm from the last outcome, keeping the current revision's pairs unless fresh.
        if request is None:
            request = self.workspace.plan_request(fresh)
        self._solve(request, self._generation)

    @work(
        thread=True,
        exclusive=True,
        group="plan",
        exit_on_error=False,
        description="make the plan",
    )
    def _solve(self, request: PlanRequest, generation: int) -> None:
        """Run the Workspace's plan request on its snapshot and post the outcome back."""
        try:
            outcome = request.run(now=self.clock())
        except InputError as error:
            self.post_message(self.PlanFailed(generation, list(error.lines)))
            return
        except PlanCheckError as error:
            self.post_message(
                self.PlanFailed(generation, [f"plan withheld by the checker: {error}"])
            )
            return
        self.post_message(self.PlanReady(generation, request, outcome))
        # While the chair reads the plan, ready the start of the next re-plan.
        successor = ready_for_replan(outcome)
        if successor is not outcome:
            self.call_from_thread(self.workspace.adopt_warm, outcome, successor)

    def _end_planning(self) -> None:
        self._planning_since = None
        self.query_one("#planning").display = False

    def action_cancel_plan(self) -> None:
        """Stop waiting for the plan being made; its result will be discarded."""
        if not self.planning:
            return
        self._generation += 1
        self.workers.cancel_group(self, "plan")
        self._end_planning()
        self.notify("planning cancelled; nothing changed")

    @on(PlanFailed)
    def _plan_failed(self, message: PlanFailed) -> None:
        if message.generation != self._generation:
            return
        self._end_planning()
        self.notify("\n".join(message.lines[:8]), title="No plan", severity="error", timeout=12)

    @on(PlanReady)
    def _plan_ready(self, message: PlanReady) -> None:
        if message.generation != self._generation:
            return
        started = self._planning_since or monotonic()
        self._end_planning()
        ws = self.workspace
        try:
            ws.install_plan(message.outcome, message.request.session)
        except InputError as error:
            self.notify("\n".join(error.lines), title="Plan not installed", severity="warning")
            return
        self._refresh_all()
        f = message.outcome.plan.figures
        number = ws.session.revision
        change = "the first revision"
        entry = ws.history()[-1]
        if entry.parent is not None:
            d = ws.diff_from_parent(entry.number)
            change = (
                f"against revision {entry.parent}: +{len(d.added)} / -{len(d.removed)} pairs, "
                f"{d.kept} kept, {len(d.by_reviewer)} reviewer(s) to tell"
            )
        plan = message.outcome.plan
        kind = ""
        if plan.draw is not None:
            kind = (
                f"\nrandomised: each pair at most {plan.draw.max_probability:g}, seed "
                f"{plan.draw.seed}; the Overview compares it with the optimal plan"
            )
        elif plan.fairness is not None:
            kind = (
                f"\nfairest: lowest {self.noun} total {plan.fairness.lowest_paper_score:.2f}; "
                "the Overview compares it with the optimal plan"
            )
        self.notify(
            f"revision {number}: {f.coverage}/{f.demand} reviews, score {f.total_score:.2f} "
            f"({monotonic() - started:.1f} s)\n{change}{kind}\nHistory (6) shows who changed.",
            title="Plan made and checked",
            timeout=6,
        )

    # -- explanations and fixes -----------------------------------------------------------

    def action_gap_pane(self, which: str) -> None:
        """In the Gaps tab, show the short papers or the shortfall groups and fixes."""
        if self.query_one(TabbedContent).active != "gaps":
            self.action_tab("gaps")
        explaining = which == "explain"
        gaps, why = self.query_one(GapView), self.query_one(ExplainView)
        gaps.display, why.display = not explaining, explaining
        self.query_one("#gaps-hint", PaneHint).update(
            f"x: back to the short {self.noun}s; tab between groups and fixes; "
            "v preview, a accept"
            if explaining
            else "x: why short and the fixes (shortfall groups, cap raises, recruits)"
        )
        target = why if explaining else gaps
        target.query(RowTable).first().focus()
        self._maybe_explain()

    def action_gap_pane_toggle(self) -> None:
        """Switch the Gaps tab between its two panes (a click on its hint line)."""
        self.action_gap_pane("papers" if self.query_one(ExplainView).display else "explain")

    def _maybe_explain(self) -> None:
        """Explain the session as it is now, unless that is shown or being computed already."""
        view = self.query_one(ExplainView)
        session = self.workspace.session
        shown = view.explanation
        if self._explaining is session or (shown is not None and shown.session is session):
            return
        self._explaining = session
        view.preview = None
        view.state = (
            f"explaining… (shortfall groups and fixes of {len(session.papers)} {self.noun}s)"
        )
        # Once the tab is drawn: sending the snapshot off takes the interpreter a moment.
        self.call_after_refresh(self._explain, session)

    @work(
        thread=True,
        exclusive=True,
        group="explain",
        exit_on_error=False,
        description="explain the session",
    )
    def _explain(self, session: Session) -> None:
        """Compute the groups and fixes of a session snapshot and post them back."""
        try:
            # In a process of its own: a thread would hold the interpreter lock for seconds
            # and every key pressed meanwhile would wait for it.
            result, menu = self._offsite.explain(session)
        except OffsiteClosed:
            return
        except (InputError, PlanCheckError, OverflowError) as error:
            lines = list(error.lines) if isinstance(error, InputError) else [str(error)]
            self.post_message(self.ExplainReady(session, None, lines))
            return
        self.post_message(self.ExplainReady(session, result, [], menu))

    @on(ExplainReady)
    def _explain_ready(self, message: ExplainReady) -> None:
        if message.session is not self._explaining:
            return
        self._explaining = None
        view = self.query_one(ExplainView)
        if message.explanation is None:
            view.state = "no explanation: " + "; ".join(message.lines[:3])
            return
        view.menu = message.menu
        view.explanation = message.explanation
        short = message.explanation.shortfall
        stale = message.session is not self.workspace.session
        view.state = (
            f"{len(message.explanation.groups)} shortfall group(s): {short['reviews']} reviews "
            f"missing, {short['min_reviews']} below the minimum"
            + ("  (out of date: explaining again)" if stale else "")
        )
        if stale:
            self._maybe_explain()

    @on(ExplainView.FixRequest)
    def _fix_request(self, message: ExplainView.FixRequest) -> None:
        view = self.query_one(ExplainView)
        explanation = view.explanation
        if explanation is None or explanation.session is not self.workspace.session:
            self.notify("the explanation is being brought up to date; try again in a moment")
            self._maybe_explain()
            return
        accept = message.action == "accept"
        if accept and self.planning:
            self.notify("wait for the plan or cancel it (escape) before accepting a fix")
            return
        shown = view.preview
        if (
            accept
            and shown is not None
            and shown.base is self.workspace.session
            and shown.request == ChangeSet(fixes=(message.kind,))
        ):
            # What the chair previewed is exactly what is accepted: no second solve.
            self._accept(message.kind, shown)
            return
        view.state = (
            f"{'accepting' if accept else 'previewing'} the {message.kind} fix… "
            "(planning the session as it is and as changed)"
        )
        self._preview(explanation, view.menu, message.kind, accept)

    @work(
        thread=True,
        exclusive=True,
        group="whatif",
        exit_on_error=False,
        description="preview a fix",
    )
    def _preview(
        self, explanation: Explanation, menu: FixMenu | None, kind: str, accept: bool
    ) -> None:
        """Plan the session and its changed copy; the session is never touched here."""
        try:
            result = self.workspace.what_if(ChangeSet(fixes=(kind,)), explanation, menu=menu)
        except (InputError, PlanCheckError) as error:
            lines = list(error.lines) if isinstance(error, InputError) else [str(error)]
            self.post_message(self.PreviewReady(explanation, None, lines))
            return
        self.post_message(self.PreviewReady(explanation, result, [], kind, accept))

    @on(PreviewReady)
    def _preview_ready(self, message: PreviewReady) -> None:
        view = self.query_one(ExplainView)
        if view.explanation is not message.explanation and not message.keep:
            return
        if message.preview is None:
            view.state = "no preview: " + "; ".join(message.lines[:3])
            if message.keep:
                self.notify("\n".join(message.lines[:6]), title="No what-if", severity="warning")
            return
        view.preview = message.preview
        view.state = f"preview ready: {len(message.preview.gaps_after)} {self.noun}s short after it"
        if message.keep:
            self._keep(message.preview)
        if message.accept:
            self._accept(message.kind, message.preview)

    # -- what-if scenarios ----------------------------------------------------------------

    def _keep(self, preview: WhatIf) -> None:
        if any(kept is preview for kept in self.scenarios):
            self.notify("this preview is kept already; c compares the scenarios")
            return
        self.scenarios.append(preview)
        self.notify(
            f"kept as scenario S{len(self.scenarios)}; c compares the {len(self.scenarios)} "
            "kept side by side",
            title="Scenario kept",
        )

    def action_keep_scenario(self) -> None:
        """Keep the preview on screen as a scenario to compare with others."""
        preview = self.query_one(ExplainView).preview
        if preview is None:
            self.notify("preview a fix first (v), or try a what-if (n)", severity="warning")
            return
        self._keep(preview)

    def action_compare_scenarios(self) -> None:
        """Show the kept scenarios' figures side by side; one may be accepted from there."""
        if not self.scenarios:
            self.notify(
                "no scenario kept yet: preview a fix (v) or try a what-if (n), then keep it (k)",
                severity="warning",
            )
            return

        def chosen(k: int | None) -> None:
            if k is None:
                return
            preview = self.scenarios[k]
            asked = preview.request
            fixes_only = (
                isinstance(asked, ChangeSet)
                and asked.fixes
                and not (asked.raise_caps or asked.add_reviewers)
                and asked.allow_overload is None
            )
            kind = "+".join(asked.fixes) if fixes_only else f"S{k + 1} what-if"
            if self._accept(kind, preview, "accept-fix" if fixes_only else "accept-whatif"):
                # Every other scenario was made from the session as it was.
                self.scenarios.clear()

        self.push_screen(
            ScenarioScreen(self.scenarios, self.workspace.session, self.scenarios.pop), chosen
        )

    def action_new_whatif(self) -> None:
        """Ask for cap raises, recruits or an overload allowance and preview them on a copy."""
        fields = [
            Field("caps", "raise caps: REVIEWER=N, ... (e.g. R0003=2, R0007=1)", optional=True),
            Field("recruits", "add reviewers: TOPIC=N, ... (at the policy's cap)", optional=True),
            Field("overload", f"let everyone take up to N {self.noun}s above cap", optional=True),
        ]

        def apply(values: dict[str, str]) -> list[str]:
            caps, problems = parse_pairs(values["caps"], "raise caps")
            recruits, more = parse_pairs(values["recruits"], "add reviewers")
            overload, worse = whole_or_default(values["overload"], "overload")
            problems += more + worse
            if problems:
                return problems
            changes = ChangeSet(
                raise_caps=caps,
                add_reviewers=recruits,
                allow_overload=overload,
                labels={"raise_caps": "raise caps", "add_reviewers": "add reviewers"},
            )
            if changes.is_empty():
                return ["give at least one change"]
            try:
                self.workspace.changed_copy(changes)
            except InputError as error:
                return list(error.lines)
            view = self.query_one(ExplainView)
            view.state = "planning the what-if… (the session as it is and as changed)"
            self._whatif(view.explanation, changes)
            return []

        self.push_screen(
            Form(
                "What if…",
                fields,
                apply,
                hint="planned on a copy and kept as a scenario; the session is unchanged",
            )
        )

    @work(
        thread=True,
        exclusive=True,
        group="whatif",
        exit_on_error=False,
        description="plan a what-if",
    )
    def _whatif(self, explanation: Explanation | None, changes: ChangeSet) -> None:
        """Plan the session and a changed copy of it, to keep as a scenario."""
        try:
            result = self.workspace.what_if(changes)
        except (InputError, PlanCheckError) as error:
            lines = list(error.lines) if isinstance(error, InputError) else [str(error)]
            self.post_message(self.PreviewReady(explanation, None, lines, keep=True))
            return
        self.post_message(self.PreviewReady(explanation, result, [], "what-if", keep=True))

    def _accept(self, kind: str, preview: WhatIf, action: str = "accept-fix") -> bool:
        """Record a previewed fix as one change and install its plan as one revision."""
        try:
            number = self.workspace.accept(
                preview,
                reason=f"Gaps tab: accepted the {kind}"
                + (" fix" if action == "accept-fix" else ""),
                action=action,  # type: ignore[arg-type]
            )
        except InputError as error:
            self._refresh_all()
            self.notify("\n".join(error.lines[:8]), title="Fix refused", severity="warning")
            return False
        self._refresh_all()
        done = list(preview.changes)
        f = preview.after.figures
        self.notify(
            "\n".join(done[:6] + ([f"… {len(done) - 6} more"] if len(done) > 6 else []))
            + f"\nrevision {number}: {f.coverage}/{f.demand} reviews, score "
            f"{f.total_score:.2f}. History lists the change; ctrl+z takes it back.",
            title=f"Accepted the {kind}" + (" fix" if action == "accept-fix" else ""),
        )
        return True

    # -- changes --------------------------------------------------------------------------

    def _change(self, what: str, apply: Callable[[], None]) -> bool:
        """Apply one Workspace change; show its refusal reasons instead when it is refused."""
        before = self.workspace.session
        try:
            apply()
        except InputError as error:
            self.notify("\n".join(error.lines[:8]), title=f"{what}: refused", severity="warning")
            return False
        self._refresh_all()
        note = ""
        if before.plan is not None:
            pruned = len(before.plan.assignments) - len(self.workspace.session.plan.assignments)
            if pruned:
                note = f"; {pruned} pair(s) left the plan"
        self.notify(f"{what}{note}. Press r to plan again.")
        return True

    @on(EntityView.PairRequest)
    def _pair_request(self, message: EntityView.PairRequest) -> None:
        ws = self.workspace
        run = {
            "pin": ws.pin,
            "unpin": ws.unpin,
            "block": ws.block,
            "unblock": ws.unblock,
        }[message.action]
        self._change(
            f"{message.action} ({message.reviewer}, {message.paper})",
            lambda: run(message.reviewer, message.paper),
        )

    @on(EntityView.EntityRequest)
    def _entity_request(self, message: EntityView.EntityRequest) -> None:
        ws = self.workspace
        ident = message.ident
        if message.action == "edit":
            self._edit(message.kind, ident)
            return
        if message.action == "name":
            self._name_recruit(ident)
            return
        runs = {
            ("withdraw", "reviewer"): ws.withdraw_reviewer,
            ("reinstate", "reviewer"): ws.reinstate_reviewer,
            ("withdraw", "paper"): ws.withdraw_paper,
            ("reinstate", "paper"): ws.reinstate_paper,
        }
        run = runs[(message.action, message.kind)]
        noun = "reviewer" if message.kind == "reviewer" else self.noun
        s = ws.session
        if message.kind == "reviewer":
            who = s.reviewers[s.reviewer_index()[ident]].name
            held = sum(a.reviewer == ident for a in s.plan.assignments) if s.plan else 0
        else:
            who = s.papers[s.paper_index()[ident]].title
            held = sum(a.paper == ident for a in s.plan.assignments) if s.plan else 0
        if message.action == "withdraw":
            question = (
                f"{who}: "
                + (f"its {held} pair(s) leave the plan at once; " if held else "")
                + "ctrl+z takes it back."
            )
        else:
            question = f"{who}: plan again (r) to use it."

        def apply(values: dict[str, str]) -> list[str]:
            # The reason goes into the record, so History says why.
            done = self._change(
                f"{message.action} {noun} {ident}", lambda: run(ident, values["reason"])
            )
            return [] if done else ["refused: see the message in the corner"]

        self.push_screen(
            Form(
                f"{message.action.capitalize()} {noun} {ident}?",
                [Field("reason", "reason (kept in History; required)")],
                apply,
                hint=question,
            )
        )

    def _name_recruit(self, ident: str) -> None:
        """Ask for the real person behind a recruit placeholder; one recorded change."""
        ws = self.workspace
        if ident not in ws.recruit_placeholders():
            self.notify(
                f"{ident} is a person already; n names the placeholders an accepted recruit fix "
                "added ('recruit k for TOPIC')",
                severity="warning",
            )
            return
        placeholder = ws.session.reviewers[ws.session.reviewer_index()[ident]]
        fields = [
            Field("name", "name"),
            Field("id", "reviewer id (unique)"),
            Field("email", "e-mail", optional=True),
            Field("institution", "institution", optional=True),
            Field("reason", "reason (kept in History)", "recruited for the fix", optional=True),
        ]

        def apply(values: dict[str, str]) -> list[str]:
            try:
                ws.name_recruit(
                    ident,
                    values["id"],
                    values["name"],
                    email=values["email"],
                    institution=values["institution"],
                    reason=values["reason"],
                )
            except InputError as error:
                return list(error.lines)
            self._refresh_all()
            # The row keeps the cursor under its new id.
            self.query_one(ReviewerView).select(values["id"].strip())
            self.notify(
                f"{placeholder.name} is now {values['id']} {values['name']}. Press r to plan "
                "again (their institution and e-mail may bring conflicts).",
                title="Recruit named",
            )
            return []

        self.push_screen(
            Form(
                f"Who is {placeholder.name} ({ident})?",
                fields,
                apply,
                hint="the person keeps the placeholder's topics, cap, scores and pairs",
            )
        )

    def _edit(self, kind: str, ident: str) -> None:
        s = self.workspace.session
        if kind == "reviewer":
            j = s.reviewer_index()[ident]
            r = s.reviewers[j]
            fields = [
                # Optional like the floor: the hint says an empty line keeps the current value.
                Field(
                    "cap",
                    f"cap (most {self.noun}s; now {s.reviewer_cap(j)})",
                    str(r.cap or ""),
                    optional=True,
                ),
                Field(
                    "floor",
                    f"floor (fewest; now {s.reviewer_floor(j)})",
                    str(r.floor or ""),
                    optional=True,
                ),
            ]
            title = f"Limits of reviewer {ident} ({r.name})"
        else:
            i = s.paper_index()[ident]
            p = s.papers[i]
            fields = [
                Field(
                    "reviews",
                    f"reviews wanted (now {s.paper_reviews(i)})",
                    str(p.reviews or ""),
                    optional=True,
                ),
                Field(
                    "min_reviews",
                    f"reviews required (now {s.paper_min_reviews(i)})",
                    str(p.min_reviews or ""),
                    optional=True,
                ),
            ]
            title = f"Reviews of {self.noun} {ident}"

        def apply(values: dict[str, str]) -> list[str]:
            numbers: dict[str, int | None] = {}
            problems: list[str] = []
            for name, text in values.items():
                numbers[name], bad = whole_or_default(text, name)
                problems += bad
            if problems:
                return problems
            ws = self.workspace
            try:
                if kind == "reviewer":
                    ws.set_reviewer(ident, cap=numbers["cap"], floor=numbers["floor"])
                else:
                    ws.set_paper(
                        ident, reviews=numbers["reviews"], min_reviews=numbers["min_reviews"]
                    )
            except InputError as error:
                return list(error.lines)
            self._refresh_all()
            self.notify(f"{title}: changed. Press r to plan again.")
            return []

        self.push_screen(Form(title, fields, apply, hint="an empty line keeps the current value"))

    @on(ConflictView.AddRequest)
    def _add_conflict(self, message: ConflictView.AddRequest) -> None:
        self.action_declare_conflict(message.reviewer, message.paper)

    def action_declare_conflict(self, reviewer: str = "", paper: str = "") -> None:
        """Open the form that declares a conflict of interest."""
        fields = [
            Field("reviewer", "reviewer id", reviewer),
            Field("paper", f"{self.noun} id", paper),
            Field(
                "reason", "reason (e.g. co-author in the last three years)", "declared by the chair"
            ),
        ]

        def apply(values: dict[str, str]) -> list[str]:
            return (
                []
                if self._change(
                    f"conflict ({values['reviewer']}, {values['paper']}) declared",
                    lambda: self.workspace.declare_conflict(
                        values["reviewer"], values["paper"], values["reason"]
                    ),
                )
                else [self._last_refusal(values)]
            )

        self.push_screen(Form("Declare a conflict of interest", fields, apply))

    def _last_refusal(self, values: dict[str, str]) -> str:
        s = self.workspace.session
        if values["reviewer"] not in s.reviewer_index():
            return f"unknown reviewer {values['reviewer']!r}"
        if values["paper"] not in s.paper_index():
            return f"unknown {self.noun} {values['paper']!r}"
        return "refused: see the message in the corner"

    @on(HistoryView.UndoRequest)
    def _undo_request(self) -> None:
        self.action_undo()

    def action_undo(self) -> None:
        """Go back one step with the Workspace: drop the changes made since the current revision
        (asking first), or else return to the revision it was planned from."""
        if self.planning:
            self.notify("wait for the plan or cancel it (escape) before going back")
            return
        ws = self.workspace
        current = ws.session.revision
        if current is None:
            self.notify("nothing to go back to: no plan has been made yet", severity="warning")
            return
        if not ws.data_changed_since_plan():
            entry = next((e for e in ws.history() if e.number == current), None)
            if entry is None or entry.parent is None:
                self.notify(f"revision {current} is the first; nothing to go back to")
                return
            self._go_back()
            return
        events = ws.session.events
        marks = [k for k, e in enumerate(events) if e.action in ("plan", "undo", "redo")]
        unplanned = len(events) - (marks[-1] + 1 if marks else 0)

        def answered(yes: bool | None) -> None:
            if yes:
                self._go_back()

        self.push_screen(
            Confirm(
                f"Drop the {unplanned} change(s) made since revision {current} and return to "
                "its plan and data? (They stay listed under History.)",
                yes="Drop the changes",
                no="Keep them",
            ),
            answered,
        )

    @on(HistoryView.RedoRequest)
    def _redo_request(self) -> None:
        self.action_redo()

    def action_redo(self) -> None:
        """Go forward again to the revision the last undo left, with its plan and data."""
        if self.planning:
            self.notify("wait for the plan or cancel it (escape) before going forward")
            return
        try:
            number = self.workspace.redo()
        except InputError as error:
            self.notify("\n".join(error.lines), title="Nothing to redo", severity="warning")
            return
        self._refresh_all()
        self.notify(f"forward to revision {number}: its plan and its data (ctrl+z goes back)")

    def _go_back(self) -> None:
        try:
            number = self.workspace.undo()
        except InputError as error:
            self.notify("\n".join(error.lines), title="Cannot go back", severity="warning")
            return
        self._refresh_all()
        self.notify(f"back to revision {number}: its plan and its data (ctrl+y goes forward)")

    @on(HistoryView.DiffWanted)
    def _diff_wanted(self, message: HistoryView.DiffWanted) -> None:
        ws = self.workspace
        view = self.query_one(HistoryView)
        if message.base is None:
            view.diff = ws.diff_from_parent(message.target)
        else:
            view.diff = ws.diff(message.base, message.target)

    # -- files ----------------------------------------------------------------------------

    def action_save(self) -> None:
        """Write the session atomically to its file; never over someone else's newer save."""
        try:
            path = self.workspace.save()
        except FileChanged as error:
            self._file_changed(error.lines)
            return
        except (InputError, OSError) as error:
            lines = error.lines if isinstance(error, InputError) else [str(error)]
            self.notify("\n".join(lines), title="Not saved", severity="error")
            return
        self._draw_bar()
        self.notify(f"saved to {path}")

    def _file_changed(self, lines: list[str]) -> None:
        """Another program saved the file: reload and redo our steps, or save under a new name."""
        steps = len(self.workspace.unsaved)

        def answered(reload: bool | None) -> None:
            if reload:
                self.notify("reloading the file and making your changes again…")
                self._reload_and_redo()
            else:
                self._save_as()

        self.push_screen(
            Confirm(
                "\n".join(lines)
                + f"\n\nReload the file and make your {steps} unsaved step(s) again on it? "
                "(No: save your version under another name instead.)",
                yes="Reload and redo",
                no="Save as…",
            ),
            answered,
        )

    @work(
        thread=True,
        exclusive=True,
        group="plan",
        exit_on_error=False,
        description="reload and redo",
    )
    def _reload_and_redo(self) -> None:
        """Read the newer file and redo the unsaved steps on it (plans are made anew)."""
        try:
            workspace, refused = self.workspace.reload_and_redo()
        except (InputError, PlanCheckError) as error:
            lines = list(error.lines) if isinstance(error, InputError) else [str(error)]
            self.call_from_thread(
                self.notify, "\n".join(lines[:8]), title="Not reloaded", severity="error"
            )
            return
        self.call_from_thread(self._reloaded, workspace, refused)

    def _reloaded(self, workspace: Workspace, refused: list[str]) -> None:
        self.workspace = workspace
        self._history_mark = None
        self._refresh_all()
        note = ("\nNot made again:\n" + "\n".join(refused[:6])) if refused else ""
        self.notify(
            "reloaded the newer file and made your changes again; ctrl+s saves" + note,
            title="Reloaded",
            severity="warning" if refused else "information",
            timeout=12,
        )

    def _save_as(self) -> None:
        """Ask for a new file name and save this version there."""
        current = self.workspace.path

        def apply(values: dict[str, str]) -> list[str]:
            target = Path(values["target"]).expanduser()
            try:
                path = self.workspace.save(target)
            except (InputError, OSError) as error:
                return error.lines if isinstance(error, InputError) else [str(error)]
            self._draw_bar()
            self.notify(f"saved to {path}")
            return []

        suggestion = current.with_name(current.stem + "-mine.json") if current else ""
        self.push_screen(
            Form(
                "Save this version under another name",
                [Field("target", "new session file (.json)", str(suggestion))],
                apply,
            )
        )

    def action_import(self) -> None:
        """Build a new session from CSV files and open it (after saving this one)."""
        if self.workspace.dirty:
            self.notify(
                "save this session first (ctrl+s): an import replaces it on screen",
                severity="warning",
            )
            return
        self.push_screen(ImportForm(self._open_imported, self.workspace.session.import_columns))

    def _open_imported(self, files: ImportFiles) -> list[str]:
        """Import through the Workspace and show the new session; problems stay in the form."""
        options = files.options
        try:
            # The same arguments the command line's `import` passes for the same options.
            workspace = Workspace.import_csv(
                files.target,
                files.papers,
                files.reviewers,
                files.conflicts,
                files.scores,
                kind="panel" if files.panel else "conference",
                columns=files.columns,
                policy=options.make_policy() if options is not None else None,
                ignore_extra=options.ignore_extra if options is not None else False,
                name=options.name if options is not None else None,
                sheet=options.sheet if options is not None else None,
                encoding=options.encoding if options is not None else None,
                bids=options.bids if options is not None else None,
            )
        except InputError as error:
            return list(error.lines)
        self.workspace = workspace
        self._new_session()
        session = workspace.session
        self.notify(f"imported {len(session.papers)} {self.noun}s into {files.target}")
        return []

    def _new_session(self) -> None:
        """Show another session: no filter of the last one carries over, and the tab says
        'papers' or 'proposals' as the new session does."""
        self._history_mark = None
        for view in (*self.query(EntityView), self.query_one(ConflictView)):
            view.set_filter("")
        self.query_one(TabbedContent).get_tab("papers").label = f"2 {self.noun.capitalize()}s"
        self._refresh_all()

    async def action_quit(self) -> None:
        """Quit, asking first when there are unsaved changes."""
        if not self.workspace.dirty:
            self.exit()
            return

        def answered(quit_anyway: bool | None) -> None:
            if quit_anyway:
                self.exit()

        self.push_screen(
            Confirm(
                "There are unsaved changes. Quit without saving them?\n"
                "(To keep them: Stay, then ctrl+s saves.)",
                yes="Quit without saving",
                no="Stay",
            ),
            answered,
        )

    # -- navigation and help --------------------------------------------------------------

    def action_tab(self, tab: str) -> None:
        """Show one tab."""
        self.query_one(TabbedContent).active = tab
        view = self.query_one(f"#{tab}-view")
        tables = view.query(RowTable)
        if tables:
            tables.first().focus()
        elif view.can_focus:
            # The Overview scrolls by keyboard as soon as it is shown.
            view.focus()

    def action_help(self) -> None:
        """Show every key."""
        self.push_screen(HelpScreen(self.key_sections()))

    def action_pair_view(self) -> None:
        """Show the pair under the pair list's cursor: its rules, standing and score parts."""
        show_pair(self)

    def key_sections(self) -> list[tuple[str, list[tuple[str, str]]]]:
        """Every binding of the app and its views, grouped by where it works."""

        def rows(bindings: list) -> list[tuple[str, str]]:
            out = []
            for b in bindings:
                key = b.key if isinstance(b, Binding) else b[0]
                desc = b.description if isinstance(b, Binding) else b[2]
                if key == "escape":
                    desc = "cancel the plan; close a form; leave a filter line"
                elif key in "123456" and len(key) == 1:
                    tab = f"{self.noun}s" if desc == "Papers" else desc
                    desc = f"show the {tab.capitalize()} tab"
                out.append((key.replace("question_mark", "?").replace("slash", "/"), desc))
            return out

        # `l` is an app key only so that every pair list shares it; it acts on a pair list.
        pair_keys = [b for b in self.BINDINGS if b.key == "l"]
        return [
            (
                "Everywhere",
                rows([b for b in self.BINDINGS if b not in pair_keys])
                + [("ctrl+p", "command palette")],
            ),
            (
                f"{self.noun.capitalize()}s, Reviewers, Gaps",
                rows(EntityView.BINDINGS)
                + rows(pair_keys)
                + [
                    ("enter", "from the table to its pair list"),
                    ("tab", "next part of the view"),
                    ("click header", "sort by that column (again: reverse)"),
                ],
            ),
            ("Reviewers", rows(ReviewerView.BINDINGS)),
            ("Gaps", rows(GapView.BINDINGS[-1:]) + rows(ExplainView.BINDINGS)),
            ("Conflicts", rows(ConflictView.BINDINGS)),
            ("History", rows(HistoryView.BINDINGS)),
        ]

    def palette_commands(self) -> Iterator[tuple[str, str, Callable[[], object]]]:
        """Our commands for the palette: (name, help, callback)."""
        yield "Plan now", "make the optimal, checked plan", self.action_plan
        yield "Save session", "write the session file (atomic)", self.action_save
        yield "Plan fresh", "plan ignoring the current revision's pairs", self._plan_fresh
        yield (
            "Plan options",
            "a randomised plan (probability cap, seed), the fairest plan, or the optimal one",
            self.action_plan_options,
        )
        yield (
            "Undo",
            "drop the changes since the current revision, or go back to the one before",
            self.action_undo,
        )
        yield "Redo", "go forward again to the revision the last undo left", self.action_redo
        yield "Declare a conflict", "add a conflict of interest", self.action_declare_conflict
        yield "Import from CSV", "build a session from CSV files", self.action_import
        yield "Show keys", "every key of the app", self.action_help
        yield (
            "Why short and the fixes",
            "shortfall groups, the least cap raise and recruits, with a what-if preview",
            lambda: self.action_gap_pane("explain"),
        )
        for tab in TABS:
            label = f"{self.noun}s" if tab == "papers" else tab
            yield f"Go to {label}", f"show the {label} tab", lambda t=tab: self.action_tab(t)
        yield (
            f"Show {self.noun}s below minimum",
            f"filter the {self.noun}s to those below their required reviews",
            self._below_minimum,
        )

    def _plan_fresh(self) -> None:
        self.action_plan(fresh=True)

    def _below_minimum(self) -> None:
        self.action_tab("papers")
        self.query_one(PaperView).set_filter("below min")


def make_app(
    session_path: Path | str | None = None,
    *,
    clock: Callable[[], datetime] | None = None,
    notice: str | None = None,
) -> ReviewAllocApp:
    """The app on a session file, or on the user's copy of the demo workshop when None.

    `notice` is shown once the app is up (what was done to the demo copy). Raises
    `InputError` (file, field, problem) when the file cannot be read.
    """
    if session_path is None:
        workspace = Workspace.open_demo()
    else:
        workspace = Workspace.open(Path(session_path))
    return ReviewAllocApp(workspace, clock=clock or _utc_now, notice=notice)
