"""The one exception for bad user input, and the translation of pydantic errors into its lines."""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from pydantic import ValidationError

MAX_LINES_PER_FILE = 20
"""How many problems of one file are listed before the rest are summed up in one line."""

_VALUE_ERROR_PREFIX = "Value error, "


class InputError(Exception):
    """Bad user input; each line names the file, the place (line, column, field) and the fault."""

    def __init__(self, lines: Sequence[str] | str) -> None:
        self.lines: list[str] = [lines] if isinstance(lines, str) else list(lines)
        if not self.lines:
            raise ValueError("InputError needs at least one line")
        super().__init__("\n".join(self.lines))

    def __str__(self) -> str:
        return "\n".join(self.lines)


def capped_lines(source: str, lines: Sequence[str], limit: int = MAX_LINES_PER_FILE) -> list[str]:
    """The first `limit` lines, then one that counts the rest (`... and N more errors in F`)."""
    if len(lines) <= limit:
        return list(lines)
    rest = len(lines) - limit
    noun = "error" if rest == 1 else "errors"
    return [*lines[:limit], f"... and {rest} more {noun} in {source}"]


def _loc_text(loc: Iterable[int | str]) -> str:
    return ".".join(str(part) for part in loc)


def validation_error_lines(
    source: str, error: ValidationError, limit: int = MAX_LINES_PER_FILE
) -> list[str]:
    """Turn a pydantic `ValidationError` into `"<source>: <field.path>: <message>"` lines.

    A model validator of ours may report several problems at once as one message whose lines
    are already `"<field.path>: <message>"`; those are split and prefixed with `source` too.
    """
    lines: list[str] = []
    for item in error.errors(include_url=False):
        message = str(item["msg"])
        if message.startswith(_VALUE_ERROR_PREFIX):
            message = message[len(_VALUE_ERROR_PREFIX) :]
        where = _loc_text(item["loc"])
        for part in message.split("\n"):
            lines.append(f"{source}: {where}: {part}" if where else f"{source}: {part}")
    return capped_lines(source, lines, limit)
