"""The import form's options: what `review-alloc import` takes besides the files.

Each option is one line of text, empty (or "default") for the session defaults, so the form
stays one column of inputs and reads the same at 80x24; yes/no and off are words, not boxes.
The values become the same `Workspace.import_csv` arguments the command line passes: a sheet,
an encoding, a bids file, unknown columns ignored, a name, and a `Policy` of the figures and
chair rules given.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from pydantic import ValidationError
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.widgets import Button, Input, Label, Static

from review_alloc.model import Policy
from review_alloc.tui.dialogs import DialogScroll, Field, Form

_DEFAULT = ("", "default", "-")
_YES = ("yes", "y", "on", "true", "1")
_NO = ("no", "n", "off", "false", "0")


@dataclass(frozen=True)
class ImportOptions:
    """The import options chosen; empty means the command line's defaults."""

    sheet: str | None = None
    encoding: str | None = None
    bids: Path | None = None
    ignore_extra: bool = False
    name: str | None = None
    policy: dict[str, object] = field(default_factory=dict)
    """The policy fields given (the others keep `Policy`'s defaults)."""
    text: dict[str, str] = field(default_factory=dict)
    """What was typed, to show again when the form is reopened."""

    def make_policy(self) -> Policy:
        """The session's policy: the defaults with the given fields laid over them."""
        return Policy(**self.policy)

    def said(self) -> str:
        """The options in one line, as the import form shows them."""
        parts = [f"{k.replace('_', ' ')} {_shown(v)}" for k, v in self.policy.items()]
        if self.bids is not None:
            parts.append(f"bids {self.bids.name}")
        if self.sheet:
            parts.append(f"sheet {self.sheet!r}")
        if self.encoding:
            parts.append(f"encoding {self.encoding}")
        if self.ignore_extra:
            parts.append("unknown columns ignored")
        if self.name:
            parts.append(f"name {self.name!r}")
        if not parts:
            return "options: the defaults (ctrl+t or Options…: figures, chair rules, bids, sheet)"
        return "options: " + ", ".join(parts)


def _shown(value: object) -> str:
    if value is None:
        return "off"
    if isinstance(value, bool):
        return "yes" if value else "no"
    return str(value)


# (name, label, kind): kind says how the text is read; policy fields carry their Policy name.
_OPTIONS: tuple[tuple[str, str, str], ...] = (
    ("bids", "bids file (reviewer_id, paper_id, bid)", "path"),
    ("sheet", "workbook sheet (default: the first)", "text"),
    ("encoding", "CSV encoding if not UTF-8/16 (e.g. cp1252)", "text"),
    ("reviews", "reviews per paper (default 3)", "whole"),
    ("min_reviews", "min reviews per paper (default 2)", "whole"),
    ("cap", "cap: most papers per reviewer (default 6)", "whole"),
    ("floor", "floor: fewest per reviewer (default 0)", "whole"),
    ("unscored", "unscored pairs: zero or exclude", "unscored"),
    ("senior_min", "seniors wanted per paper (default 0: off)", "whole"),
    ("senior_hard", "senior rule hard: yes/no (default no)", "yesno"),
    ("max_per_institution", "most per institution per paper (off)", "limit"),
    ("require_shared_topic", "only pairs sharing a topic: yes/no", "yesno"),
    ("min_score", "min score to be eligible (default off)", "score"),
    ("balance", "load balance, score units (default 0)", "number"),
    ("bottleneck", "raise the lowest score first: yes/no", "yesno"),
    ("max_leads", "most papers one reviewer leads (default 3)", "whole"),
    ("ignore_extra", "ignore unknown columns: yes/no", "yesno"),
    ("name", "session name (default: the file's name)", "text"),
)
_NOT_POLICY = ("bids", "sheet", "encoding", "ignore_extra", "name")


def _read(kind: str, label: str, text: str) -> tuple[object, str | None]:
    """One option's value from its text, or a problem naming the option."""
    low = text.lower()
    if kind in ("text", "path"):
        return text, None
    if kind == "yesno":
        if low in _YES:
            return True, None
        if low in _NO:
            return False, None
        return None, f"{label}: {text!r} is not yes or no"
    if kind == "unscored":
        if low in ("zero", "exclude"):
            return low, None
        return None, f"{label}: {text!r} is neither zero nor exclude"
    if kind in ("limit", "score") and low == "off":
        return None, None
    decimal = kind in ("score", "number")
    try:
        number = float(text) if decimal else int(text)
    except ValueError:
        return None, f"{label}: {text!r} is not a {'number' if decimal else 'whole number'}"
    if number < 0:
        return None, f"{label}: {text} is negative"
    if kind == "limit" and number == 0:
        return None, None  # 0 means no limit, as on the command line
    return number, None


def read_options(values: dict[str, str]) -> tuple[ImportOptions | None, list[str]]:
    """The options typed into the form, checked as the command line checks them."""
    problems: list[str] = []
    given: dict[str, object] = {}
    labels = {name: label.split(" (")[0].split(":")[0] for name, label, _ in _OPTIONS}
    for name, _, kind in _OPTIONS:
        text = values.get(name, "").strip()
        if text.lower() in _DEFAULT:
            continue
        value, problem = _read(kind, labels[name], text)
        if problem:
            problems.append(problem)
        else:
            given[name] = value
    policy = {k: v for k, v in given.items() if k not in _NOT_POLICY}
    if not problems:
        try:
            Policy(**policy)
        except ValidationError as error:
            problems += [
                f"{labels.get(str(e['loc'][0]), e['loc'][0]) if e['loc'] else 'options'}: "
                f"{e['msg']}"
                for e in error.errors()
            ]
    if problems:
        return None, problems
    bids = given.get("bids")
    return (
        ImportOptions(
            sheet=str(given["sheet"]) if "sheet" in given else None,
            encoding=str(given["encoding"]) if "encoding" in given else None,
            bids=Path(str(bids)).expanduser() if bids else None,
            ignore_extra=bool(given.get("ignore_extra", False)),
            name=str(given["name"]) if "name" in given else None,
            policy=policy,
            text={k: v.strip() for k, v in values.items() if v.strip().lower() not in _DEFAULT},
        ),
        [],
    )


class ImportOptionsForm(Form):
    """The import options, one line each; OK keeps them for the import, escape drops edits."""

    # One row per option, its label beside its input, so that all of them fit a 24-line
    # screen at once (the labels are kept within the label column's width).
    DEFAULT_CSS = """
    ImportOptionsForm .option-row { height: 1; }
    ImportOptionsForm .option-row Label { width: 44; }
    ImportOptionsForm .option-row Input { width: 1fr; }
    """

    def __init__(self, current: ImportOptions, chosen: Callable[[ImportOptions], None]) -> None:
        fields = [
            Field(name, label, current.text.get(name, ""), optional=True)
            for name, label, _ in _OPTIONS
        ]
        super().__init__(
            "Import options (empty: the default)",
            fields,
            self._check,
            hint="as `review-alloc import`; yes/no and off are words; escape: back",
        )
        self.chosen = chosen

    def compose(self) -> ComposeResult:
        """Title, hint, one row per option, the problems line and the buttons."""
        with DialogScroll(classes="dialog form"):
            yield Static(Text(self.title_text, style="bold"))
            yield Static(Text(self.hint, style="dim"))
            kinds = {name: kind for name, _, kind in _OPTIONS}
            for f in self.fields:
                # An empty line shows what it means: no bids file, or the default.
                empty = "none" if kinds[f.name] == "path" else "default"
                with Horizontal(classes="option-row"):
                    yield Label(f.label)
                    yield Input(
                        value=f.value, placeholder=empty, id=f"field-{f.name}", compact=True
                    )
            yield Static("", classes="problems")
            with Horizontal(classes="buttons"):
                yield Button("OK", variant="primary", id="ok")
                yield Button("Cancel", id="cancel")

    def _check(self, values: dict[str, str]) -> list[str]:
        options, problems = read_options(values)
        if options is not None:
            self.chosen(options)
        return problems
