"""Output files of the command line, and how a run that stops early leaves them.

Where `open_output(path)` writes, as careful Unix tools do:

- ``None`` or ``-``: stdout, written directly.
- ``/dev/stdout``, ``/dev/stderr``, ``/dev/fd/N``, ``/proc/self/fd/N``: that open descriptor,
  written directly (never reopened, so a ``>> log`` of the shell is not truncated).
- anything else that is not a regular file (a character or block device, a FIFO, a Unix
  socket): opened and written directly; no temp file, no rename.
- a regular file, or a path where nothing exists yet: written to a temp file beside it
  (``.NAME.XXXXXXXX.part``, same directory, so the rename is atomic) and renamed over it by
  `Output.commit()`. An existing file keeps its mode (and owner where allowed); a new one is
  made ``0666 & ~umask`` (0644 under umask 022), not the 0600 of `tempfile.mkstemp`.
- a symlink is followed: what it points to is written (or replaced), the link stays a link.
- a directory: `OutputError`.

Every failure is an `OutputError` whose message names the user's path, never the temp file;
a reader that went away (EPIPE) is a `BrokenOutput`. Two outputs naming the same regular file
or FIFO (same inode, or the same path not yet made) are refused by `check_distinct` before
anything is written.

Signals: `install_signal_handlers()` turns SIGINT, SIGTERM and SIGHUP (those not ignored when
the process started, as under nohup) into a `Stopped` exception, so the normal cleanup runs:
temp files are removed, report and ledger files get their last line. Exit status 128 + the
signal's number (130, 143, 129). Inside `deferred_signals()` (commits and cleanup) a signal is
only recorded, and acted on when the block ends; a second signal while the first is handled
removes the temp files and ends the process at once with the same kind of status.
"""

from __future__ import annotations

import errno
import os
import re
import signal
import stat
import sys
from contextlib import contextmanager
from typing import BinaryIO, Iterator, Mapping, Optional

from bitmend.errors import BitmendError

#: exit status when the reader of the output went away: 128 + SIGPIPE, what a shell shows
#: for a program killed by SIGPIPE
EXIT_BROKEN_PIPE = 128 + signal.SIGPIPE

_HANDLED_SIGNALS = tuple(getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP") if hasattr(signal, name))
_FD_PATH = re.compile(r"^/(?:dev/fd|proc/self/fd|proc/thread-self/fd|proc/(\d+)/fd)/(\d+)$")
_STD_PATHS = {"/dev/stdin": 0, "/dev/stdout": 1, "/dev/stderr": 2}


class OutputError(BitmendError):
    """An output could not be made or written; the message names the user's path."""


class BrokenOutput(OutputError):
    """The reader of a pipe (stdout or a FIFO) went away while we were writing to it."""

    def __init__(self, message: str, to_stdout: bool) -> None:
        super().__init__(message)
        self.to_stdout = to_stdout


class OutputConflict(BitmendError):
    """Two outputs of one command name the same file (a usage error)."""


class Stopped(BaseException):
    """The run was stopped by a signal. A BaseException, like KeyboardInterrupt, so that no
    `except Exception` on the way up swallows it."""

    def __init__(self, signum: int) -> None:
        self.signum = signum
        self.name = signal.Signals(signum).name
        self.exit_code = 128 + signum
        super().__init__(f"stopped by {self.name}")


# ---- signals -------------------------------------------------------------------------------------

class _SignalState:
    deferring = 0  # depth of deferred_signals() blocks
    pending: Optional[int] = None  # a signal recorded while deferring
    raised = False  # a Stopped is on its way up


_state = _SignalState()
_live_temps: set[str] = set()  # temp files to remove whatever happens


def _on_signal(signum: int, frame) -> None:
    if _state.raised or _state.pending is not None:
        # a second signal while the first is being handled: stop now, but leave no temp file
        remove_temp_files()
        os._exit(128 + signum)
    if _state.deferring:
        _state.pending = signum
        return
    _state.raised = True
    raise Stopped(signum)


def install_signal_handlers() -> None:
    """SIGINT, SIGTERM and SIGHUP raise `Stopped` in the main thread. A signal that was
    ignored when the process started (nohup, a background job) stays ignored."""
    for signum in _HANDLED_SIGNALS:
        try:
            if signal.getsignal(signum) == signal.SIG_IGN:
                continue
            signal.signal(signum, _on_signal)
        except (ValueError, OSError):  # not the main thread, or not allowed: keep the default
            pass


@contextmanager
def deferred_signals() -> Iterator[None]:
    """Hold a signal while the block runs (a commit, a cleanup), so that it is not cut in half;
    it is raised as `Stopped` when the outermost such block ends (unless an exception is already
    on its way up: then `raise_pending_signal()` raises it later)."""
    _state.deferring += 1
    try:
        yield
    finally:
        _state.deferring -= 1
    raise_pending_signal()


def take_pending_signal() -> Optional[int]:
    """A signal recorded inside `deferred_signals()`, taken so that it is not raised: for a
    loop that ends cleanly on SIGINT/SIGTERM (a datagram receiver), which asks regularly."""
    signum, _state.pending = _state.pending, None
    return signum


def signal_name(signum: int) -> str:
    return signal.Signals(signum).name


def raise_pending_signal() -> None:
    """Raise `Stopped` for a signal that arrived inside `deferred_signals()`, if any."""
    if _state.pending is not None and not _state.deferring and not _state.raised:
        signum, _state.pending = _state.pending, None
        _state.raised = True
        raise Stopped(signum)


def remove_temp_files() -> None:
    for path in list(_live_temps):
        try:
            os.unlink(path)
        except OSError:
            pass
        _live_temps.discard(path)


def silence_stdout() -> None:
    """Point file descriptor 1 at /dev/null, so that Python's flush of sys.stdout at exit does
    not fail a second time after the reader of a pipe went away (the Python documentation's
    advice for SIGPIPE, library/signal.html)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno() if sys.stdout is not None else 1)
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass


# ---- outputs ----------------------------------------------------------------------------------------

class Output:
    """One output being written: `write()` bytes (or `write_text()`), then `commit()` to keep it
    or `discard()` to drop it (a temp file is removed; a direct target is only closed)."""

    # write() has written (or copied) all it was given when it returns, and cuts nothing at
    # the call's boundaries: a frame writer may hand it many frames in one call
    whole_writes = True

    def __init__(self, label: str, stream: BinaryIO, *, temp: Optional[str] = None, final: Optional[str] = None,
                 owned: bool = True, is_stdout: bool = False) -> None:
        self.label = label  # the user's name for it, used in every message
        self._stream = stream
        self._temp = temp
        self._final = final
        self._owned = owned  # close the stream at the end (not sys.stdout)
        self._is_stdout = is_stdout
        self._done = False
        self._prepared = False
        self.bytes_written = 0

    @property
    def replaces_file(self) -> bool:
        """Written through a temp file and renamed into place at the end."""
        return self._temp is not None

    def _failure(self, exc: OSError) -> OutputError:
        if exc.errno == errno.EPIPE:
            return BrokenOutput(f"{self.label}: the reader went away (broken pipe)", self._is_stdout)
        return OutputError(f"cannot write {self.label}: {exc.strerror or exc}")

    def write(self, data) -> int:
        """Write all of data (a raw stream, such as stdout under `python -u`, may take part of
        it at a time: the rest is written until it is all gone or the target fails)."""
        view = memoryview(data).cast("B")
        total = len(view)
        try:
            while view:
                written = self._stream.write(view)
                if written is None:  # a non-blocking descriptor that is full
                    raise BlockingIOError(errno.EAGAIN, os.strerror(errno.EAGAIN))
                self.bytes_written += written
                view = view[written:]
        except OSError as exc:
            raise self._failure(exc) from None
        return total

    def write_text(self, text: str) -> None:
        self.write(text.encode("utf-8"))

    def flush(self) -> None:
        try:
            self._stream.flush()
        except OSError as exc:
            raise self._failure(exc) from None

    def writable(self) -> bool:
        return True

    def prepare(self) -> None:
        """Everything written reaches the target (flushed, and a temp file synced to disk), so
        that what can still fail afterwards is only the rename. Call it before writing a report
        that says the output is whole. Errors name the user's path."""
        if self._prepared:
            return
        try:
            self._stream.flush()
            if self._temp is not None:
                os.fsync(self._stream.fileno())  # the rename must never expose unwritten data
        except OSError as exc:
            raise self._failure(exc) from None
        self._prepared = True

    def commit(self) -> None:
        """`prepare()`, then for a regular file rename the temp file over the target."""
        if self._done:
            return
        with deferred_signals():
            self.prepare()
            try:
                if self._owned:
                    self._stream.close()
                if self._temp is not None:
                    os.replace(self._temp, self._final)
                    _live_temps.discard(self._temp)
            except OSError as exc:
                self._drop()
                raise self._failure(exc) from None
            self._done = True

    def discard(self) -> None:
        """Drop the output: a temp file is removed, the target is left as it was; a direct
        target (stdout, device, FIFO) keeps what already went into it. Bytes that stdout's
        buffer still holds are not pushed here (its reader may have stalled); see
        `silence_stdout`."""
        if self._done:
            return
        with deferred_signals():
            self._drop()

    def _drop(self) -> None:
        self._done = True
        try:
            if self._owned:
                self._stream.close()  # unbuffered unless a temp file: nothing left to push
        except (OSError, ValueError):
            pass  # the output is being dropped: a failing flush changes nothing
        if self._temp is not None:
            try:
                os.unlink(self._temp)
            except FileNotFoundError:
                pass
            except OSError:
                return  # keep it listed, so that remove_temp_files() tries again
            _live_temps.discard(self._temp)


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _descriptor_of(path: str) -> Optional[int]:
    """The descriptor a path such as /dev/stdout or /proc/self/fd/3 stands for, else None."""
    absolute = os.path.abspath(path)
    if absolute in _STD_PATHS:
        return _STD_PATHS[absolute]
    match = _FD_PATH.match(absolute)
    if match and (match.group(1) is None or int(match.group(1)) == os.getpid()):
        return int(match.group(2))
    return None


def _stdout(label: str) -> Output:
    if sys.stdout is None:
        raise OutputError(f"cannot write {label}: standard output is closed")
    stream = getattr(sys.stdout, "buffer", sys.stdout)
    return Output(label, stream, owned=False, is_stdout=True)


def _open_descriptor(label: str, fd: int) -> Output:
    if fd == 1:
        return _stdout(label)
    try:
        os.fstat(fd)
        stream = os.fdopen(os.dup(fd), "wb", buffering=0)
    except OSError as exc:
        raise OutputError(f"cannot write {label}: {exc.strerror or exc}") from None
    return Output(label, stream)


def _open_direct(label: str, path: str, mode: int) -> Output:
    """A device, FIFO or socket: write into it (a FIFO's open waits for its reader). Unbuffered,
    so that dropping it never has to push held bytes into a reader that has stalled."""
    try:
        if stat.S_ISSOCK(mode):
            import socket  # here: most runs write no socket, and the import costs start-up time

            sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
            try:
                sock.connect(path)
                stream = sock.makefile("wb", buffering=0)
            finally:
                sock.close()  # the file object holds its own reference to the connection
        else:
            stream = open(path, "wb", buffering=0)
    except OSError as exc:
        raise OutputError(f"cannot write {label}: {exc.strerror or exc}") from None
    return Output(label, stream, is_stdout=False)


def _open_replacing(label: str, final: str, existing: Optional[os.stat_result]) -> Output:
    """A temp file beside `final`, with the mode (and owner) the finished file must have."""
    import tempfile  # here: a run that writes stdout never needs it

    directory, name = os.path.split(final)
    with deferred_signals():  # the temp file is listed the moment it exists
        try:
            fd, temp = tempfile.mkstemp(prefix=f".{name}.", suffix=".part", dir=directory or ".")
        except OSError as exc:
            raise OutputError(f"cannot write {label}: cannot make a temp file beside it: "
                              f"{exc.strerror or exc}") from None
        _live_temps.add(temp)
    try:
        if existing is not None:
            if (existing.st_uid, existing.st_gid) != (os.getuid(), os.getgid()):
                try:
                    os.fchown(fd, existing.st_uid, existing.st_gid)
                except OSError:
                    pass  # not allowed: the file becomes ours, with the same mode
            mode = stat.S_IMODE(existing.st_mode)
        else:
            mode = 0o666 & ~_umask()
        os.fchmod(fd, mode)  # after fchown, which clears set-id bits
        stream = os.fdopen(fd, "wb")
    except OSError as exc:
        os.close(fd)
        os.unlink(temp)
        _live_temps.discard(temp)
        raise OutputError(f"cannot write {label}: {exc.strerror or exc}") from None
    return Output(label, stream, temp=temp, final=final)


def open_output(path: Optional[str], label: Optional[str] = None) -> Output:
    """The output for a user's path by the rules in the module docstring; label (default: the
    path, or "stdout") is what messages call it."""
    if path is None or path == "-":
        return _stdout(label or "stdout")
    label = label or path
    fd = _descriptor_of(path)
    if fd is not None:
        return _open_descriptor(label, fd)
    if path.endswith("/"):
        raise OutputError(f"cannot write {label}: names a directory")
    try:
        st = os.stat(path)  # follows symlinks
    except FileNotFoundError:
        # nothing there, or a symlink to nothing: the file is made where the link points
        return _open_replacing(label, os.path.realpath(path), None)
    except OSError as exc:
        raise OutputError(f"cannot write {label}: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise OutputError(f"cannot write {label}: it is a directory")
    if stat.S_ISREG(st.st_mode):
        return _open_replacing(label, os.path.realpath(path), st)
    return _open_direct(label, path, st.st_mode)


def _identity(path: Optional[str]):
    """What two outputs must not share: the inode of a regular file or FIFO (also when stdout
    is one), the resolved path of a file not made yet; None for devices and the rest."""
    fd = 1 if path == "-" else _descriptor_of(path)
    try:
        st = os.fstat(fd) if fd is not None else os.stat(path)
    except FileNotFoundError:
        return ("path", os.path.realpath(path))
    except (OSError, TypeError):
        return None
    if stat.S_ISREG(st.st_mode) or stat.S_ISFIFO(st.st_mode):
        return ("inode", st.st_dev, st.st_ino)
    return None


def check_distinct(outputs: Mapping[str, Optional[str]]) -> None:
    """Refuse two outputs (option name -> path; "-" is stdout, None an option not given) that
    name the same file, before anything is written."""
    seen: dict = {}
    for option, path in outputs.items():
        ident = _identity(path) if path is not None else None
        if ident is None:
            continue
        if ident in seen:
            first = seen[ident]
            where = path if path != "-" else "stdout"
            raise OutputConflict(f"{first} and {option} name the same file ({where}); give each its own")
        seen[ident] = option


@contextmanager
def writing(path: Optional[str], label: Optional[str] = None) -> Iterator[Output]:
    """`open_output` as a context: committed when the block ends normally, discarded when it
    ends by an exception (a temp file never stays behind, the target is left as it was)."""
    out = open_output(path, label)
    try:
        yield out
    except BaseException:
        out.discard()
        raise
    out.commit()
