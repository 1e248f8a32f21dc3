"""One way for a benchmark to put its section into RESULTS.md."""

from __future__ import annotations

from pathlib import Path

RESULTS = Path(__file__).resolve().parent / "RESULTS.md"


def write_section(title: str, body: str, path: Path = RESULTS) -> None:
    """Replace the section headed `title` (up to the next "## " heading) by `title` and `body`,
    in place; add it at the end when the file has none yet. The rest of the file is kept."""
    text = path.read_text(encoding="utf-8")
    section = f"{title}\n\n{body.strip(chr(10))}\n"
    if title in text:
        head, rest = text.split(title, 1)
        tail = rest.split("\n## ", 1)
        text = head + section + ("\n## " + tail[1] if len(tail) > 1 else "")
    else:
        text = text.rstrip("\n") + "\n\n" + section
    path.write_text(text, encoding="utf-8")
