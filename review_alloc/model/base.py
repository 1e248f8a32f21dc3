"""Shared pydantic settings and field normalisers for the document models."""

from __future__ import annotations

from typing import Annotated

from pydantic import AfterValidator, BaseModel, ConfigDict


class DocumentModel(BaseModel):
    """Base of every document model: unknown fields are refused so that typos in a file surface."""

    model_config = ConfigDict(extra="forbid")


def _identifier(value: str) -> str:
    text = value.strip()
    if not text:
        raise ValueError("must not be empty")
    return text


def _stripped(value: str) -> str:
    return value.strip()


def _clean_list(values: list[str]) -> list[str]:
    # Order is kept (it is what the user wrote); blanks and repeats carry no meaning.
    seen: dict[str, None] = {}
    for value in values:
        text = value.strip()
        if text:
            seen.setdefault(text, None)
    return list(seen)


def check_email(value: str) -> str:
    """Strip and lower-case an e-mail address; refuse text that cannot be one (`local@domain`)."""
    text = value.strip().lower()
    local, at, domain = text.partition("@")
    if not at or not local or not domain or "@" in domain or any(c.isspace() for c in text):
        raise ValueError(f"{value.strip()!r} is not an e-mail address (expected name@domain)")
    return text


def _optional_email(value: str) -> str:
    return check_email(value) if value.strip() else ""


def _email_list(values: list[str]) -> list[str]:
    return _clean_list([check_email(v) for v in values if v.strip()])


Identifier = Annotated[str, AfterValidator(_identifier)]
"""A non-empty id with surrounding whitespace removed."""

Text = Annotated[str, AfterValidator(_stripped)]
"""Free text with surrounding whitespace removed."""

TextList = Annotated[list[str], AfterValidator(_clean_list)]
"""Stripped, non-empty, de-duplicated entries in their given order."""

Email = Annotated[str, AfterValidator(_optional_email)]
"""An e-mail address stored lower-cased, or empty."""

EmailList = Annotated[list[str], AfterValidator(_email_list)]
"""E-mail addresses stored lower-cased, de-duplicated."""
