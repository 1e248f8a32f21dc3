"""The Workspace's explanation service run in a process of its own, for the terminal app.

Explaining the 1,500-paper sample (shortfall groups, then the fixes for both targets) is some
seconds of Python; in a thread of the app it holds the interpreter lock for most of that time,
and every key the chair presses meanwhile waits for it. Here the very same services
(`Workspace.explain`, then `Workspace.fixes`) run in one long-lived worker process instead.

The snapshot travels as the session file's own JSON (sessions do not pickle, and the file is
their exact record); the answer comes back pickled, with the session it refers to replaced by
the caller's own snapshot object, so `explanation.session is snapshot` holds as with a thread.
The worker is forked from a forkserver (a clean single-threaded process, never from the app with
its threads) and is ended by `close`. As always with multiprocessing, the worker imports the
program's main module again, so a program using this keeps its main code under
`if __name__ == "__main__":` (the entry points and `python -m` do).
"""

from __future__ import annotations

import io
import multiprocessing
import pickle
import threading
from multiprocessing import forkserver
from multiprocessing.pool import Pool
from typing import TYPE_CHECKING

from review_alloc.model import InputError, Session
from review_alloc.plan.errors import PlanCheckError

if TYPE_CHECKING:
    from review_alloc.plan.explanation import Explanation
    from review_alloc.plan.fixes import FixMenu

_PRELOAD = ["review_alloc.workspace", "review_alloc.plan.explanation", "review_alloc.plan.fixes"]
"""Imported once by the forkserver, so that each worker starts with them loaded."""
METHOD = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
"""How the worker starts: forked from a forkserver where there is one, else a fresh
interpreter (Windows)."""
_SNAPSHOT = "snapshot"
"""The pickled answer's stand-in for the session it explains."""
POLL = 0.25
"""Seconds between two looks at whether the service was closed while waiting for an answer."""


class OffsiteClosed(RuntimeError):
    """The service was closed while an explanation was being made; nobody waits for it."""


class _Pickler(pickle.Pickler):
    def __init__(self, file: io.BytesIO, session: Session) -> None:
        super().__init__(file, protocol=pickle.HIGHEST_PROTOCOL)
        self._session = session

    def persistent_id(self, obj: object) -> str | None:
        """The session by name: the caller holds it already."""
        return _SNAPSHOT if obj is self._session else None


class _Unpickler(pickle.Unpickler):
    def __init__(self, file: io.BytesIO, session: Session) -> None:
        super().__init__(file)
        self._session = session

    def persistent_load(self, pid: object) -> Session:
        """The caller's snapshot in place of the worker's copy."""
        if pid != _SNAPSHOT:
            raise pickle.UnpicklingError(f"unknown reference {pid!r}")
        return self._session


def _explain_text(text: str) -> tuple[str, object]:
    """In the worker: the workspace's explanation and fixes of the session in `text`."""
    from review_alloc.workspace import Workspace

    session = Session.model_validate_json(text)
    workspace = Workspace(session)
    try:
        explanation = workspace.explain(session)
        menu = workspace.fixes(session, explanation)
    except InputError as error:
        return "input", list(error.lines)
    except PlanCheckError as error:
        return "check", list(error.problems)
    except OverflowError as error:
        return "overflow", str(error)
    out = io.BytesIO()
    _Pickler(out, session).dump((explanation, menu))
    return "done", out.getvalue()


class OffsiteExplainer:
    """`Workspace.explain` and `Workspace.fixes` of session snapshots, in a worker process."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._pool: Pool | None = None
        self._closed = False

    def prepare(self) -> None:
        """Start the forkserver (and multiprocessing's resource tracker) now, while the
        program's standard streams are its own: the tracker is handed the error stream's file
        descriptor, and a full-screen app replaces that stream with one that has none."""
        if METHOD == "forkserver":
            multiprocessing.get_context(METHOD).set_forkserver_preload(_PRELOAD)
            forkserver.ensure_running()

    def _worker(self) -> Pool:
        with self._lock:
            if self._closed:
                raise OffsiteClosed("the explanation service was closed")
            if self._pool is None:
                self.prepare()
                self._pool = multiprocessing.get_context(METHOD).Pool(1)
            return self._pool

    def explain(self, session: Session) -> tuple[Explanation, FixMenu]:
        """The explanation and fix menu of `session`, made in the worker (call from a thread:
        this waits). Raises what the workspace services raise: `InputError`,
        `PlanCheckError`, `OverflowError`; `OffsiteClosed` when closed meanwhile."""
        text = session.model_dump_json()
        pending = self._worker().apply_async(_explain_text, (text,))
        while True:
            try:
                kind, payload = pending.get(POLL)
                break
            except multiprocessing.TimeoutError:
                if self._closed:
                    raise OffsiteClosed("the explanation service was closed") from None
        if kind == "input":
            raise InputError(payload)  # type: ignore[arg-type]
        if kind == "check":
            raise PlanCheckError(payload)  # type: ignore[arg-type]
        if kind == "overflow":
            raise OverflowError(payload)
        assert isinstance(payload, bytes)
        explanation, menu = _Unpickler(io.BytesIO(payload), session).load()
        return explanation, menu

    def close(self) -> None:
        """End the worker process, even in the middle of an explanation."""
        with self._lock:
            self._closed = True
            pool, self._pool = self._pool, None
        if pool is not None:
            pool.terminate()
