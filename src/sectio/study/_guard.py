"""What keeps a study's output folder sound: one run at a time, no stale temp files, and
worker processes that never outlive the run.

* :func:`study_lock` holds an exclusive ``flock`` on ``DIR/.sectio-study.lock`` for the
  whole run; a second run into the same folder refuses with one sentence. The kernel drops
  the lock when the holder dies (even by SIGKILL), so a killed run never leaves it stale.
* :func:`clean_stale_temp` removes, under that lock, what killed runs left behind: the
  workers' image copies in ``DIR/.sectio-tmp/`` and the ``.NAME.XXXX.tmp`` files of the
  atomic writers.
* :func:`die_with_parent` (called in every worker) asks Linux for SIGKILL when the parent
  dies (``prctl(PR_SET_PDEATHSIG)``) and starts a watchdog thread that exits when the
  parent process id changes (other systems, or a parent that died before the prctl).
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import sys
import threading
from contextlib import contextmanager
from pathlib import Path

from ..errors import InputError

__all__ = ["LOCK_NAME", "StudyLockedError", "TMP_NAME", "clean_stale_temp",
           "die_with_parent", "study_lock"]

LOCK_NAME = ".sectio-study.lock"
TMP_NAME = ".sectio-tmp"
# the temp names of report._io.atomic_write_bytes and report.pdf: ".NAME.<random>.tmp"
_TEMP_FILE = re.compile(r"^\..+\.[A-Za-z0-9_]{6,}\.tmp$")


class StudyLockedError(InputError, RuntimeError):
    """Another run is writing into the same output folder."""


@contextmanager
def study_lock(out: Path):
    """Hold the output folder's lock for the duration of the ``with`` block."""
    import fcntl

    path = out / LOCK_NAME
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        try:
            holder = os.pread(fd, 32, 0).decode("ascii", "replace").strip() or "unknown"
        finally:
            os.close(fd)
        raise StudyLockedError(
            f"Another sectio study (process {holder}) is writing into {out}; wait for it to "
            "finish or choose another --out.") from None
    try:
        os.ftruncate(fd, 0)
        os.pwrite(fd, f"{os.getpid()}\n".encode("ascii"), 0)
        yield path
    finally:
        os.close(fd)  # releases the lock


def clean_stale_temp(out: Path) -> int:
    """Remove temp files of earlier (killed) runs; call only while holding the lock."""
    n = 0
    tmp = out / TMP_NAME
    if tmp.exists():
        n += sum(1 for _ in tmp.rglob("*"))
        shutil.rmtree(tmp, ignore_errors=True)
    folders = [out, out / "fields"] + [p for p in out.iterdir()
                                       if p.is_dir() and not p.name.startswith(".")]
    for folder in folders:
        try:
            entries = list(os.scandir(folder))
        except OSError:
            continue
        for e in entries:
            if e.is_file(follow_symlinks=False) and _TEMP_FILE.match(e.name):
                try:
                    os.unlink(e.path)
                    n += 1
                except OSError:
                    pass
    return n


def die_with_parent(parent_pid: int | None = None, *, poll_s: float = 0.5) -> None:
    """Make this (worker) process end when its parent ends, SIGKILL of the parent included."""
    parent = parent_pid or os.getppid()
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            PR_SET_PDEATHSIG = 1  # <linux/prctl.h>
            libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent:  # the parent died before the prctl took effect
        os._exit(1)

    def watch():
        import time

        while True:
            time.sleep(poll_s)
            if os.getppid() != parent:
                os._exit(1)

    threading.Thread(target=watch, name="sectio-parent-watch", daemon=True).start()
