"""A reader takes the session's lock directly (an `flock`, as `filelock` takes it on POSIX)
and falls back to `filelock` when the lock is held: it still waits for a change in progress,
it still excludes a writer while it reads, and it never deadlocks on this process's own lock."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from filelock import FileLock, Timeout

from review_alloc.model import load_session, save_session
from review_alloc.samples import workshop
from review_alloc.workspace import Workspace, session_lock

pytestmark = pytest.mark.skipif(os.name != "posix", reason="the direct lock is POSIX's flock")

ROOT = Path(__file__).resolve().parents[2]

# A writer in another process: it holds the lock, says so, renames the session, saves and
# lets go after a pause (a change in progress).
WRITER = """
import sys, time
from pathlib import Path
from review_alloc.workspace import Workspace
path = Path(sys.argv[1])
with Workspace.editing(path) as ws:
    print("locked", flush=True)
    time.sleep(1.0)
    ws.session = ws.session.model_copy(update={"name": "renamed while a reader waited"})
    ws.save()
"""


def test_a_reader_waits_for_a_change_in_progress(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    writer = subprocess.Popen(
        [sys.executable, "-c", WRITER, str(path)],
        env={**os.environ, "PYTHONPATH": str(ROOT)},
        stdout=subprocess.PIPE,
        text=True,
    )
    assert writer.stdout is not None and writer.stdout.readline().strip() == "locked"
    read = Workspace.open(path)
    assert writer.wait(timeout=60) == 0
    assert read.session.name == "renamed while a reader waited"
    assert read.disk_identity is not None and not read.changed_on_disk()


def test_a_writer_cannot_lock_while_a_reader_reads(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    other = FileLock(tmp_path / ".s.json.lock", timeout=0, is_singleton=False)
    with session_lock(path, required=False):
        with pytest.raises(Timeout):
            other.acquire()
    other.acquire()
    other.release()


def test_a_reader_inside_this_process_s_own_change_goes_on(tmp_path: Path) -> None:
    # `editing` holds the FileLock; `open` inside it reads through that lock (re-entrant).
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    with Workspace.editing(path) as ws:
        again = Workspace.open(path)
        assert again.session.name == ws.session.name
    assert load_session(path).name == ws.session.name


def test_a_reader_of_a_folder_it_cannot_write_reads_without_the_lock(tmp_path: Path) -> None:
    if os.geteuid() == 0:
        pytest.skip("root writes into any folder")
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    tmp_path.chmod(0o555)
    try:
        assert Workspace.open(path).session.name == workshop().name
    finally:
        tmp_path.chmod(0o755)


def test_reading_a_session_does_not_load_filelock(tmp_path: Path) -> None:
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    code = (
        "import sys; from pathlib import Path; from review_alloc.workspace import Workspace; "
        "Workspace.open(Path(sys.argv[1])); print('filelock' in sys.modules)"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, str(path)],
        env={**os.environ, "PYTHONPATH": str(ROOT)},
        capture_output=True,
        text=True,
        check=True,
    )
    assert out.stdout.strip() == "False", out.stderr


def test_a_change_inside_a_reader_s_lock_nests_in_it(tmp_path: Path) -> None:
    # The change commands hold the reader's lock from load to save; the save's own lock must
    # nest in it (re-entrant in this process), and another process stays shut out till the end.
    path = tmp_path / "s.json"
    save_session(workshop(), path)
    other = FileLock(tmp_path / ".s.json.lock", timeout=0, is_singleton=False)
    with session_lock(path, required=False):
        ws = Workspace.open(path)
        ws.session = ws.session.model_copy(update={"name": "saved inside the reader's lock"})
        ws.save()
        with pytest.raises(Timeout):
            other.acquire()
    other.acquire()
    other.release()
    assert load_session(path).name == "saved inside the reader's lock"
