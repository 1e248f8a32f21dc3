"""Saves never destroy: through symbolic links, after kill -9, and with leftovers of dead saves."""

from __future__ import annotations

import fcntl
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

from model_samples import make_session

from review_alloc.model import (
    Paper,
    Session,
    atomic_write_bytes,
    load_session,
    remove_leftovers,
    save_session,
    session_bytes,
)
from review_alloc.model.storage import LEFTOVER_AGE

ROOT = Path(__file__).resolve().parents[2]


def _leftovers(folder: Path, name: str) -> list[Path]:
    return sorted(
        p for p in folder.iterdir() if p.name.startswith(f".{name}.") and p.suffix == ".tmp"
    )


def _age(path: Path, seconds: float) -> None:
    then = time.time() - seconds
    os.utime(path, (then, then))


def _version(k: int, size: int = 200) -> Session:
    """Version k of a session, large enough (a few hundred kB) that a save takes a moment."""
    base = make_session()
    extra = [Paper(id=f"V{k}-{n}", title="x" * 300) for n in range(size)]
    return base.model_copy(update={"name": f"version {k}", "papers": [*base.papers, *extra]})


def test_a_save_through_a_symlink_writes_the_file_it_points_to(tmp_path: Path) -> None:
    real = tmp_path / "store" / "s.json"
    real.parent.mkdir()
    save_session(make_session(), real)
    os.chmod(real, 0o640)
    link = tmp_path / "s.json"
    link.symlink_to(Path("store") / "s.json")
    changed = make_session().model_copy(update={"name": "Renamed"})
    save_session(changed, link)
    assert link.is_symlink() and os.readlink(link) == str(Path("store") / "s.json")
    assert load_session(real).name == "Renamed"
    assert real.stat().st_mode & 0o777 == 0o640
    assert _leftovers(real.parent, "s.json") == [] and _leftovers(tmp_path, "s.json") == []


def test_only_old_unlocked_temporary_files_of_the_same_target_are_removed(tmp_path: Path) -> None:
    target = tmp_path / "s.json"
    save_session(make_session(), target)
    dead = tmp_path / ".s.json.k1lled.tmp"
    young = tmp_path / ".s.json.y0ung.tmp"
    busy = tmp_path / ".s.json.b0sy.tmp"
    other = tmp_path / ".t.json.0ther.tmp"
    note = tmp_path / ".s.json.notes"
    for path in (dead, young, busy, other, note):
        path.write_bytes(b"{")
    for path in (dead, busy, other, note):
        _age(path, LEFTOVER_AGE + 60)
    holder = os.open(busy, os.O_RDONLY)
    fcntl.flock(holder, fcntl.LOCK_EX)  # a save in progress holds its file locked
    try:
        save_session(make_session(), target)
    finally:
        os.close(holder)
    assert not dead.exists()
    assert young.exists() and busy.exists() and other.exists() and note.exists()
    assert remove_leftovers(target) == [busy]


def _saving_child(target: Path, payloads: list[bytes]) -> int:
    """Fork a process that saves each of `payloads` to `target` in turn, over and over."""
    pid = os.fork()
    if pid == 0:  # the child: save until killed, never return into pytest
        try:
            while True:
                for data in payloads:
                    atomic_write_bytes(target, data)
        finally:
            os._exit(0)
    return pid


def test_kill_9_at_random_moments_never_loses_the_file(tmp_path: Path) -> None:
    """100 saving processes killed at random moments: the file is always a whole version.

    Each child is a separate process (fork) killed with SIGKILL part-way through its saves;
    after each kill the file must load as one of the versions written, and the next save (once
    the leftovers are older than `LEFTOVER_AGE`, which time would make them) leaves no
    temporary file behind.
    """
    target = tmp_path / "s.json"
    names = {f"version {k}" for k in range(5)}
    first = session_bytes(_version(0))
    payloads = [session_bytes(_version(k)) for k in range(1, 5)]
    atomic_write_bytes(target, first)
    rng = random.Random(20270301)
    caught_mid_save = 0
    deadline = time.monotonic() + 60
    for trial in range(100):
        assert time.monotonic() < deadline, "the crash test must stay bounded in time"
        pid = _saving_child(target, payloads)
        time.sleep(rng.uniform(0.001, 0.01))
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        assert load_session(target).name in names, f"trial {trial}"
        left = _leftovers(tmp_path, "s.json")
        caught_mid_save += bool(left)
        for path in left:
            _age(path, LEFTOVER_AGE + 1)
        atomic_write_bytes(target, first)
        assert _leftovers(tmp_path, "s.json") == [], f"trial {trial}"
        assert load_session(target).name == "version 0"
    # The kills must really have hit saves in progress, or the test proved nothing.
    assert caught_mid_save >= 5, caught_mid_save


def test_kill_9_of_a_separate_python_process_mid_saves(tmp_path: Path) -> None:
    target = tmp_path / "s.json"
    save_session(_version(0, size=50), target)
    script = (
        "import sys\n"
        "from review_alloc.model import atomic_write_bytes, load_session, session_bytes\n"
        "s = load_session(sys.argv[1])\n"
        "print('ready', flush=True)\n"
        "for k in range(100):\n"
        "    s = s.model_copy(update={'name': f'version {k + 1}'})\n"
        "    atomic_write_bytes(sys.argv[1], session_bytes(s))\n"
    )
    child = subprocess.Popen(
        [sys.executable, "-c", script, str(target)],
        stdout=subprocess.PIPE,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    try:
        assert child.stdout is not None and child.stdout.readline() == b"ready\n"
        time.sleep(0.05)
    finally:
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=30)
    assert load_session(target).name in {f"version {k}" for k in range(101)}
    for path in _leftovers(tmp_path, "s.json"):
        _age(path, LEFTOVER_AGE + 1)
    save_session(_version(0, size=50), target)
    assert _leftovers(tmp_path, "s.json") == []
