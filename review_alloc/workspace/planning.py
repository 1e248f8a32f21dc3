"""Plans, explanations and what-ifs of the open session: the services both faces call.

Every plan is made by `plan.make_plan` from a snapshot of the session, warm-started from the
previous outcome whenever there is one, checked, and installed as a new revision. Slow work
(a plan, an explanation, a preview) can run in a worker thread: the request objects hold an
immutable snapshot, and installing refuses a result whose session changed meanwhile.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from datetime import datetime
from typing import TYPE_CHECKING, Any

from review_alloc.model import Action, Plan, Session
from review_alloc.model.history import DataDelta, Revision, assignment_table
from review_alloc.plan.report import plan_summary
from review_alloc.workspace.base import MARKS, ChangeRefused, data_of, redoable, same_data
from review_alloc.workspace.changes import ChangesMixin
from review_alloc.workspace.history import HistoryMixin

if TYPE_CHECKING:
    from review_alloc.plan.explanation import Explanation
    from review_alloc.plan.fixes import FixMenu
    from review_alloc.plan.solve import PlanOutcome
    from review_alloc.plan.whatif import WhatIf

# The planner's solving modules (numba, scipy) are imported inside the services that solve:
# a command that only reads a session (history, diff, export, notify) must start without them.


def prepare_solver(say: Callable[[str], None] | None = None) -> None:
    """Ready the flow kernels: load them, or on a cold machine compile them in the background.

    On a cold machine small plans run at once with the kernels uncompiled while a detached
    process compiles them for the next run, and a large plan waits for that compile; `say`
    hears about it once.
    """
    from review_alloc.flow.compile import also_warm, prepare

    # The planner's own kernels (the lead choice, the re-plan's certificate pass) compile with
    # the engine's on a cold machine, not at a large venue's first plan or re-plan.
    also_warm("review_alloc.plan.lead_paths:exercise")
    also_warm("review_alloc.plan.check_pass:exercise")

    def announce(in_background: bool) -> None:
        if say is None:
            return
        if in_background:
            say(
                "Preparing the solver in the background (first run on this machine; later "
                "runs start at once). Small plans go ahead now; large ones wait for it."
            )
        else:
            say("Preparing the solver (first run on this machine; later runs start at once)...")

    prepare(announce)


def ready_for_replan(outcome: PlanOutcome) -> PlanOutcome:
    """The outcome the next re-plan should start from, made ready now (for a worker thread,
    after the plan is shown); hand it to `Workspace.adopt_warm`.

    A re-plan keeps the earlier plan's pairs as a tier, and a plan made without that tier
    weighs its tiers differently, so its potentials cannot price a re-plan's network: after
    such a plan, the same session is planned again keeping it. That optimum is the same plan
    (keeping every pair of an optimal plan is optimal), now with the weights and potentials a
    re-plan patches; where it is not the same set of pairs, the outcome itself is kept. Then
    the kept residual state is built.
    """
    successor = outcome
    if outcome.network.kept is None and outcome.planned is not None and outcome.flow is not None:
        from review_alloc.model import InputError
        from review_alloc.plan.errors import PlanCheckError
        from review_alloc.plan.solve import make_plan

        try:
            again = make_plan(outcome.planned, earlier=outcome.plan, now=outcome.plan.created_at)
        except (InputError, PlanCheckError):
            again = None
        if again is not None and _pairs(again.plan) == _pairs(outcome.plan):
            successor = again
    successor.kept_flow()
    return successor


def _pairs(plan: Plan) -> set[tuple[str, str]]:
    return {(a.reviewer, a.paper) for a in plan.assignments}


@dataclass(frozen=True)
class PlanRequest:
    """What one plan needs, taken from the session at one moment; `run` may go in a thread."""

    session: Session
    fresh: bool
    earlier: Plan | None
    warm: PlanOutcome | None
    max_probability: float | None = None
    """Draw the plan at random with each pair's probability at most this (`plan.randomized`)."""
    seed: int | None = None
    """The draw's seed (None: a fresh one, stored with the plan)."""
    keep_draw: Plan | None = None
    """An earlier draw whose allowed pairs a randomised re-plan keeps."""
    fair: bool = False
    """Maximise the worst-off paper's total score (`plan.fair`)."""

    def run(self, now: datetime | None = None) -> PlanOutcome:
        """Make the checked plan of the snapshot (nothing is installed).

        A randomised or fair plan also makes the plain plan, which its figures are set beside.
        """
        from review_alloc.plan.fair import fair_plan
        from review_alloc.plan.randomized import random_plan
        from review_alloc.plan.solve import make_plan

        if self.max_probability is None and not self.fair:
            return make_plan(
                self.session, fresh=self.fresh, earlier=self.earlier, now=now, warm=self.warm
            )
        # The comparison is with the best plain plan of the same data (a fresh one).
        plain = make_plan(self.session, fresh=True, now=now, warm=self.warm)
        if self.max_probability is not None:
            return random_plan(
                self.session,
                self.max_probability,
                seed=self.seed,
                earlier=self.keep_draw,
                now=now,
                plain=plain,
            )
        return fair_plan(self.session, now=now, plain=plain)


@dataclass(frozen=True)
class ChangeSet:
    """The changes of a what-if: computed fixes, cap raises, recruits, an overload allowance."""

    fixes: tuple[str, ...] = ()
    """Fixes (`plan.fixes.FIX_KEYS`: 'raise-caps-min', 'recruit-min' for every paper's minimum,
    'raise-caps', 'recruit' for full coverage) computed for the session as it is."""
    raise_caps: Mapping[str, int] = field(default_factory=dict)
    """Reviewer id -> papers added to their cap."""
    add_reviewers: Mapping[str, int] = field(default_factory=dict)
    """Topic -> number of new reviewers in it."""
    allow_overload: int | None = None
    labels: Mapping[str, str] = field(default_factory=dict)
    """How the chair named each kind of change ('raise_caps', 'add_reviewers'), for messages:
    the command line passes its option names."""

    def is_empty(self) -> bool:
        """Whether it changes nothing."""
        return not (self.fixes or self.raise_caps or self.add_reviewers) and (
            self.allow_overload is None
        )


class PlanningMixin(HistoryMixin, ChangesMixin):
    """Planning, explaining, previewing and accepting changes for a Workspace."""

    # -- plans ----------------------------------------------------------------------------

    def earlier_plan(self) -> Plan | None:
        """The plan a re-plan keeps pairs of: the current revision's, else the session's."""
        if self.session.revision is not None:
            return self.plan_of(self.session.revision)
        return self.session.plan

    def plan_request(
        self,
        fresh: bool = False,
        *,
        max_probability: float | None = None,
        seed: int | None = None,
        fair: bool = False,
        plain: bool = False,
    ) -> PlanRequest:
        """A snapshot for one plan: a re-plan keeps the current revision's pairs unless `fresh`;
        the last outcome warm-starts it (and, where `plan.patch` follows the changes since, its
        network is patched rather than built anew).

        `max_probability` draws a new randomised plan (`seed` fixes the draw). Without it, a
        re-plan of a randomised plan stays randomised: same cap, same seed, and the earlier
        draw's allowed pairs kept (all redrawn when `fresh`) unless `plain` or `fair` asks
        for a plain or a fair plan instead.
        """
        # One rebuild of the revision's plan serves both uses (it validates every row).
        current = self.earlier_plan()
        earlier = None if fresh else current
        keep_draw = None
        draw = current.draw if current is not None else None
        if max_probability is None and draw is not None and not (plain or fair):
            max_probability = draw.max_probability
            seed = draw.seed if seed is None else seed
            keep_draw = None if fresh else current
        if seed is not None and max_probability is None:
            raise ChangeRefused(["a seed is for a randomised plan: give a maximum probability"])
        return PlanRequest(
            session=self.session,
            fresh=fresh,
            earlier=earlier,
            warm=self.last_outcome,
            max_probability=max_probability,
            seed=seed,
            keep_draw=keep_draw,
            fair=fair and max_probability is None,
        )

    @redoable
    def solve(
        self,
        fresh: bool = False,
        *,
        now: datetime | None = None,
        progress: Callable[[str], None] | None = None,
        max_probability: float | None = None,
        seed: int | None = None,
        fair: bool = False,
        plain: bool = False,
    ) -> PlanOutcome:
        """Make the checked plan of the session as it is now and install it: the optimal plan,
        a randomised one (`max_probability`, `seed`) or the fairest one (`fair`); see
        `plan_request` for how a re-plan keeps a randomised plan randomised."""
        if max_probability is not None and fair:
            raise ChangeRefused(["choose either a randomised plan or the fairest plan, not both"])
        request = self.plan_request(
            fresh, max_probability=max_probability, seed=seed, fair=fair, plain=plain
        )
        if progress:
            progress("building the network and solving")
        outcome = request.run(now)
        self.install_plan(outcome, request.session)
        return outcome

    def adopt_warm(self, outcome: PlanOutcome, successor: PlanOutcome) -> None:
        """Start the next re-plan from `successor` (see `ready_for_replan`) if `outcome` is
        still the latest plan's."""
        if self.last_outcome is outcome:
            self.last_outcome = successor

    @redoable
    def install_plan(self, outcome: PlanOutcome, planned: Session) -> None:
        """Install a plan made from `planned` as a new revision; refused if the data changed."""
        if planned is not self.session and not same_data(planned, self.session):
            raise ChangeRefused(["the session changed while the plan was being made; plan again"])
        self.last_outcome = outcome
        self.plan_problems = []
        s = self.session
        plan = outcome.plan
        data = data_of(s)
        parent = s.revision
        earlier = self.plan_of(parent) if parent is not None else None
        kept = None
        if earlier is not None:
            before = {(a.reviewer, a.paper) for a in earlier.assignments}
            kept = sum((a.reviewer, a.paper) in before for a in plan.assignments)
        number = max((r.number for r in s.revisions), default=0) + 1
        event_at = len(s.events)
        # The changes since the data last agreed with a plan; an undo or redo that set it counts.
        marks = [k for k, e in enumerate(s.events) if e.action in MARKS]
        if marks and s.events[marks[-1]].action in ("undo", "redo"):
            marks[-1] -= 1
        revision = Revision(
            number=number,
            parent=parent,
            created_at=plan.created_at,
            changes_from=marks[-1] + 1 if marks else 0,
            event=event_at,
            fresh=outcome.network.kept is None and earlier is not None,
            kept=kept,
            parent_pairs=len(earlier.assignments) if earlier is not None else None,
            figures=plan.figures,
            method=plan.method,
            checked=plan.checked,
            assignments=assignment_table(plan, data),
            bottleneck=plan.bottleneck,
            bound=plan.bound,
            loads_before_balance=plan.loads_before_balance,
            draw=plan.draw,
            fairness=plan.fairness,
            data=DataDelta.between(
                self.data_of(parent) if parent is not None else None, data, s.scores
            ),
        )
        self._data[number] = data
        f = plan.figures
        detail = (
            f"revision {number}: coverage {f.coverage}/{f.demand}, required "
            f"{f.required_coverage}/{f.required_demand}, score {f.total_score:.2f}"
        )
        if kept is not None:
            detail += f", kept {kept}/{revision.parent_pairs} of revision {parent}"
        self._record(
            "plan",
            str(number),
            detail,
            plan=plan,
            revisions=[*s.revisions, revision],
            revision=number,
        )

    def current_plan(self) -> Plan:
        """The session's plan when it is current and checked, else a new plan (not installed)."""
        plan = self.session.plan
        if plan is not None and plan.checked and self.plan_is_current():
            return plan
        return self.plan_request().run().plan

    def summary(self) -> dict[str, Any]:
        """The JSON object of the current plan (`plan --json`), with its revision and kept pairs."""
        plan = self.session.plan
        if plan is None:
            raise ChangeRefused([f"{self.session.name}: no plan yet; make a plan first"])
        summary = plan_summary(self.session, plan)
        summary["current"] = self.plan_is_current()
        if self.session.revision is not None:
            revision = self._revision(self.session.revision)
            summary["revision"] = revision.number
            summary["kept"] = revision.kept
        if plan.draw is not None:
            from review_alloc.plan.randomized import draw_report

            summary["randomised"] = draw_report(self.session, plan)
            summary["optimality"]["claim"] = (
                "a random draw: its expected figures are the capped optimum; the draw itself is "
                "not optimal"
            )
        if plan.fairness is not None:
            from review_alloc.plan.fair import fairness_report

            summary["fairness"] = fairness_report(plan)
            summary["optimality"]["claim"] = (
                "the fairest plan (lowest paper total proven optimal)"
                if plan.fairness.exact
                else "the fairest plan found, not proven optimal; lowest paper total within "
                "the stated bound"
            )
        return summary

    # -- explanations ---------------------------------------------------------------------

    def explain(self, session: Session | None = None) -> Explanation:
        """Shortfall groups and fixes of the session (or of a snapshot of it, in a thread)."""
        from review_alloc.plan.explanation import explain

        return explain(session if session is not None else self.session)

    def fixes(
        self, session: Session | None = None, explanation: Explanation | None = None
    ) -> FixMenu:
        """The cap-raise and recruit fixes for both targets (every paper at its minimum, every
        paper fully reviewed), each with its cost in people and caps; `explanation` of the same
        session saves recomputing the full target's fixes."""
        from review_alloc.plan.fixes import fix_menu

        s = session if session is not None else self.session
        full = None
        if explanation is not None and explanation.session is s:
            full = (explanation.caps, explanation.recruits)
        return fix_menu(s, full=full)

    def explain_report(self) -> dict[str, object]:
        """The explanation as one JSON-ready object, beside the current optimal plan.

        Plans first, on a snapshot, when the stored plan is missing, stale or unchecked;
        nothing is recorded.
        """
        from review_alloc.plan.explanation import report

        plan = self.current_plan()
        explanation = self.explain()
        result = report(explanation, plan)
        # Both targets' fixes, smaller target first: reaching every paper's minimum often
        # asks far less of people than full coverage does.
        result["targets"] = [
            {
                "key": fix.key,
                "target": fix.target,
                "kind": fix.kind,
                "people": fix.people,
                "caps": fix.caps,
                "coverage_before": fix.coverage_before,
                "coverage_after": fix.coverage_after,
                "demand": fix.demand,
                "reaches": fix.reaches,
                "changes": list(fix.changes()),
            }
            for fix in self.fixes(explanation=explanation).offered()
        ]
        return result

    # -- what-ifs and fixes ---------------------------------------------------------------

    def changed_copy(
        self,
        changes: ChangeSet,
        explanation: Explanation | None = None,
        *,
        menu: FixMenu | None = None,
    ) -> tuple[Session, tuple[str, ...]]:
        """The session changed as asked (a copy; nothing is recorded) and the changes in words.

        Each fix is computed on the session as changed by the fixes before it; an
        `explanation` or `menu` of the session as it is saves computing the first again."""
        from review_alloc.plan.explanation import FIX_KINDS, explain
        from review_alloc.plan.fixes import FIX_KEYS, fix_menu
        from review_alloc.plan.whatif import (
            add_recruits,
            allow_overload,
            apply_cap_fix,
            apply_recruit_fix,
            raise_caps,
        )

        changed = self.session
        lines: list[str] = []
        for kind in dict.fromkeys(changes.fixes):
            if kind not in FIX_KEYS:
                raise ChangeRefused([f"fix {kind!r}: choose one of {', '.join(FIX_KEYS)}"])
            if kind in FIX_KINDS and (menu is None or menu.session is not changed):
                if explanation is None or explanation.session is not changed:
                    explanation = explain(changed)
                changed, words = explanation.fix_copy(kind)
            else:
                if menu is None or menu.session is not changed:
                    menu = fix_menu(changed)
                fix = menu.get(kind)
                words = fix.changes()
                if fix.caps_fix is not None:
                    changed = apply_cap_fix(changed, fix.caps_fix)
                elif fix.recruit_fix is not None:
                    changed = apply_recruit_fix(changed, fix.recruit_fix)
            lines += words
            explanation, menu = None, None
        if changes.raise_caps:
            label = changes.labels.get("raise_caps", "raise cap")
            changed = raise_caps(changed, changes.raise_caps, label=label)
            lines += [f"raise cap of {rid} by {n}" for rid, n in changes.raise_caps.items()]
        if changes.add_reviewers:
            label = changes.labels.get("add_reviewers", "add reviewers")
            changed = add_recruits(changed, changes.add_reviewers, label=label)
            lines += [f"add {n} reviewers in '{t}'" for t, n in changes.add_reviewers.items()]
        if changes.allow_overload is not None:
            changed = allow_overload(changed, changes.allow_overload)
            lines.append(
                f"allow up to {changes.allow_overload} {self.noun}s above cap for everyone"
            )
        return changed, tuple(lines)

    def what_if(
        self,
        changes: ChangeSet,
        explanation: Explanation | None = None,
        *,
        menu: FixMenu | None = None,
    ) -> WhatIf:
        """Plan the session as it is and as changed, both on copies; nothing is recorded.

        The changed copy is planned as the re-plan that accepting would install, so what the
        preview shows is what the session gets; its `moves` say which pairs move from the
        plan the reviewers know and whom to tell.
        """
        from review_alloc.plan.whatif import what_if

        if changes.is_empty():
            raise ChangeRefused(["a what-if needs at least one change"])
        base = self.session
        changed, lines = self.changed_copy(changes, explanation, menu=menu)
        current = base.plan if base.plan is not None and self.plan_is_current() else None
        earlier = self.earlier_plan()
        result = what_if(
            base,
            changed.model_copy(update={"plan": None}),
            lines,
            before=current if current is not None and current.checked else None,
            earlier=earlier,
            warm=self.last_outcome,
        )
        return replace(result, request=changes)

    @redoable
    def accept(self, preview: WhatIf, reason: str = "", *, action: Action = "accept-fix") -> int:
        """Record a previewed what-if as one change and install its plan as one revision.

        Refused when the session changed since the preview was made. Returns the new revision
        number; one undo goes back to the revision before, its plan and its data.
        """
        if preview.base is not self.session or preview.outcome is None:
            raise ChangeRefused(["the session changed since this preview; preview it again"])
        self._take_over(
            preview.session,
            action=action,
            subject=_subject(preview),
            changes=preview.changes,
            reason=reason,
        )
        self.install_plan(preview.outcome, preview.session)
        revision = self.session.revision
        assert revision is not None
        return revision


def _subject(preview: WhatIf) -> str:
    """What an accepted what-if is called in the history: its fixes, else 'what-if'."""
    asked = preview.request
    if isinstance(asked, ChangeSet) and asked.fixes and not (
        asked.raise_caps or asked.add_reviewers or asked.allow_overload is not None
    ):
        return "+".join(dict.fromkeys(asked.fixes))
    return "what-if"
