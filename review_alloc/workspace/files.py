"""The open session's file: open, lock, save, import from CSV, export, and the demo copy.

A session file is the chair's only record, so no writer may lose another's change: every
command that changes a session holds its lock from load to save (a second one waits, then
changes the newer file), and a save refuses to write over a file that changed on disk since
this workspace read or wrote it.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import threading
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Literal, Self

from review_alloc.model import InputError, Policy, load_session, save_session
from review_alloc.workspace.base import Step, WorkspaceBase

if TYPE_CHECKING:
    from filelock import FileLock

    from review_alloc.io.report_html import ReportData

DEMO_FILE = "demo-workshop.json"
DEMO_STAMP = ".demo-workshop.stamp.json"
"""Which built-in sample the demo copy came from, and the digest of the bytes written."""
DEMO_FRESH = "demo-workshop-{key}.json"
"""Where a version's demo goes when the chair's copy may hold their changes (`key`: the start
of the sample's `workshop_key`)."""

LOCK_WAIT_SECONDS = 120.0
"""How long a change waits for another program's change to the same session to finish."""


_WRITTEN: list[Path] = []
"""Session files this process has saved, in order (what an interrupted command reports)."""


def files_written() -> list[Path]:
    """The session files saved by this process so far."""
    return list(_WRITTEN)


class FileChanged(InputError):
    """The session file changed on disk since this workspace read or wrote it."""


def _lock_file(path: Path) -> Path:
    """Where a session file's lock lives: beside the file a symbolic link points to, so that a
    link and its target share one lock (the lock file stays when released)."""
    real = Path(os.path.realpath(path))
    return real.parent / f".{real.name}.lock"


def _lock_of(path: Path) -> FileLock:
    """The one lock object of a session file in this process (re-entrant), beside the file."""
    from filelock import FileLock

    return FileLock(
        _lock_file(path),
        timeout=LOCK_WAIT_SECONDS,
        thread_local=False,
        is_singleton=True,
    )


_DIRECT: dict[Path, list[int]] = {}
"""Lock files this process holds by a direct `flock`: [descriptor, holds] (re-entrant)."""
_DIRECT_GUARD = threading.Lock()


def _hold_directly(lock_file: Path, *, take: bool) -> bool:
    """Hold the lock directly: once more when this process holds it so already, else, when
    `take`, by an exclusive `flock` without waiting, as `filelock` takes it on POSIX. False
    when it is not held so (held elsewhere, also by this process's own `FileLock`, or no
    `flock` here): the caller then goes through `filelock`. An `OSError` when the lock file
    cannot be opened.

    A reader's lock is nearly always free; taking it directly spares every command that only
    reads a session, and every change command, the import of `filelock` (a tenth of its
    start-up).
    """
    with _DIRECT_GUARD:
        held = _DIRECT.get(lock_file)
        if held is not None:
            held[1] += 1
            return True
        if not take or os.name != "posix":
            return False
        import fcntl

        fd = os.open(lock_file, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            return False
        _DIRECT[lock_file] = [fd, 1]
        return True


def _release_directly(lock_file: Path) -> None:
    with _DIRECT_GUARD:
        held = _DIRECT[lock_file]
        held[1] -= 1
        if held[1]:
            return
        del _DIRECT[lock_file]
        import fcntl

        try:
            fcntl.flock(held[0], fcntl.LOCK_UN)
        finally:
            os.close(held[0])


@contextmanager
def session_lock(path: Path, *, required: bool = True) -> Iterator[None]:
    """Hold the session file's lock; another program's change is waited for, up to a limit.

    A reader (`required=False`) of a file in a folder it cannot write goes on without it.
    """
    lock_file = _lock_file(path)
    try:
        direct = _hold_directly(lock_file, take=not required)
    except OSError:
        # Only a reader opens the lock file here; it goes on without the lock.
        yield
        return
    if direct:
        try:
            yield
        finally:
            _release_directly(lock_file)
        return
    from filelock import Timeout

    lock = _lock_of(path)
    try:
        lock.acquire()
    except Timeout:
        raise InputError(
            [
                f"{path}: another program has been changing this session for over "
                f"{LOCK_WAIT_SECONDS:.0f} s; try again when it has finished "
                f"(lock file {lock.lock_file})"
            ]
        ) from None
    except OSError as error:
        if not required:
            yield
            return
        raise InputError([f"{path}: cannot lock it ({error.strerror or error})"]) from None
    try:
        yield
    finally:
        lock.release()


def file_identity(path: Path) -> tuple[int, int, int] | None:
    """(inode, size, modification time) of the file, None when there is none: every save
    replaces the file, so a save by anyone else changes it."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return (st.st_ino, st.st_size, st.st_mtime_ns)


def data_folder() -> Path:
    """The per-user data folder, from platformdirs: `$XDG_DATA_HOME/review-alloc`, else
    `~/.local/share/review-alloc` on Linux; the usual places on macOS and Windows."""
    from platformdirs import user_data_path

    return user_data_path("review-alloc", appauthor=False)


def demo_session_path() -> Path:
    """The user's own copy of the demo workshop, written from the built-in sample if missing
    and brought up to date with it as `refresh_demo` says.

    The chair edits and saves this copy; the sample shipped with the program never changes.
    """
    return refresh_demo()[0]


def refresh_demo() -> tuple[Path, str | None]:
    """The user's copy of the demo workshop, and what to tell the chair about it (or None).

    The copy is written from the built-in sample when missing. A stamp beside it
    (`DEMO_STAMP`) records which sample it came from (`samples.workshop_key`) and the digest
    of the bytes written. When this version's sample differs from the one the copy came
    from: a copy still exactly as written is replaced by the new sample; a copy the chair
    changed (or one with no stamp, whose origin is unknown) is never touched, and the new
    sample is written beside it (`DEMO_FRESH`), which the message names.
    """
    from review_alloc.samples import workshop_key

    folder = data_folder()
    path, stamp_path = folder / DEMO_FILE, folder / DEMO_STAMP
    key = workshop_key()
    stamp = _read_stamp(stamp_path)
    if path.exists() and stamp.get("sample") == key:
        return path, None
    from review_alloc.model import atomic_write_text, session_bytes
    from review_alloc.samples import workshop

    sample = session_bytes(workshop())
    written = _digest(sample)
    folder.mkdir(parents=True, exist_ok=True)
    try:
        current = path.read_bytes()
    except FileNotFoundError:
        current = None
    note = None
    if current is None or (stamp.get("written") == _digest(current) and current != sample):
        _write_bytes(path, sample)
        if current is not None:
            note = f"{path}: the demo workshop is this version's sample now (yours was unchanged)"
    elif current != sample:
        # Named by the sample, and written only when missing: a copy of an earlier fresh
        # demo that the chair took up is never written over either.
        fresh = folder / DEMO_FRESH.format(key=key[:10])
        if not fresh.exists():
            _write_bytes(fresh, sample)
        note = (
            f"{path}: kept as it is (changed since it was written, or written by an earlier "
            f"version); this version's demo workshop is in {fresh}"
        )
        written = None  # theirs: never replaced by a later sample
    atomic_write_text(stamp_path, json.dumps({"sample": key, "written": written}) + "\n")
    return path, note


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _read_stamp(path: Path) -> dict[str, str | None]:
    """The demo copy's stamp; empty when there is none or it cannot be read (the copy is then
    of unknown origin and never replaced)."""
    try:
        found = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return found if isinstance(found, dict) else {}


class FilesMixin(WorkspaceBase):
    """Reading and writing the session file, importing and exporting, for a Workspace."""

    @classmethod
    def open(cls, path: Path) -> Self:
        """Load a session file (InputError with file and field on bad input)."""
        with session_lock(path, required=False):
            workspace = cls(load_session(path), path)
            workspace.disk_identity = file_identity(path)
        workspace._recheck_stored_plan()
        return workspace

    @classmethod
    @contextmanager
    def editing(cls, path: Path) -> Iterator[Self]:
        """The session opened for one change: its file stays locked from load to save, so a
        second writer waits and then changes the newer file (both changes land)."""
        with session_lock(path):
            yield cls.open(path)

    def changed_on_disk(self) -> bool:
        """Whether the file was written by someone else since this workspace read or wrote it."""
        if self.path is None:
            return False
        return file_identity(self.path) != self.disk_identity

    @classmethod
    def open_demo(cls) -> Self:
        """The user's own copy of the demo workshop (created from the built-in sample once)."""
        return cls.open(demo_session_path())

    @classmethod
    def demo(cls) -> Self:
        """The built-in demo workshop in memory, with no file."""
        from review_alloc.samples import workshop

        return cls(workshop(), None)

    @classmethod
    def import_csv(
        cls,
        target: Path,
        papers: Path,
        reviewers: Path,
        conflicts: Path | None = None,
        scores: Path | None = None,
        *,
        policy: Policy | None = None,
        ignore_extra: bool = False,
        name: str | None = None,
        kind: str = "conference",
        replace: bool = False,
        sheet: str | None = None,
        encoding: str | None = None,
        columns: Mapping[str, Mapping[str, str]] | None = None,
        bids: Path | None = None,
    ) -> Self:
        """Build a session from CSV files or workbooks and save it to `target` (refused if it
        exists unless `replace`); every problem names its file, line (or sheet, row) and
        column, and nothing is written. `columns` maps our fields to the files' own column
        names (kind of file -> field -> column) and is kept in the session."""
        from review_alloc.io import import_csv

        if target.exists() and not replace:
            raise InputError([f"{target}: already exists; choose another file name"])
        session = import_csv(
            papers,
            reviewers,
            conflicts,
            scores,
            policy=policy,
            ignore_extra=ignore_extra,
            name=name or target.stem,
            kind=kind,
            sheet=sheet,
            encoding=encoding,
            columns=columns,
            bids=bids,
        )
        workspace = cls(session, None)
        workspace.save(target, replace=replace)
        return workspace

    @staticmethod
    def import_fields() -> dict[str, tuple[str, ...]]:
        """Our fields per kind of input file, required first (what a column mapping picks)."""
        from review_alloc.io.columns import import_fields

        return import_fields()

    @staticmethod
    def column_map(
        items: list[str], base: Mapping[str, Mapping[str, str]] | None = None
    ) -> dict[str, dict[str, str]]:
        """`KIND.FIELD=COLUMN` items laid over a stored mapping, checked (`InputError`)."""
        from review_alloc.io.columns import column_map

        return column_map(items, base)

    @staticmethod
    def file_header(path: Path, kind: str, *, sheet: str | None = None) -> list[str]:
        """The column names of an input file's header row, as written (for choosing a
        mapping); an `InputError` names the file when it cannot be read."""
        from review_alloc.io.columns import header_names

        return header_names(path, kind, sheet=sheet)

    def save(self, path: Path | None = None, *, replace: bool = False) -> Path:
        """Write the session atomically to `path` (or where it came from) and clear the mark.

        Refused with `FileChanged` when the file changed on disk since this workspace read or
        wrote it (another program's change would be lost), unless `replace`; saving to a new
        path refuses an existing file unless `replace`.
        """
        target = path or self.path
        if target is None:
            raise InputError(["this session has no file yet; choose where to save it"])
        with session_lock(target):
            if not replace:
                self._refuse_overwrite(target)
            save_session(self.session, target)
            self.disk_identity = file_identity(target)
            _WRITTEN.append(target)
        self.path = target
        self.dirty = False
        self.unsaved = []
        return target

    def reload_and_redo(self) -> tuple[Self, list[str]]:
        """The file as it is on disk now, with this workspace's unsaved steps made again on it.

        Returns the new workspace (unsaved) and a line for each step the newer file refused
        (for example a reviewer that someone else withdrew already); those are left out.
        """
        if self.path is None:
            raise InputError(["this session has no file to reload"])
        other = type(self).open(self.path)
        refused: list[str] = []
        for step in self.unsaved:
            try:
                _redo(other, step)
            except InputError as error:
                refused += [f"{step.name.replace('_', ' ')}: {line}" for line in error.lines]
        return other, refused

    def _refuse_overwrite(self, target: Path) -> None:
        found = file_identity(target)
        if target == self.path:
            if found is not None and found != self.disk_identity:
                raise FileChanged(
                    [
                        f"{target}: the file changed on disk since it was opened here (another "
                        "program saved it); reload it and make the changes again, or save under "
                        "another name"
                    ]
                )
        elif found is not None:
            raise InputError([f"{target}: already exists; choose another file name"])

    def export(
        self,
        target: Path,
        by: Literal["paper", "reviewer"] = "paper",
        *,
        force: bool = False,
        bom: bool = False,
    ) -> int:
        """Write the current plan as CSV (one row per assignment, sorted `by`) or, for a .xlsx
        target, as a workbook (by paper with the lead marked, by reviewer, the papers short of
        reviews, a summary); returns the assignments written.

        Refused for any other suffix, when the plan stored in the file broke a rule (it is
        never exported), and where `writable` refuses the target."""
        self.refuse_broken_plan()
        # The session file is refused first, whatever its suffix: that is the graver mistake.
        self.writable(target, force=force)
        suffix = export_format(target)
        if suffix == ".xlsx" and bom:
            raise InputError([f"{target}: --bom is for CSV files; a workbook needs none"])
        if suffix == ".xlsx":
            from review_alloc.io.workbook import workbook_bytes
            from review_alloc.plan.cautions import PLAN_CAUTION

            summary = self.summary()  # type: ignore[attr-defined]
            _write_bytes(target, workbook_bytes(self.session, summary, PLAN_CAUTION))
            return len(summary["assignments"])
        from review_alloc.io import plan_table, write_table

        header, rows = plan_table(self.session, by)
        write_table(target, header, rows, bom=bom)
        return len(rows)

    def report_data(self) -> ReportData:
        """What the committee's report shows, from the current plan (refused when there is
        none, when it is stale, or when the stored plan broke a rule)."""
        from collections import Counter
        from datetime import UTC, datetime

        from review_alloc.io.report_html import ReportData
        from review_alloc.plan.cautions import PLAN_CAUTION
        from review_alloc.workspace.facts import Facts

        self.refuse_broken_plan()
        plan = self.session.plan
        if plan is None or not plan.checked or not self.plan_is_current():
            raise InputError(
                [f"{self.session.name}: the plan is missing or out of date; plan again first"]
            )
        summary = self.summary()  # type: ignore[attr-defined]
        explanation = self.explain_report()  # type: ignore[attr-defined]
        facts = Facts.of(self.session)
        s = self.session
        reviewers = [
            (r.id, r.name, int(facts.loads[j]), int(facts.cap[j]), int(facts.floor[j]))
            for j, r in enumerate(s.reviewers)
            if not r.withdrawn
        ]
        history = self.history()  # type: ignore[attr-defined]
        first = history[0].number if history else None
        since = first if first is not None and s.revision not in (None, first) else None
        notices = []
        if since is not None:
            notices = [
                {
                    "reviewer": n.reviewer,
                    "name": n.name,
                    "email": n.email,
                    "added": list(n.added),
                    "removed": list(n.removed),
                }
                for n in self.notify_rows(since)  # type: ignore[attr-defined]
            ]
        return ReportData(
            name=s.name,
            noun=s.noun,
            summary=summary,
            explanation=explanation,
            topics=facts.topic_coverage(),
            load_bands=facts.load_bands(),
            reviewers=reviewers,
            score_bins=facts.score_histogram(),
            conflicts=Counter(
                _reason_kind(reason) for reason in facts.conflict_reason.values()
            ).most_common(),
            revisions=[e.to_json() for e in history],
            notices_since=since,
            notices=notices,
            cautions=[*explanation["cautions"], PLAN_CAUTION],
            generated=datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC"),
        )

    def write_report(self, target: Path, *, force: bool = False) -> ReportData:
        """Write the committee's report (one self-contained HTML page) to `target`, an .html
        file, refused where `writable` refuses it; returns what it shows."""
        from review_alloc.io.report_html import report_html

        self.writable(target, force=force)
        if target.suffix.lower() not in (".html", ".htm"):
            raise InputError([f"{target}: the report is an HTML page; name it report.html"])
        data = self.report_data()
        _write_bytes(target, report_html(data).encode("utf-8"))
        return data

    def export_text(self, by: Literal["paper", "reviewer"] = "paper", *, bom: bool = False) -> str:
        """The plan's CSV as text (for standard output)."""
        from review_alloc.io import csv_text, plan_table

        self.refuse_broken_plan()
        header, rows = plan_table(self.session, by)
        return csv_text(header, rows, bom=bom)

    def notify_table(self, since: int) -> tuple[tuple[str, ...], list[tuple[str, ...]]]:
        """(header, rows) of the reviewers whose list changed since revision `since`."""
        from review_alloc.plan.diff import NotifyRow

        rows = self.notify_rows(since)  # type: ignore[attr-defined]
        return tuple(NotifyRow.HEADER), [tuple(r.cells()) for r in rows]

    def notify_text(self, since: int, *, bom: bool = False) -> str:
        """The notices since revision `since` as CSV text (for standard output)."""
        from review_alloc.io import csv_text

        header, rows = self.notify_table(since)
        return csv_text(header, rows, bom=bom)

    def write_notices(
        self, since: int, target: Path, *, force: bool = False, bom: bool = False
    ) -> int:
        """Write the notices since revision `since` as a mail-merge CSV; returns the rows."""
        from review_alloc.io import write_table

        header, rows = self.notify_table(since)
        self.writable(target, force=force)
        write_table(target, header, rows, bom=bom)
        return len(rows)

    def writable(self, target: Path, *, force: bool = False) -> None:
        """Refuse an output file that would destroy something: this session's own file or any
        session document (always), another existing file unless `force`."""
        if self.path is not None and os.path.realpath(target) == os.path.realpath(self.path):
            raise InputError([f"{target}: this is the session's own file; write elsewhere"])
        if not os.path.lexists(target):
            return
        if os.path.isdir(target):
            raise InputError([f"{target}: is a folder; give a file name"])
        if _is_session_document(target):
            raise InputError([f"{target}: this is a session file; an export never replaces one"])
        if not force:
            raise InputError([f"{target}: already exists; add --force to replace it"])


def _reason_kind(reason: str) -> str:
    """A conflict's reason without its particulars (`same institution (X); same e-mail domain
    (x.example)` → `same institution; same e-mail domain`), so the report counts kinds."""
    parts = [re.sub(r"\s*\([^)]*\)$", "", part.strip()) for part in reason.split(";")]
    return "; ".join(part for part in parts if part)


EXPORT_SUFFIXES = (".csv", ".xlsx")
"""The files an export writes: CSV, or a workbook."""


def export_format(target: Path) -> str:
    """The export suffix of `target` (`.csv` or `.xlsx`, any case); InputError for others."""
    suffix = target.suffix.lower()
    if suffix not in EXPORT_SUFFIXES:
        found = f"{target.suffix!r}" if target.suffix else "no suffix"
        raise InputError(
            [
                f"{target}: an export is a .csv or .xlsx file (or '-' for standard output), "
                f"not {found}; name the file plan.csv or plan.xlsx"
            ]
        )
    return suffix


def _write_bytes(target: Path, data: bytes) -> None:
    from review_alloc.model import atomic_write_bytes

    try:
        atomic_write_bytes(target, data)
    except OSError as error:
        raise InputError([f"{target}: cannot write ({error.strerror or error})"]) from None


def _is_session_document(path: Path) -> bool:
    """Whether a file looks like a review-alloc session (a JSON object with a format_version)."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(4096)
    except OSError:
        return False
    text = head.decode("utf-8", errors="ignore").lstrip("\ufeff \t\r\n")
    return text.startswith("{") and '"format_version"' in text

def _redo(workspace: WorkspaceBase, step: Step) -> None:
    """Make one recorded step again on another workspace (plans are made anew there)."""
    if step.name == "install_plan":
        outcome = step.args[0]
        workspace.solve(fresh=outcome.network.kept is None)  # type: ignore[attr-defined]
    elif step.name == "accept":
        preview, *rest = step.args
        again = workspace.what_if(preview.request)  # type: ignore[attr-defined]
        workspace.accept(again, *rest, **step.kwargs)  # type: ignore[attr-defined]
    else:
        getattr(workspace, step.name)(*step.args, **step.kwargs)
