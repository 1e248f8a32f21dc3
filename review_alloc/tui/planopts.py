"""The plan-options dialog: the optimal plan, a randomised plan with a probability cap and a
seed, or the fairest plan for the worst-off paper (the Workspace's `solve` options)."""

from __future__ import annotations

import math
from dataclasses import dataclass

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import ModalScreen
from textual.widgets import Button, Checkbox, Input, Label, RadioButton, RadioSet, Static

from review_alloc.plan.cautions import FAIR_CAUTION, RANDOM_CAUTION
from review_alloc.tui.dialogs import DialogScroll

MODES = ("optimal", "randomised", "fairest")
"""The kinds of plan a chair can ask for, in the order the dialog lists them."""

_MODE_LABELS = {
    "optimal": "optimal: the highest total score",
    "randomised": "randomised: cap each pair's chance at Q",
    "fairest": "fairest: the worst-off paper first",
}


class MarkedRadio(RadioButton):
    """A radio button whose choice shows by its mark, not by colour alone."""

    @property
    def BUTTON_INNER(self) -> str:  # noqa: N802 (the name textual draws the mark from)
        """'●' when chosen, a blank otherwise."""
        return "●" if self.value else " "


class MarkedCheckbox(Checkbox):
    """A check box whose state shows by its mark, not by colour alone."""

    @property
    def BUTTON_INNER(self) -> str:  # noqa: N802 (the name textual draws the mark from)
        """'X' when ticked, a blank otherwise."""
        return "X" if self.value else " "


@dataclass(frozen=True)
class PlanChoice:
    """What the chair asked for: the kind of plan and its options."""

    mode: str
    max_probability: float | None = None
    seed: int | None = None
    fresh: bool = False


def read_choice(mode: str, cap: str, seed: str, fresh: bool) -> tuple[PlanChoice | None, list[str]]:
    """The dialog's fields as a choice, or the problems that keep them from being one."""
    if mode != "randomised":
        return PlanChoice(mode, fresh=fresh), []
    problems: list[str] = []
    q: float | None = None
    try:
        q = float(cap)
    except ValueError:
        problems.append(f"probability cap: {cap!r} is not a number (e.g. 0.5)")
    if q is not None and not (math.isfinite(q) and 0 < q <= 1):
        problems.append(f"probability cap: {cap} must be above 0 and at most 1")
    number: int | None = None
    if seed:
        try:
            number = int(seed)
        except ValueError:
            problems.append(f"seed: {seed!r} is not a whole number")
        if number is not None and number < 0:
            problems.append(f"seed: {seed} must be 0 or more")
    if problems:
        return None, problems
    return PlanChoice(mode, max_probability=q, seed=number, fresh=fresh), []


class PlanOptions(ModalScreen[PlanChoice | None]):
    """Choose the kind of plan; escape leaves without planning."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(
        self, *, mode: str = "optimal", cap: float | None = None, seed: int | None = None
    ) -> None:
        super().__init__()
        self.mode = mode if mode in MODES else "optimal"
        self.cap_text = "" if cap is None else f"{cap:g}"
        self.seed_text = "" if seed is None else str(seed)

    def compose(self) -> ComposeResult:
        """The kinds of plan, the randomised plan's cap and seed, fresh, the caution, buttons."""
        with DialogScroll(classes="dialog form plan-options"):
            yield Static(Text("Plan options", style="bold"))
            with RadioSet(id="plan-mode"):
                for mode in MODES:
                    chosen = mode == self.mode
                    yield MarkedRadio(_MODE_LABELS[mode], value=chosen, id=f"mode-{mode}")
            yield Label("probability cap Q for the randomised plan (above 0, at most 1)")
            yield Input(value=self.cap_text or "0.5", id="plan-cap", compact=True)
            yield Label("seed (optional; empty: a new one, kept with the plan)")
            yield Input(value=self.seed_text, id="plan-seed", compact=True)
            yield MarkedCheckbox("fresh: ignore the current revision's pairs", id="plan-fresh")
            yield Static("", classes="plan-caution")
            yield Static("", classes="problems")
            with Horizontal(classes="buttons"):
                yield Button("Plan", variant="primary", id="ok")
                yield Button("Cancel", id="cancel")

    def on_mount(self) -> None:
        """Start on the kinds of plan, with the chosen kind's caution shown."""
        radio = self.query_one(RadioSet)
        # The keyboard highlight starts on the first line when the set is mounted; its own
        # navigation action moves it to the plan's own kind, as the down key would.
        for _ in range(MODES.index(self.mode)):
            radio.action_next_button()
        radio.focus()
        self._show_caution()

    def chosen_mode(self) -> str:
        """The kind of plan the radio buttons say."""
        pressed = self.query_one(RadioSet).pressed_button
        if pressed is None or pressed.id is None:
            return self.mode
        return pressed.id.removeprefix("mode-")

    def _show_caution(self) -> None:
        mode = self.chosen_mode()
        caution = {"randomised": RANDOM_CAUTION, "fairest": FAIR_CAUTION}.get(mode, "")
        self.query_one(".plan-caution", Static).update(Text(caution, style="yellow"))
        randomised = mode == "randomised"
        self.query_one("#plan-cap", Input).disabled = not randomised
        self.query_one("#plan-seed", Input).disabled = not randomised

    @on(RadioSet.Changed)
    def _mode_changed(self) -> None:
        self._show_caution()

    def _submit(self) -> None:
        choice, problems = read_choice(
            self.chosen_mode(),
            self.query_one("#plan-cap", Input).value.strip(),
            self.query_one("#plan-seed", Input).value.strip(),
            self.query_one("#plan-fresh", Checkbox).value,
        )
        if choice is None:
            self.query_one(".problems", Static).update(Text("\n".join(problems), style="red"))
            return
        self.dismiss(choice)

    @on(Input.Submitted)
    def _enter(self) -> None:
        self._submit()

    @on(Button.Pressed, "#ok")
    def _ok(self) -> None:
        self._submit()

    @on(Button.Pressed, "#cancel")
    def _cancel_button(self) -> None:
        self.dismiss(None)

    def action_cancel(self) -> None:
        """Close without planning."""
        self.dismiss(None)
