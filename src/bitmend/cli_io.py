"""The command line's inputs and outputs: IN, -o (a file, stdout or a datagram endpoint), the
report and ledger files that end with a summary however a run ends, progress bars, and the
exit codes. The rules for writing a file (temp file and rename, devices, FIFOs) are in
`bitmend.outputs`.
"""

from __future__ import annotations

import os
import sys
from contextlib import contextmanager
from typing import BinaryIO, Callable, Iterator, Optional

from bitmend import outputs
from bitmend.errors import BitmendError

EXIT_OK, EXIT_DAMAGED, EXIT_USAGE, EXIT_UNREADABLE = 0, 1, 2, 3
EXIT_BROKEN_PIPE = outputs.EXIT_BROKEN_PIPE  # 141
PROGRESS_MIN_BYTES = 8 << 20  # a known input smaller than this finishes before a bar would help


class CliError(BitmendError):
    """A failure reported as one line on stderr with an exit code."""

    def __init__(self, message: str, code: int) -> None:
        super().__init__(message)
        self.exit_code = code


@contextmanager
def open_input(path: str) -> Iterator[BinaryIO]:
    """IN: stdin for '-', else the file, opened for reading (a CliError, exit 3, if it cannot be)."""
    if path == "-":
        if sys.stdin is None:  # started with stdin closed (`<&-`)
            raise CliError("cannot read stdin: standard input is closed (name a file, or give data "
                           "on stdin)", EXIT_UNREADABLE)
        yield sys.stdin.buffer
        return
    try:
        f = open(path, "rb")
    except OSError as exc:
        raise CliError(f"cannot read {path}: {exc.strerror}", EXIT_UNREADABLE) from None
    with f:
        yield f


@contextmanager
def open_data_output(output: Optional[str], endpoint):
    """The -o target: a datagram sender for a udp:HOST:PORT endpoint, else stdout or a file
    written by the rules of `bitmend.outputs` (a regular file through a temp file renamed
    into place only on success)."""
    if endpoint is None:
        with outputs.writing(output) as out:
            yield out
        return
    from bitmend.datagrams import DatagramSender

    with DatagramSender(endpoint) as sender:
        yield sender


@contextmanager
def open_side_file(path: Optional[str], what: str,
                   last_line: Callable[[Optional[BaseException]], Optional[str]]) -> Iterator[Optional[outputs.Output]]:
    """A report or ledger file (None if not asked for), written like -o. When the run ends,
    normally or by an exception (a signal, a broken pipe, an error), last_line(exception or
    None) gives its summary line: written and the file kept; None: the file is dropped."""
    if not path:
        yield None
        return
    side = outputs.open_output(path, f"{what} {path}")
    failure: Optional[BaseException] = None
    try:
        yield side
    except BaseException as exc:
        failure = exc
        raise
    finally:
        with outputs.deferred_signals():  # a signal now must not cut the summary in half
            line = last_line(failure)
            if line is None:
                side.discard()
            else:
                try:
                    side.write_text(line + "\n")
                    side.commit()
                except BaseException:
                    side.discard()
                    if failure is None:
                        raise
                    # else keep what can be kept: the error on its way up is the one to report


def stop_reason(exc: Optional[BaseException]) -> Optional[str]:
    """Why a run ended early, for the "stopped" field of a report or ledger; None if it did not."""
    if isinstance(exc, outputs.Stopped):
        return exc.name
    if isinstance(exc, KeyboardInterrupt):
        return "SIGINT"
    if isinstance(exc, outputs.BrokenOutput):
        return "broken pipe"
    if isinstance(exc, outputs.OutputError):
        return "write error"
    return None


def report_end(reader, out, failure: Optional[BaseException]) -> Optional[str]:
    """The summary line that ends a decode report (reader: a Decoder or a RecordReader); a
    run stopped early says why, how many bytes reached the output (0 for an -o file, whose
    temp file is removed) and is not complete."""
    if reader is None:
        return None  # nothing was read: no report
    reason = stop_reason(failure)
    if reason is None:
        return reader.summary.to_json()
    import json

    summary = json.loads(reader.summary.to_json())
    delivered = 0 if out is None or out.replaces_file else out.bytes_written
    summary.update(complete=False, stopped=reason, bytes_written=delivered)
    return json.dumps(summary, separators=(",", ":"))


def ledger_end(chain, failure: Optional[BaseException]) -> Optional[str]:
    """The ledger of an inject run: what the chain did, also when the run was stopped early
    (marked "stopped"); None (no ledger file) when it failed for another reason."""
    if chain is None:
        return None
    if failure is None:
        return chain.ledger().to_json()
    reason = stop_reason(failure)
    if reason is None:
        return None
    import json

    record = chain.ledger().to_dict()
    record["stopped"] = reason
    return json.dumps(record, indent=2)


def input_size(stream: BinaryIO) -> int | None:
    """The size of a regular file behind stream; None for a pipe, a terminal or an empty file."""
    try:
        return os.fstat(stream.fileno()).st_size or None
    except (OSError, ValueError, AttributeError):
        return None


@contextmanager
def progress(label: str, total: int | None, enabled: bool) -> Iterator[Callable[[int], None]]:
    """A rich progress bar on a terminal for long runs; a no-op otherwise. Yields tick(done)."""
    if not enabled or not sys.stderr.isatty() or (total is not None and total < PROGRESS_MIN_BYTES):
        yield lambda done: None
        return
    from rich.progress import BarColumn, DownloadColumn, Progress, TransferSpeedColumn

    with Progress("[progress.description]{task.description}", BarColumn(), DownloadColumn(),
                  TransferSpeedColumn(), transient=True, console=None) as bar:
        task = bar.add_task(label, total=total)
        yield lambda done: bar.update(task, completed=done)


def flush_stdout() -> None:
    """Flush printed text now, so that a reader that went away is seen here, not in Python's
    flush at exit (which would print a traceback-like warning)."""
    if sys.stdout is None:
        return
    try:
        sys.stdout.flush()
    except OSError as exc:
        outputs.silence_stdout()
        if isinstance(exc, BrokenPipeError):
            raise outputs.BrokenOutput("stdout: the reader went away (broken pipe)", True) from None
        raise outputs.OutputError(f"cannot write stdout: {exc.strerror or exc}") from None
