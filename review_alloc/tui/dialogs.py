"""Small modal forms: confirm, change two limits, declare a conflict, import CSV, help."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Checkbox, Input, Label, Static


class Confirm(ModalScreen[bool]):
    """A yes/no question; escape answers no."""

    BINDINGS = [Binding("escape", "answer(False)", "No"), Binding("y", "answer(True)", "Yes")]

    def __init__(self, question: str, yes: str = "Yes", no: str = "No") -> None:
        super().__init__()
        self.question, self.yes, self.no = question, yes, no

    def compose(self) -> ComposeResult:
        """The question and two buttons."""
        with Vertical(classes="dialog"):
            yield Static(self.question, classes="question")
            # Only the keys this dialog itself answers to.
            yield Static(
                Text(f"y: {self.yes} · escape: {self.no} · tab and enter choose", style="dim"),
                classes="keys",
            )
            with Horizontal(classes="buttons"):
                yield Button(self.yes, variant="warning", id="yes")
                yield Button(self.no, variant="primary", id="no")

    def on_mount(self) -> None:
        """Start on the safe answer."""
        self.query_one("#no", Button).focus()

    @on(Button.Pressed)
    def _pressed(self, event: Button.Pressed) -> None:
        self.dismiss(event.button.id == "yes")

    def action_answer(self, answer: bool) -> None:
        """Answer by key."""
        self.dismiss(answer)


class DialogScroll(VerticalScroll, can_focus=False):
    """A form's body: scrolls to the focused field, but is no stop of its own for tab."""


@dataclass(frozen=True)
class Field:
    """One line of a form: its label, current text and whether it may be left empty."""

    name: str
    label: str
    value: str = ""
    optional: bool = False


FormCheck = Callable[[dict[str, str]], list[str]]
"""Applies a submitted form; returns problems to show (empty when done)."""


class Form(ModalScreen[bool]):
    """A few labelled lines and an OK button; the caller's check applies them or says why not.

    The form stays open while the check returns problems, so the chair can correct a value.
    """

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, fields: list[Field], apply: FormCheck, hint: str = "") -> None:
        super().__init__()
        self.title_text, self.fields, self.apply, self.hint = title, fields, apply, hint

    def compose(self) -> ComposeResult:
        """Title, one input per field, the problems line and the buttons."""
        # Scrolls when the screen is too short (the import form at 80x24), so the buttons and
        # the problems line can always be reached; the focused field is scrolled into view.
        with DialogScroll(classes="dialog form"):
            yield Static(Text(self.title_text, style="bold"))
            if self.hint:
                yield Static(Text(self.hint, style="dim"))
            for f in self.fields:
                yield Label(f.label + (" (optional)" if f.optional else ""))
                yield Input(value=f.value, id=f"field-{f.name}", compact=True)
            yield Static("", classes="problems")
            with Horizontal(classes="buttons"):
                yield Button("OK", variant="primary", id="ok")
                yield Button("Cancel", id="cancel")

    def on_mount(self) -> None:
        """Start in the first field, so typing goes there at once."""
        if self.fields:
            self.query_one(f"#field-{self.fields[0].name}", Input).focus()

    def values(self) -> dict[str, str]:
        """The text of every field, stripped."""
        return {
            f.name: self.query_one(f"#field-{f.name}", Input).value.strip() for f in self.fields
        }

    def _submit(self) -> None:
        values = self.values()
        missing = [f.label for f in self.fields if not f.optional and not values[f.name]]
        problems = [f"{m}: required" for m in missing] or self.apply(values)
        if problems:
            shown = problems[:6] + (
                [f"... and {len(problems) - 6} more"] if len(problems) > 6 else []
            )
            self.query_one(".problems", Static).update(Text("\n".join(shown), style="red"))
        else:
            self.dismiss(True)

    @on(Input.Submitted)
    def _enter(self) -> None:
        self._submit()

    @on(Button.Pressed, "#ok")
    def _ok(self) -> None:
        self._submit()

    @on(Button.Pressed, "#cancel")
    def _cancel_button(self) -> None:
        self.dismiss(False)

    def action_cancel(self) -> None:
        """Close without change."""
        self.dismiss(False)


def whole_or_default(text: str, name: str) -> tuple[int | None, list[str]]:
    """A form value as a whole number, None for 'default'/empty, or a problem line."""
    if text in ("", "default", "-"):
        return None, []
    try:
        value = int(text)
    except ValueError:
        return None, [f"{name}: {text!r} is not a whole number"]
    if value < 0:
        return None, [f"{name}: {value} is negative"]
    return value, []


@dataclass(frozen=True)
class ImportFiles:
    """What the import form asks for: the CSV files, where to save, and the session's kind."""

    papers: Path
    reviewers: Path
    conflicts: Path | None
    scores: Path | None
    target: Path
    panel: bool


def panel_label(panel: bool) -> str:
    """The import form's panel switch, its state in words (not by colour alone)."""
    if panel:
        return "grant panel: YES (the session says 'proposal'; space: no)"
    return "grant panel: NO (a conference, says 'paper'; space: yes)"


class ImportForm(Form):
    """Build a session from CSV files, with the same row-level errors as the command line."""

    def __init__(self, importer: Callable[[ImportFiles], list[str]]) -> None:
        fields = [
            Field("papers", "papers CSV (paper_id,title,topics,reviews,min_reviews)"),
            Field("reviewers", "reviewers CSV (reviewer_id,name,email,institution,...)"),
            Field("conflicts", "conflicts CSV (reviewer_id,paper_id,reason)", optional=True),
            Field("scores", "scores CSV (reviewer_id,paper_id,score)", optional=True),
            Field("target", "save the new session as (a .json file)"),
        ]
        super().__init__("Import a session from CSV files", fields, self._import)
        self.importer = importer

    def on_mount(self) -> None:
        """Add the panel switch above the problems line."""
        self.query_one(".dialog", DialogScroll).mount(
            Checkbox(panel_label(False), id="panel"),
            before=self.query_one(".problems", Static),
        )

    @on(Checkbox.Changed, "#panel")
    def _panel_changed(self, event: Checkbox.Changed) -> None:
        # The box's mark differs only by colour; the words say the state.
        event.checkbox.label = panel_label(event.value)

    def _import(self, values: dict[str, str]) -> list[str]:
        """Hand the files to the app's importer; its problem lines stay in the form."""
        return self.importer(
            ImportFiles(
                papers=Path(values["papers"]).expanduser(),
                reviewers=Path(values["reviewers"]).expanduser(),
                conflicts=Path(values["conflicts"]).expanduser() if values["conflicts"] else None,
                scores=Path(values["scores"]).expanduser() if values["scores"] else None,
                target=Path(values["target"]).expanduser(),
                panel=self.query_one("#panel", Checkbox).value,
            )
        )


class HelpScreen(ModalScreen[None]):
    """Every key of the app, by where it works."""

    BINDINGS = [Binding("escape,q,question_mark,f1", "close", "Close")]

    def __init__(self, sections: list[tuple[str, list[tuple[str, str]]]]) -> None:
        super().__init__()
        self.sections = sections

    def compose(self) -> ComposeResult:
        """The key table, scrollable."""
        text = Text()
        text.append(
            "Keys  (escape closes; the mouse works too: click tabs, rows, headers)\n\n",
            style="bold",
        )
        for title, keys in self.sections:
            text.append(title + "\n", style="bold underline")
            for key, what in keys:
                text.append(f"  {key:<16}", style="bold cyan")
                text.append(what + "\n")
            text.append("\n")
        with VerticalScroll(classes="dialog help"):
            yield Static(text, id="help-text")

    def action_close(self) -> None:
        """Back to the app."""
        self.dismiss(None)
