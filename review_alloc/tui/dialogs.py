"""Small modal forms: confirm, change two limits, declare a conflict, import CSV (with the
files' own column names mapped to ours, and the other import options), help."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Checkbox, Input, Label, Select, Static

from review_alloc.model import InputError
from review_alloc.workspace import Workspace

if TYPE_CHECKING:
    from review_alloc.tui.importopts import ImportOptions

ColumnMap = dict[str, dict[str, str]]
"""Kind of file -> our field -> the file's own column name (see `io.columns`)."""


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
    columns: ColumnMap = field(default_factory=dict)
    """The files' own column names for our fields, chosen in `ColumnsForm`."""
    options: ImportOptions | None = None
    """The command line's other import options, chosen in `ImportOptionsForm` (None: the
    defaults)."""


_FILE_KINDS = ("papers", "reviewers", "conflicts", "scores")


def columns_said(columns: Mapping[str, Mapping[str, str]]) -> str:
    """The mapping in one line, as the import form shows it."""
    if not any(columns.values()):
        return "columns: the files' own names (ctrl+o or Columns…: map other names to ours)"
    mapped = ", ".join(
        f"{kind}.{name} from {column!r}"
        for kind, fields in columns.items()
        for name, column in fields.items()
    )
    return f"columns: {mapped}"


class ColumnsForm(ModalScreen["ColumnMap | None"]):
    """Each file's header, one column per line, with our field chosen for it (or none).

    A column already named as ours starts on that field; one the mapping names starts on its
    field; the others start on "not ours". Only the columns whose name differs from the field
    chosen go into the mapping.
    """

    DEFAULT_CSS = """
    ColumnsForm .column-row { height: 1; }
    ColumnsForm .column-row Label { width: 24; padding: 0 1 0 0; }
    ColumnsForm .column-row Select { width: 1fr; }
    """
    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(
        self,
        headers: dict[str, list[str]],
        fields: dict[str, tuple[str, ...]],
        current: Mapping[str, Mapping[str, str]],
    ) -> None:
        super().__init__()
        self.headers, self.fields, self.current = headers, fields, current

    def _start(self, kind: str, column: str) -> str | None:
        folded = column.strip().lower()
        for name, theirs in self.current.get(kind, {}).items():
            if theirs.strip().lower() == folded:
                return name
        return folded if folded in self.fields[kind] else None

    def compose(self) -> ComposeResult:
        """Per file, its columns and a choice of our fields beside each."""
        with DialogScroll(classes="dialog form"):
            yield Static(Text("Which of our fields is each column?", style="bold"))
            yield Static(Text("tab moves, enter opens a choice; escape cancels", style="dim"))
            for kind, header in self.headers.items():
                yield Static(Text(f"{kind} file", style="bold underline"))
                options = [(name, name) for name in self.fields[kind]]
                for k, column in enumerate(header):
                    start = self._start(kind, column)
                    with Horizontal(classes="column-row"):
                        yield Label(column or f"(column {k + 1}, no name)")
                        ident = f"map-{kind}-{k}"
                        if start is None:
                            yield Select(options, prompt="not one of ours", compact=True, id=ident)
                        else:
                            yield Select(
                                options,
                                prompt="not one of ours",
                                value=start,
                                compact=True,
                                id=ident,
                            )
            yield Static("", classes="problems")
            with Horizontal(classes="buttons"):
                yield Button("OK", variant="primary", id="ok")
                yield Button("Cancel", id="cancel")

    def chosen(self) -> tuple[ColumnMap, list[str]]:
        """The mapping chosen, and what is wrong with it (a field chosen for two columns)."""
        mapping: ColumnMap = {}
        problems: list[str] = []
        for kind, header in self.headers.items():
            taken: dict[str, str] = {}
            for k, column in enumerate(header):
                name = self.query_one(f"#map-{kind}-{k}", Select).value
                if not isinstance(name, str):
                    continue
                if name in taken:
                    problems.append(
                        f"{kind}: {name} is chosen for both {taken[name]!r} and {column!r}"
                    )
                taken[name] = column
                if column.strip().lower() != name:
                    mapping.setdefault(kind, {})[name] = column.strip()
        return mapping, problems

    @on(Button.Pressed, "#ok")
    def _ok(self) -> None:
        mapping, problems = self.chosen()
        if problems:
            self.query_one(".problems", Static).update(Text("\n".join(problems), style="red"))
        else:
            self.dismiss(mapping)

    @on(Button.Pressed, "#cancel")
    def _cancel_button(self) -> None:
        self.dismiss(None)

    def action_cancel(self) -> None:
        """Close, keeping the mapping as it was."""
        self.dismiss(None)


def panel_label(panel: bool) -> str:
    """The import form's panel switch, its state in words (not by colour alone)."""
    if panel:
        return "grant panel: YES (the session says 'proposal'; space: no)"
    return "grant panel: NO (a conference, says 'paper'; space: yes)"


class ImportForm(Form):
    """Build a session from CSV files, with the same row-level errors as the command line.

    "Columns" reads each file's header and lets the chair choose our field for each column;
    the mapping starts from the open session's, so newer files from the same system need no
    mapping again."""

    BINDINGS = [
        Binding("ctrl+o", "columns", "Columns"),
        Binding("ctrl+t", "options", "Options"),
    ]

    def __init__(
        self,
        importer: Callable[[ImportFiles], list[str]],
        columns: Mapping[str, Mapping[str, str]] | None = None,
    ) -> None:
        fields = [
            Field("papers", "papers CSV (paper_id,title,topics,reviews,min_reviews)"),
            Field("reviewers", "reviewers CSV (reviewer_id,name,email,institution,...)"),
            Field("conflicts", "conflicts CSV (reviewer_id,paper_id,reason)", optional=True),
            Field("scores", "scores CSV (reviewer_id,paper_id,score)", optional=True),
            Field("target", "save the new session as (a .json file)"),
        ]
        super().__init__("Import a session from CSV files", fields, self._import)
        self.importer = importer
        self.columns: ColumnMap = {k: dict(v) for k, v in (columns or {}).items() if v}
        self.options = _import_options()()

    def on_mount(self) -> None:
        """Add the panel switch and the column mapping above the problems line, and the
        columns button after OK and Cancel."""
        problems = self.query_one(".problems", Static)
        body = self.query_one(".dialog", DialogScroll)
        body.mount(Checkbox(panel_label(False), id="panel"), before=problems)
        body.mount(Static(self._columns_text(), id="columns-said"), before=problems)
        body.mount(Static(Text(self.options.said()), id="options-said"), before=problems)
        buttons = self.query_one(".buttons", Horizontal)
        buttons.mount(Button("Columns…", id="columns"))
        buttons.mount(Button("Options…", id="options"))

    def _columns_text(self) -> Text:
        return Text(columns_said(self.columns))

    @on(Button.Pressed, "#columns")
    def _columns_button(self) -> None:
        self.action_columns()

    def action_columns(self) -> None:
        """Read the header of every file given and open the column choice."""
        values = self.values()
        headers: dict[str, list[str]] = {}
        problems: list[str] = []
        given = {kind: values[kind] for kind in _FILE_KINDS if values[kind]}
        if self.options.bids is not None:
            # The bids file is chosen among the options; its columns map here like the rest.
            given["bids"] = str(self.options.bids)
        for kind, path in given.items():
            try:
                headers[kind] = Workspace.file_header(
                    Path(path).expanduser(), kind, sheet=self.options.sheet or None
                )
            except InputError as error:
                problems += error.lines
        if not headers and not problems:
            problems.append("give the files first: their headers are what you map")
        if problems:
            self.query_one(".problems", Static).update(Text("\n".join(problems), style="red"))
            return
        self.query_one(".problems", Static).update("")
        self.app.push_screen(
            ColumnsForm(headers, Workspace.import_fields(), self.columns), self._mapped
        )

    @on(Button.Pressed, "#options")
    def _options_button(self) -> None:
        self.action_options()

    def action_options(self) -> None:
        """Open the command line's other import options (figures, chair rules, bids, ...)."""
        from review_alloc.tui.importopts import ImportOptionsForm

        self.app.push_screen(ImportOptionsForm(self.options, self._options_chosen))

    def _options_chosen(self, options: ImportOptions) -> None:
        self.options = options
        self.query_one("#options-said", Static).update(Text(options.said()))

    def _mapped(self, mapping: ColumnMap | None) -> None:
        if mapping is None:
            return
        self.columns = mapping
        self.query_one("#columns-said", Static).update(self._columns_text())

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
                columns=self.columns,
                options=self.options,
            )
        )


def _import_options() -> type[ImportOptions]:
    """The options class, imported when first used: its module builds on this one's `Form`."""
    from review_alloc.tui.importopts import ImportOptions

    return ImportOptions


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
