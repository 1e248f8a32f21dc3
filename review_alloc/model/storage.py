"""Session files: atomic writes, loading with user-facing errors, saving, and the JSON schema."""

from __future__ import annotations

import contextlib
import os
import stat
import tempfile
import time
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from review_alloc.model.errors import InputError, validation_error_lines
from review_alloc.model.session import FORMAT_VERSION, Session

try:
    import fcntl
except ImportError:  # pragma: no cover - not on POSIX; leftovers are then judged by age alone
    fcntl = None  # type: ignore[assignment]

_DEFAULT_UMASK = 0o022
LEFTOVER_AGE = 60.0
"""Seconds after which an unlocked temporary file of a save counts as left over by a killed
process (a live save holds a lock on its temporary file and takes seconds at most)."""
_BOM = b"\xef\xbb\xbf"


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


def _lock(fd: int, wait: bool) -> bool:
    """Take an exclusive advisory lock on an open file; False when another process holds it."""
    if fcntl is None:
        return True
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | (0 if wait else fcntl.LOCK_NB))
    except OSError:
        return False
    return True


def _temp_prefix(target: Path) -> str:
    return f".{target.name}."


def remove_leftovers(path: str | os.PathLike[str], older_than: float = LEFTOVER_AGE) -> list[Path]:
    """Remove the temporary files a killed save of `path` left beside it; returns them.

    A candidate is named like ours (`.NAME.*.tmp`), is a plain file, was last changed more than
    `older_than` seconds ago and is not locked: a save in progress holds a lock on its file, and
    the lock dies with the process that held it.
    """
    target = Path(os.path.realpath(path))
    prefix = _temp_prefix(target)
    removed: list[Path] = []
    try:
        names = [n for n in os.listdir(target.parent) if n.startswith(prefix)]
    except OSError:
        return removed
    now = time.time()
    for name in names:
        if not name.endswith(".tmp"):
            continue
        candidate = target.parent / name
        try:
            fd = os.open(candidate, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        except OSError:
            continue
        try:
            info = os.fstat(fd)
            old = now - info.st_mtime > older_than
            if old and stat.S_ISREG(info.st_mode) and _lock(fd, wait=False):
                # Still the same file after the lock (not replaced by a new save meanwhile).
                with contextlib.suppress(OSError):
                    if os.stat(candidate, follow_symlinks=False).st_ino == info.st_ino:
                        os.unlink(candidate)
                        removed.append(candidate)
        finally:
            os.close(fd)
    return removed


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> None:
    """Write `data` to `path` so that readers see either the old file or the new one, whole.

    The bytes go to a temporary file in the same folder, which is flushed, fsync'ed and renamed
    over the target; the folder is fsync'ed too. On any failure the temporary file is removed,
    the previous file is left untouched, and the exception propagates. When `path` is a
    symbolic link, the file it points to is written and the link stays a link. Temporary files
    that a killed save of the same target left behind are removed (`remove_leftovers`).
    """
    # Renaming over a link would replace the link with a plain file; write where it points.
    target = Path(os.path.realpath(path))
    folder = target.parent
    try:
        mode = target.stat().st_mode & 0o7777
    except FileNotFoundError:
        mode = 0o666 & ~_umask()
    remove_leftovers(target)
    fd, temp_name = tempfile.mkstemp(prefix=_temp_prefix(target), suffix=".tmp", dir=folder)
    try:
        # Held until the file is renamed or removed, so that no other save takes it for a
        # leftover; the lock goes with the process if it is killed.
        _lock(fd, wait=True)
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
    # Some editors on some systems start UTF-8 files with a byte-order mark; JSON has no use
    # for it, and the parser would refuse it.
    data = data.removeprefix(_BOM)
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
