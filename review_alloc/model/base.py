"""Shared pydantic settings and field normalisers for the document models.

The character rules behind these types live in `model.text` (matched versus free text).
"""

from __future__ import annotations

from typing import Annotated

from pydantic import AfterValidator, BaseModel, ConfigDict

from review_alloc.model.text import free_text, matched_text, matched_text_problem, nfc


class DocumentModel(BaseModel):
    """Base of every document model: unknown fields are refused so that typos in a file surface."""

    model_config = ConfigDict(extra="forbid")


def _identifier(value: str) -> str:
    text = matched_text(value)
    if not text:
        raise ValueError("must not be empty")
    return text


def _clean_list(values: list[str]) -> list[str]:
    # Order is kept (it is what the user wrote); blanks and repeats carry no meaning.
    seen: dict[str, None] = {}
    for k, value in enumerate(values):
        try:
            text = matched_text(value)
        except ValueError as error:
            raise ValueError(f"entry {k + 1}: {error}") from None
        if text:
            seen.setdefault(text, None)
    return list(seen)


def check_email(value: str) -> str:
    """Strip and lower-case an e-mail address; refuse text that cannot be one (`local@domain`).

    Invisible and control characters are refused first (see `model.text`): an address with a
    zero-width space looks right and matches no author.
    """
    text = nfc(value).strip()
    problem = matched_text_problem(text)
    if problem is not None:
        raise ValueError(problem)
    folded = text.lower()
    local, at, domain = folded.partition("@")
    if not at or not local or not domain or "@" in domain or any(c.isspace() for c in folded):
        raise ValueError(f"{text!r} is not an e-mail address (expected name@domain)")
    return folded


def _optional_email(value: str) -> str:
    return check_email(value) if value.strip() else ""


def _email_list(values: list[str]) -> list[str]:
    return _clean_list([check_email(v) for v in values if v.strip()])


Identifier = Annotated[str, AfterValidator(_identifier)]
"""A non-empty id: matched text (NFC, no invisible or control characters), stripped."""

MatchedText = Annotated[str, AfterValidator(matched_text)]
"""Text that rules compare (an institution): NFC, no invisible or control characters, stripped;
may be empty."""

Text = Annotated[str, AfterValidator(free_text)]
"""Free text (a title, a name, a reason): NFC, invisible and control characters removed,
stripped."""

TextList = Annotated[list[str], AfterValidator(_clean_list)]
"""Matched text entries (topics, institutions): stripped, non-empty, de-duplicated, in their
given order."""

Email = Annotated[str, AfterValidator(_optional_email)]
"""An e-mail address stored lower-cased, or empty."""

EmailList = Annotated[list[str], AfterValidator(_email_list)]
"""E-mail addresses stored lower-cased, de-duplicated."""
