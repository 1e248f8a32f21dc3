"""The character rules for every text a session holds, written once for import and for load.

Two kinds of text, two rules:

- **Matched text** (ids, e-mail addresses, institutions, topics, public mail domains, and the
  ids inside conflicts, scores, pins, blocks and plans) is compared with other text: it decides
  which pairs conflict and which ids name the same paper. It is NFC-normalised (Unicode
  Standard Annex #15), so an id typed in composed and in decomposed form is one id, and it must
  not contain an invisible format character (Unicode general category Cf, as `unicodedata`
  reports it: zero-width space, joiner and non-joiner, soft hyphen, byte-order mark, bidi
  controls), a control character (Cc: NUL, tab, line breaks, escape, ...) or a lone surrogate
  (Cs). Such characters make two equal-looking values differ, which silently hides a conflict
  of interest, so the value is refused with the character named, never repaired: repairing
  would guess which of two spellings the chair meant.
- **Free text** (titles, names, reasons, event notes) is only read by people. It is
  NFC-normalised and loses its Cf characters, lone surrogates and control characters other than
  tab and line breaks (NUL, escape, ...), without a message: they carry nothing a reader sees,
  bidi controls can make a title read differently from what it holds, escape sequences could
  drive a terminal, and a soft hyphen pasted from a PDF is no reason to refuse an import.

Case is kept; folding case for matching is the conflict rules' business (`plan.conflicts`).
"""

from __future__ import annotations

import unicodedata

_FREE_TEXT_CONTROLS_KEPT = frozenset("\t\n\r")

_NAMES = {
    0x00: "null",
    0x09: "tab",
    0x0A: "line feed",
    0x0D: "carriage return",
    0x1B: "escape",
    0x7F: "delete",
    0xAD: "soft hyphen",
    0x200B: "zero-width space",
    0x200C: "zero-width non-joiner",
    0x200D: "zero-width joiner",
    0x200E: "left-to-right mark",
    0x200F: "right-to-left mark",
    0x2060: "word joiner",
    0xFEFF: "byte-order mark",
}


def character_name(char: str) -> str:
    """A short readable name of one character (`zero-width space`, `null`)."""
    code = ord(char)
    if code in _NAMES:
        return _NAMES[code]
    name = unicodedata.name(char, "")
    return name.lower() if name else "unnamed character"


def _kind(char: str) -> str | None:
    """'invisible' for Cf, 'control' for Cc, 'broken' for a lone surrogate (Cs), else None."""
    if char.isprintable():
        # Fast path: Python counts every Cf, Cc and Cs character as non-printable.
        return None
    category = unicodedata.category(char)
    if category == "Cf":
        return "invisible"
    if category == "Cc":
        return "control"
    if category == "Cs":
        return "broken"
    return None


def nfc(text: str) -> str:
    """`text` in Unicode normalisation form C (cheap when it already is, as ASCII always is)."""
    return text if unicodedata.is_normalized("NFC", text) else unicodedata.normalize("NFC", text)


def matched_text_problem(text: str) -> str | None:
    """Why `text` cannot be matched text (an invisible or control character), or None."""
    if text.isascii() and text.isprintable():
        return None
    for at, char in enumerate(text, start=1):
        kind = _kind(char)
        if kind is None:
            continue
        what = {
            "invisible": "the invisible character",
            "control": "the control character",
            "broken": "the unpaired surrogate",
        }[kind]
        return (
            f"contains {what} U+{ord(char):04X} ({character_name(char)}) at character {at}; "
            "such characters make equal-looking values differ, so retype the value without it"
        )
    return None


def matched_text(text: str) -> str:
    """Matched text in its stored form (NFC, stripped); ValueError naming a refused character."""
    value = nfc(text).strip()
    problem = matched_text_problem(value)
    if problem is not None:
        raise ValueError(problem)
    return value


def free_text(text: str) -> str:
    """Free text in its stored form: NFC, without Cf, Cs and most Cc characters, stripped."""
    if not (text.isascii() and text.isprintable()):
        text = "".join(
            char
            for char in text
            if (kind := _kind(char)) is None
            or (kind == "control" and char in _FREE_TEXT_CONTROLS_KEPT)
        )
        text = nfc(text)
    return text.strip()
