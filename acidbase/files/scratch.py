"""Scratch folders that a killed run does not leave behind for ever.

A run keeps panel data in scratch folders of the system's temporary folder
(``tempfile.gettempdir()``: ``$TMPDIR``, else ``/tmp``): the serial checks'
partitions (``acidbase-serial-*``: patient ids, sample ids, collection times and
values), the copy of standard input (``acidbase-stdin-*``) and a shard checked for
Dask (``acidbase-shard-*``).  An error, Ctrl-C,
SIGTERM or SIGHUP removes them (the run's clean-up); SIGKILL, the out-of-memory killer
or a power cut does not.  So:

* ``ScratchFolder`` makes the folder (mode 0700, ``tempfile.mkdtemp``) and holds an
  exclusive ``flock`` on a lock file inside it (``LOCK``) for the run's life.  The
  kernel drops that lock when the process ends, however it ends (SIGKILL included), and
  a lock belongs to an open file, not to a process id, so a new process that happens to
  get the dead run's id holds nothing.  The lock file is created under another name,
  locked, then renamed to ``LOCK``: no one can see ``LOCK`` unlocked while its run lives.
* ``sweep`` removes the folders of the given prefixes whose lock it can take (their run
  is dead).  It removes the lock file last, so a sweep that is itself stopped leaves a
  folder the next sweep still recognises.

Where ``fcntl`` is missing (not Linux, macOS or another POSIX system), a scratch folder
has no lock file and ``sweep`` removes nothing (also where folders cannot be walked by
descriptor, so that a link is never followed): the behaviour before this module (the
run's own clean-up only).  Where the file system refuses ``flock``, that one folder gets
no lock file and is never swept, also as before.
"""

from __future__ import annotations

import os
import shutil
import stat
import tempfile
import weakref
from dataclasses import dataclass, field

try:
    import fcntl
except ImportError:  # not POSIX: scratch folders are not marked, and not swept
    fcntl = None  # type: ignore[assignment]

#: The prefixes of acidbase's scratch folders (what ``acidbase batch`` sweeps).
SERIAL = "acidbase-serial-"
STDIN = "acidbase-stdin-"
SHARD = "acidbase-shard-"
"""A shard checked for Dask (``acidbase.partitions.check_shard``): its rows in and out."""
PREFIXES = (SERIAL, STDIN, SHARD)

#: The lock file inside a scratch folder; locked (``flock``) while its run lives.
LOCK = "in-use.lock"
#: The lock file's name until it is locked (then renamed to ``LOCK``).
_UNLOCKED = "in-use.lock.new"

_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_DIRECTORY = getattr(os, "O_DIRECTORY", 0)
#: Folders can be walked by descriptor, never following a link (Linux, macOS): sweeping
#: needs it, and without it a run's own clean-up removes its folder by path.
_FD_WALK = (shutil.rmtree.avoids_symlink_attacks and os.scandir in os.supports_fd
            and os.open in os.supports_dir_fd)


class ScratchFolder:
    """A scratch folder, marked as in use while this object (and its process) lives.

    ``name`` is its path; ``cleanup()`` removes it (at most once; also run when the
    object is collected or the interpreter exits), as ``tempfile.TemporaryDirectory``.
    """

    def __init__(self, prefix: str, dir: str | None = None) -> None:
        self.name = tempfile.mkdtemp(prefix=prefix, dir=dir)  # mode 0700
        try:
            lock = _hold(self.name)
        except BaseException:
            shutil.rmtree(self.name, ignore_errors=True)
            raise
        self._finalizer = weakref.finalize(self, _release, self.name, lock)

    def cleanup(self) -> None:
        """Remove the folder and everything in it, then let go of its lock."""
        self._finalizer()

    def __enter__(self) -> str:
        return self.name

    def __exit__(self, *exc: object) -> None:
        self.cleanup()

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.name!r})"


def _hold(folder: str) -> int | None:
    """Create ``LOCK`` in ``folder``, already locked; the open descriptor holding the
    lock, or None where there is no ``flock`` (or the file system refuses it)."""
    if fcntl is None:
        return None
    new = os.path.join(folder, _UNLOCKED)
    fd = os.open(new, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW, 0o600)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:  # e.g. ENOLCK on some network file systems: not marked, not swept
        os.close(fd)
        os.unlink(new)
        return None
    try:
        os.rename(new, os.path.join(folder, LOCK))
    except BaseException:
        os.close(fd)
        raise
    return fd


def _release(folder: str, lock: int | None) -> None:
    """Remove ``folder`` (the lock file last, while still held), then close the lock."""
    try:
        if lock is None or not _FD_WALK:
            if os.path.lexists(folder):
                shutil.rmtree(folder)
            return
        parent = os.open(os.path.dirname(folder) or ".", os.O_RDONLY | _DIRECTORY)
        try:
            _remove(parent, os.path.basename(folder))
        except FileNotFoundError:  # already gone
            pass
        finally:
            os.close(parent)
    finally:
        if lock is not None:
            os.close(lock)


def _remove(parent: int, name: str) -> None:
    """Remove the folder ``name`` of the open folder ``parent`` without following any
    symbolic link: its content, then its lock file, then the folder."""
    fd = os.open(name, os.O_RDONLY | _DIRECTORY | _NOFOLLOW, dir_fd=parent)
    try:
        with os.scandir(fd) as entries:
            names = [(e.name, e.is_dir(follow_symlinks=False)) for e in entries]
        for entry, is_dir in names:
            if entry == LOCK:
                continue
            if is_dir:
                shutil.rmtree(entry, dir_fd=fd)  # never follows a link (fd-based walk)
            else:
                os.unlink(entry, dir_fd=fd)
        try:
            os.unlink(LOCK, dir_fd=fd)
        except FileNotFoundError:
            pass
    finally:
        os.close(fd)
    os.rmdir(name, dir_fd=parent)


@dataclass(frozen=True)
class Swept:
    """What ``sweep`` did."""

    removed: int = 0
    """Folders of dead runs removed."""
    stuck: tuple[str, ...] = field(default=())
    """Folders of dead runs that could not be removed (or not wholly): their paths."""


def sweep(prefixes: tuple[str, ...] = PREFIXES, dir: str | None = None) -> Swept:
    """Remove the scratch folders of runs that are dead: each folder directly in ``dir``
    (default ``tempfile.gettempdir()``) whose name starts with one of ``prefixes``, that
    is a real folder (a symbolic link is never followed, nor removed), owned by this
    user, and holding a regular file ``LOCK`` whose lock can be taken now.

    Left alone, because they are not ours to judge: another user's folder (their run,
    their data); a folder without ``LOCK`` (made by a version of acidbase before these
    locks, whose run may still be going, by a run that has made its folder but not yet
    its lock, or by another program using the same name); a folder whose lock is held
    (its run is alive).  Never raises for a folder: one that cannot be removed is named
    in ``stuck``, and the run goes on.  Without ``fcntl``, removes nothing.
    """
    if fcntl is None or not _FD_WALK or not prefixes:
        return Swept()
    where = dir if dir is not None else tempfile.gettempdir()
    try:
        parent = os.open(where, os.O_RDONLY | _DIRECTORY)
    except OSError:
        return Swept()
    removed, stuck = 0, []
    try:
        try:
            with os.scandir(parent) as entries:
                names = sorted(e.name for e in entries if e.name.startswith(tuple(prefixes)))
        except OSError:
            return Swept()
        for name in names:
            outcome = _sweep_one(parent, name)
            if outcome is True:
                removed += 1
            elif outcome is False:
                stuck.append(os.path.join(where, name))
    finally:
        os.close(parent)
    return Swept(removed, tuple(stuck))


def _sweep_one(parent: int, name: str) -> bool | None:
    """True when the folder ``name`` was a dead run's and is removed; False when it was
    and could not be removed; None when it is not one to remove."""
    try:
        folder = os.open(name, os.O_RDONLY | _DIRECTORY | _NOFOLLOW, dir_fd=parent)
    except OSError:  # a symbolic link, not a folder, gone, or not readable
        return None
    try:
        st = os.fstat(folder)
        if not stat.S_ISDIR(st.st_mode) or st.st_uid != os.geteuid():
            return None
        try:
            lock = os.open(LOCK, os.O_RDONLY | _NOFOLLOW, dir_fd=folder)
        except OSError:  # no lock file (or a link): not ours to judge
            return None
    finally:
        os.close(folder)
    try:
        st = os.fstat(lock)
        if not stat.S_ISREG(st.st_mode) or st.st_uid != os.geteuid():
            return None
        try:
            fcntl.flock(lock, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:  # held: its run is alive
            return None
        try:
            _remove(parent, name)
        except FileNotFoundError:  # removed meanwhile by another sweep
            return None
        except (OSError, NotImplementedError):
            return False
        return True
    finally:
        os.close(lock)
