"""Operating-system pieces of a safe folder write: the atomic rename, the advisory lock and
blocking termination signals around the moment a folder changes hands.

``rename_noreplace(src, dst)`` puts a new folder in place only if nothing is at ``dst`` (one
system call, so the existence check cannot race with another writer). ``exchange(a, b)``
swaps two folders in one system call. Both use Linux ``renameat2`` through ctypes; where it is
missing (another OS, an old kernel, a file system without support) they return False and the
caller falls back to two renames with the old folder kept until the new one is complete.
"""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import errno
import fcntl
import os
import signal
import sys
import threading
from pathlib import Path

AT_FDCWD = -100
RENAME_NOREPLACE = 1
RENAME_EXCHANGE = 2

_libc = None


def _renameat2():
    global _libc
    if not sys.platform.startswith("linux"):
        return None
    if _libc is None:
        try:
            _libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        except OSError:
            _libc = False
    if not _libc:
        return None
    return getattr(_libc, "renameat2", None)


def _call(src: Path, dst: Path, flags: int) -> bool:
    """True when renameat2 did it; False when the system does not offer it."""
    fn = _renameat2()
    if fn is None:
        return False
    res = fn(AT_FDCWD, os.fsencode(src), AT_FDCWD, os.fsencode(dst), flags)
    if res == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP):
        return False
    raise OSError(err, os.strerror(err), str(dst))


def rename_noreplace(src: Path, dst: Path) -> None:
    """Move ``src`` to ``dst``; FileExistsError if anything is at ``dst``."""
    if _call(src, dst, RENAME_NOREPLACE):
        return
    if os.path.lexists(dst):  # fallback: checked under the caller's lock
        raise FileExistsError(errno.EEXIST, "exists", str(dst))
    os.rename(src, dst)


def exchange(a: Path, b: Path) -> bool:
    """Swap the folders at ``a`` and ``b`` atomically; False if the OS cannot."""
    return _call(a, b, RENAME_EXCHANGE)


@contextlib.contextmanager
def locked(folders: list[Path]):
    """Hold an exclusive advisory lock (flock) on each folder for the block; the folders are
    the parents of the output targets. Another qualbayes run writing there waits."""
    fds = []
    seen = set()
    try:
        for folder in folders:
            fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
            st = os.fstat(fd)
            if (st.st_dev, st.st_ino) in seen:
                os.close(fd)
                continue
            seen.add((st.st_dev, st.st_ino))
            fds.append(fd)
        for fd in sorted(fds, key=lambda f: (os.fstat(f).st_dev, os.fstat(f).st_ino)):
            fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        for fd in fds:
            with contextlib.suppress(OSError):
                fcntl.flock(fd, fcntl.LOCK_UN)
            os.close(fd)


@contextlib.contextmanager
def signals_held():
    """Delay SIGINT, SIGTERM and SIGHUP until the block ends (main thread, POSIX), so a
    fallback swap of two renames is never cut between them."""
    if not hasattr(signal, "pthread_sigmask") or (
            threading.current_thread() is not threading.main_thread()):
        yield
        return
    held = {signal.SIGINT, signal.SIGTERM, signal.SIGHUP}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True
