"""One writer at a time: an advisory lock on ``writer.lock`` in the corpus folder.

The lock is the kernel's (``fcntl.flock``, as SQLite and other embedded databases use file
locks): it belongs to the open file, so when its owner dies, even by ``kill -9``, the kernel
releases it and the next writer takes it at once, with nothing stale to judge.  Inside the
file the owner writes its process id, the process's start time (from ``/proc``, so a reused
process id is told apart) and when it began, for the message a second writer gets:
"the corpus is being written by process N since T".

Whatever a dead writer left (its staging folder, Parquet files it had moved into place but
not yet listed in the catalog) is the next writer's to remove: see ``Store.batch``.
"""
from __future__ import annotations

import fcntl
import json
import os
import socket
import time
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator

from engine.errors import StrataError

LOCK_FILE = "writer.lock"
POLL_SECONDS = 0.05


def process_start(pid: int) -> str | None:
    """The start time of a process in clock ticks since boot (``/proc/PID/stat`` field 22),
    or None where there is no such process (or no /proc)."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return stat.rsplit(")", 1)[1].split()[19]


def owner_of(root: Path) -> dict | None:
    """What the lock file says of its owner (None if it says nothing readable)."""
    try:
        return json.loads((Path(root) / LOCK_FILE).read_text(encoding="utf-8") or "null")
    except (OSError, ValueError):
        return None


@contextmanager
def writer_lock(root: Path, wait: float = 0.0) -> Iterator[dict]:
    """Hold the corpus's writer lock for the ``with`` block; wait up to ``wait`` seconds for it.

    Raises :class:`StrataError` naming the owner when another live process holds it.
    """
    path = Path(root) / LOCK_FILE
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        deadline = time.monotonic() + max(wait, 0.0)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise _busy(root, wait) from None
                time.sleep(POLL_SECONDS)
        me = {"pid": os.getpid(), "started": process_start(os.getpid()), "host": socket.gethostname(),
              "since": datetime.now(timezone.utc).isoformat(timespec="seconds")}
        os.ftruncate(fd, 0)
        os.pwrite(fd, json.dumps(me).encode("utf-8"), 0)
        try:
            yield me
        finally:
            os.ftruncate(fd, 0)          # the owner's name leaves with it; the file stays, unlocked
    finally:
        os.close(fd)                     # closing releases the lock


def _busy(root: Path, wait: float) -> StrataError:
    owner = owner_of(root) or {}
    who = f"process {owner.get('pid', '?')}" + (f" on {owner['host']}" if owner.get("host") not in
                                                 (None, socket.gethostname()) else "")
    since = owner.get("since", "an unknown time")
    waited = f" (waited {wait:g} s)" if wait > 0 else ""
    return StrataError(f"the corpus is being written by {who} since {since}{waited}",
                       hint="let it finish, or add --wait SECONDS to wait for it")
