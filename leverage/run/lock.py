"""One writer per result folder: ``folder_lock(folder)`` holds an exclusive lock on
``folder/.leverage.lock`` while a run, a sweep, or ``leverage plot/verify/export``
writes there; a second one is refused in one line (``ProblemError``) instead of
silently replacing the first one's files.

The lock is ``fcntl.flock`` on an open file: the kernel drops it when the process
ends, however it ends (kill -9 included), so a stale lock file never blocks a later
run or a ``--resume``. The file itself stays (removing it would open a race) and
holds the process id of the last holder, for the message.
"""

import fcntl
import os
from contextlib import contextmanager
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError, WriteFault

LOCK_NAME = ".leverage.lock"


@contextmanager
def folder_lock(folder, what: str = "a run"):
    """Hold ``folder``'s lock for the block; ProblemError when another process holds it."""
    path = Path(folder) / LOCK_NAME
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    except OSError as exc:
        raise WriteFault(path, exc, "nothing was done") from None
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = os.pread(fd, 32, 0).decode("ascii", "replace").strip() or "?"
            raise ProblemError(
                str(folder),
                "",
                NO_VALUE,
                f"in use by another leverage process (pid {holder}); wait for "
                f"it to end or pick another folder for {what}",
            ) from None
        try:
            os.ftruncate(fd, 0)
            os.pwrite(fd, f"{os.getpid()}\n".encode("ascii"), 0)
        except OSError:
            pass  # the pid is only for the message; the lock is what counts
        yield path
    finally:
        os.close(fd)  # releases the lock
