"""Session files: atomic writes, loading with user-facing errors, saving, and the JSON schema."""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from review_alloc.model.errors import InputError, validation_error_lines
from review_alloc.model.session import FORMAT_VERSION, Session

_DEFAULT_UMASK = 0o022


def _umask() -> int:
    # os.umask can only be read by setting it, which races with other threads; Linux shows it.
    with contextlib.suppress(OSError, ValueError):
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    return _DEFAULT_UMASK


def _fsync_directory(folder: Path) -> None:
    # Makes the rename itself durable; not every platform can open a directory for this.
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        # Some file systems refuse fsync on a directory; the rename has still happened.
        with contextlib.suppress(OSError):
            os.fsync(fd)
    finally:
        os.close(fd)


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> None:
    """Write `data` to `path` so that readers see either the old file or the new one, whole.

    The bytes go to a temporary file in the same folder, which is flushed, fsync'ed and renamed
    over the target; the folder is fsync'ed too. On any failure the temporary file is removed,
    the previous file is left untouched, and the exception propagates.
    """
    target = Path(path)
    folder = target.parent
    try:
        mode = target.stat().st_mode & 0o7777
    except FileNotFoundError:
        mode = 0o666 & ~_umask()
    fd, temp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temp_name, mode)
        os.replace(temp_name, target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(temp_name)
        raise
    _fsync_directory(folder)


def atomic_write_text(path: str | os.PathLike[str], text: str, encoding: str = "utf-8") -> None:
    """`atomic_write_bytes` for text."""
    atomic_write_bytes(path, text.encode(encoding))


def _format_line(source: str, error: ValidationError) -> list[str] | None:
    for item in error.errors(include_url=False):
        if tuple(item["loc"]) == ("format_version",) and item["type"] == "literal_error":
            found = item.get("input")
            return [
                f"{source}: format_version: this file is format {found!r}; "
                f"this version reads format {FORMAT_VERSION}"
            ]
    return None


def load_session(path: str | os.PathLike[str]) -> Session:
    """Read and validate a session file; any problem becomes an `InputError` naming the field."""
    source = str(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError([f"{source}: no such file"]) from None
    except IsADirectoryError:
        raise InputError([f"{source}: is a folder, not a session file"]) from None
    except OSError as error:
        raise InputError([f"{source}: cannot read ({error.strerror or error})"]) from None
    if not data.strip():
        raise InputError([f"{source}: the file is empty; expected a session document (JSON)"])
    try:
        return Session.model_validate_json(data)
    except ValidationError as error:
        # A file from another format version fails everywhere; its version is the one message.
        lines = _format_line(source, error) or validation_error_lines(source, error)
        raise InputError(lines) from None


def session_bytes(session: Session) -> bytes:
    """The session document as UTF-8 JSON, as `save_session` writes it."""
    return session.model_dump_json(indent=1).encode("utf-8") + b"\n"


def save_session(session: Session, path: str | os.PathLike[str]) -> None:
    """Save atomically: the previous file stays intact if anything fails on the way."""
    data = session_bytes(session)
    try:
        atomic_write_bytes(path, data)
    except OSError as error:
        raise InputError([f"{path}: cannot save ({error.strerror or error})"]) from None


def session_json_schema() -> dict[str, Any]:
    """The JSON schema of the session document (validation side)."""
    return Session.model_json_schema()
