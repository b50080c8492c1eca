"""Output files that appear whole or not at all, and paths that cannot reach the input.

* Each output (data file, summary, report) is written to a temporary file beside its
  target, named ``.<target name>.<random>.incomplete`` (created with ``O_EXCL``, so it
  can never be an existing file, the input included), flushed and ``fsync``ed, and
  renamed onto the target only when the whole run succeeded: all outputs together, at
  the end (``OutputSet.commit``, with the stopping signals held back during the
  renames).  Any failure or interruption before that removes the temporary files and
  leaves an existing target as it was.  A device or named pipe is written directly
  (it cannot be replaced).
* Every output path is compared with the inputs and with the other outputs by file
  identity (device and inode, after following symbolic links), so a second name for
  the input (a symbolic or hard link) is caught, and each output folder is tried by
  creating the temporary file there, before any work starts (``OutputSet.add``).
* SIGINT, SIGTERM and SIGHUP become ``Stopped`` in the main thread
  (``stop_on_signals``), so the same clean-up runs for them as for an error.

What SIGKILL (or a power cut) leaves behind cannot be cleaned up by the process: the
``.incomplete`` files, the serial checks' scratch folder ``acidbase-serial-*`` and the
copy of standard input ``acidbase-stdin-*`` in the temporary folder (docs/batch.md); the
next ``acidbase batch`` removes those two folders (``acidbase.files.scratch``).
"""

from __future__ import annotations

import contextlib
import os
import signal
import stat
import sys
import tempfile
import threading
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import BinaryIO, Self

from ..errors import AcidBaseError

#: The end of every temporary output name: says what the file is if a killed run
#: leaves one behind.
INCOMPLETE = ".incomplete"

#: The signals that stop a run, as messages name them.  A stopped run exits with 128 +
#: the signal's number, as a shell reports a process killed by it (POSIX, Shell
#: Command Language, "Exit Status for Commands").
SIGNAL_NAMES = {signal.SIGINT: "Ctrl-C (SIGINT)", signal.SIGTERM: "SIGTERM",
                signal.SIGHUP: "SIGHUP (terminal closed)"}


class OutputError(ValueError, AcidBaseError):
    """An output that cannot be written as asked (the run stops; nothing is kept)."""


class OutputPathError(OutputError):
    """An output path that would destroy data or cannot be written; nothing was done."""

    def __init__(self, option: str, path: str, problem: str) -> None:
        super().__init__(option, path, problem)
        self.option, self.path, self.problem = option, path, problem

    def __str__(self) -> str:
        return f"{self.option} {self.path}: {self.problem}"


class Stopped(BaseException):
    """The run was stopped by a signal (a ``BaseException``, as ``KeyboardInterrupt``,
    so that no ``except Exception`` swallows it)."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum

    @property
    def exit_status(self) -> int:
        return 128 + int(self.signum)

    @property
    def name(self) -> str:
        return SIGNAL_NAMES.get(signal.Signals(self.signum), f"signal {self.signum}")


#: Whether the renames of a commit are under way ("on") and a signal that came then
#: ("pending"): main thread only, like the handler that reads it.
_HOLD: dict[str, object] = {}


@contextlib.contextmanager
def stop_on_signals() -> Iterator[None]:
    """Within the block, SIGINT, SIGTERM and SIGHUP raise ``Stopped`` in the main thread;
    after the first, further ones are ignored until the block has cleaned up.  A no-op
    outside the main thread (signals can only be handled there)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    wanted = [s for s in SIGNAL_NAMES if hasattr(signal, s.name)]
    saved = {s: signal.getsignal(s) for s in wanted}

    def stop(signum: int, frame: object) -> None:
        for s in wanted:
            signal.signal(s, signal.SIG_IGN)
        if _HOLD.get("on"):
            _HOLD.setdefault("pending", signum)
            return
        raise Stopped(signum)

    for s in wanted:
        signal.signal(s, stop)
    try:
        yield
    finally:
        for s, handler in saved.items():
            signal.signal(s, handler)


# ---------------------------------------------------------------------------
# File identity


def identity(path: str) -> tuple[int, int] | tuple[int, int, str]:
    """What names one file whatever the spelling: ``(device, inode)`` of the file when it
    exists (symbolic links followed, so hard and symbolic links give the same answer),
    else the folder's ``(device, inode)`` and the name."""
    try:
        st = os.stat(path)
        return (st.st_dev, st.st_ino)
    except FileNotFoundError:
        real = os.path.realpath(path)
        folder = os.stat(os.path.dirname(real) or ".")
        return (folder.st_dev, folder.st_ino, os.path.basename(real))


def check_paths(inputs: Sequence[tuple[str, str]], outputs: Sequence[tuple[str, str]]) -> None:
    """Refuse (``OutputPathError``) an output that is an input, or another output, by any
    name.  ``inputs`` and ``outputs`` are ``(option, path)``; standard input and output
    (``-``) are left out by the caller."""
    seen: dict[tuple, tuple[str, str]] = {}
    for option, path in inputs:
        try:
            seen.setdefault(identity(path), (option, path))
        except OSError:
            continue  # an input that does not exist is the reader's to report
    for option, path in outputs:
        try:
            key = identity(path)
        except FileNotFoundError:
            raise OutputPathError(option, path, "the folder does not exist") from None
        except NotADirectoryError:
            raise OutputPathError(option, path, "a part of the path is not a folder") from None
        if key in seen:
            other_option, other = seen[key]
            what = "the input" if other_option == "INPUT" else f"the {other_option} file"
            same = "" if other == path else f" ({other}, the same file by another name)"
            raise OutputPathError(option, path, f"is {what}{same}")
        seen[key] = (option, path)


# ---------------------------------------------------------------------------
# Staged files


def _creation_mode() -> int:
    """The mode a new file would get (0666 less the umask): ``mkstemp`` makes 0600."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@dataclass
class Staged:
    """One output being written beside its target; ``commit`` renames it into place."""

    option: str
    target: str
    """The real path written (symbolic links followed: a link keeps pointing at it)."""
    temp: str
    """The temporary file; "" for a device or pipe, written directly."""
    file: BinaryIO
    done: bool = False

    @classmethod
    def create(cls, option: str, path: str) -> Staged:
        target = os.path.realpath(path)
        folder, name = os.path.split(target)
        if os.path.isdir(target):
            raise OutputPathError(option, path, "is a folder; name a file")
        if not os.path.isdir(folder):
            raise OutputPathError(option, path, "the folder does not exist")
        try:
            st = os.stat(target)
        except OSError:
            st = None
        if st is not None and stat.S_ISREG(st.st_mode) and not st.st_mode & 0o222:
            raise OutputPathError(option, path, "is read-only (no write permission); make it "
                                                "writable or name another file")
        if st is not None and not stat.S_ISREG(st.st_mode):
            # A device or a pipe (/dev/null, a named pipe) is written to, never replaced.
            try:
                return cls(option, target, "", open(target, "wb"))
            except OSError as e:
                raise OutputPathError(option, path, f"cannot be written ({e.strerror or e})"
                                      ) from None
        try:
            fd, temp = tempfile.mkstemp(prefix=f".{name}.", suffix=INCOMPLETE, dir=folder)
        except OSError as e:
            raise OutputPathError(option, path, f"the folder cannot be written "
                                                f"({e.strerror or e})") from None
        with contextlib.suppress(OSError):  # a replaced file keeps its mode
            os.fchmod(fd, stat.S_IMODE(st.st_mode) if st is not None else _creation_mode())
        return cls(option, target, temp, os.fdopen(fd, "wb"))

    def finish(self) -> None:
        """Flush and fsync (the data is on disk before the name points at it)."""
        if not self.file.closed:
            self.file.flush()
            if self.temp:
                os.fsync(self.file.fileno())
            self.file.close()

    def rename(self) -> None:
        if self.temp:
            os.replace(self.temp, self.target)
        self.done = True

    def discard(self) -> None:
        with contextlib.suppress(OSError):
            self.file.close()
        if self.temp:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(self.temp)


@contextlib.contextmanager
def _signals_held() -> Iterator[None]:
    """Within ``stop_on_signals``, a stopping signal that arrives in the block is held
    and raised as ``Stopped`` when the block ends.  (The process's signal mask is no
    use here: any thread, the reader's native ones too, may take a signal for the
    process, and Python then runs the handler in the main thread at once.)"""
    _HOLD["on"] = True
    try:
        yield
    finally:
        _HOLD["on"] = False
        pending = _HOLD.pop("pending", None)
        if pending is not None:
            raise Stopped(pending)


def silence_stdout() -> None:
    """Point standard output at the null device, so that the interpreter's last flush
    of a closed pipe raises nothing (Python docs, "Note on SIGPIPE", signal module)."""
    with contextlib.suppress(OSError, ValueError, AttributeError):
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)


class StdoutRefused(Exception):
    """Standard output refused a write (``> /dev/full``, a disk filled); ``error`` is why."""

    def __init__(self, error: OSError) -> None:
        super().__init__(error)
        self.error = error


def emit(text: str) -> None:
    """Write a command's result to standard output; a refusal of the write is raised as
    ``StdoutRefused``, so it is never blamed on, or confused with, any other file."""
    try:
        if text:  # (a write of "" is one of no bytes, which /dev/full refuses too)
            sys.stdout.write(text)
        sys.stdout.flush()
    except BrokenPipeError:
        raise
    except OSError as e:
        raise StdoutRefused(e) from e


def _fsync_folder(folder: str) -> None:
    """Make a rename durable (POSIX: the folder entry is data of the folder)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def stale(staged: Staged) -> list[str]:
    """Temporary files of other runs to the same target: still running, or killed
    (SIGKILL, power cut) before they could clean up.  Never results."""
    if not staged.temp:
        return []
    folder, name = os.path.split(staged.target)
    prefix = f".{name}."
    try:
        found = [e.name for e in os.scandir(folder) if e.name.startswith(prefix)
                 and e.name.endswith(INCOMPLETE) and e.path != staged.temp]
    except OSError:
        return []
    return sorted(os.path.join(folder, f) for f in found)


@dataclass
class OutputSet:
    """The outputs of one run, committed together or not at all.

    ``add`` creates each temporary file at once (so a folder that cannot be written
    stops the run before any work); ``commit`` flushes and fsyncs all of them, then
    renames each onto its target; ``discard`` removes whatever is not committed.  Use
    it as a context manager: leaving the block without ``commit`` discards.
    """

    staged: list[Staged] = field(default_factory=list)
    committed: bool = False
    """Every output renamed into place."""

    def add(self, option: str, path: str) -> Staged:
        s = Staged.create(option, path)
        self.staged.append(s)
        return s

    def commit(self) -> None:
        """Sync every staged file, then rename each into place.  The renames run with
        the stopping signals held back, so a Ctrl-C cannot leave the data file renamed
        and its report not; a signal held back is delivered after the last rename."""
        for s in self.staged:
            s.finish()
        with _signals_held():
            for s in self.staged:
                s.rename()
            self.committed = True
        for folder in dict.fromkeys(os.path.dirname(s.target) for s in self.staged):
            _fsync_folder(folder)

    def discard(self) -> None:
        for s in self.staged:
            if not s.done:
                s.discard()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.discard()


__all__ = ["INCOMPLETE", "OutputError", "OutputPathError", "OutputSet", "Staged", "Stopped",
           "StdoutRefused", "check_paths", "emit", "identity", "silence_stdout", "stale",
           "stop_on_signals"]
