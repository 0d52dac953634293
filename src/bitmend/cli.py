"""The bitmend command line: parse, call the library, print, set the exit code.

Exit codes: 0 every byte recovered and CRC-verified; 1 finished but data damaged or lost;
2 usage error (also: two outputs naming the same file); 3 nothing decodable (not a container)
or an I/O failure (a closed stdin or stdout, a full device, an output that is a directory);
141 (128 + SIGPIPE) the reader of the output went away (`| head`): the run stops at once,
silently for stdout, with one line for a named FIFO; 130, 143, 129 (128 + the signal's number)
stopped by SIGINT, SIGTERM or SIGHUP. A run that stops early removes its temp files, and
its --report or --ledger file still ends with its summary, marked "stopped".
Where and how outputs are written: bitmend.outputs.
"""

from __future__ import annotations

import io
import json
import os
import sys
from contextlib import contextmanager, nullcontext
from typing import BinaryIO, Callable, Iterator, Optional, Sequence

import typer

from bitmend import outputs
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, MAX_DEPTH
from bitmend.container.format import DEFAULT_FRAME_BYTES
from bitmend.live import DEFAULT_MAX_DELAY

EXIT_OK, EXIT_DAMAGED, EXIT_USAGE, EXIT_UNREADABLE = 0, 1, 2, 3
EXIT_BROKEN_PIPE = outputs.EXIT_BROKEN_PIPE  # 141
COPY_CHUNK = 1 << 20

EXIT_CODES_HELP = ("Exit codes: 0 all data verified; 1 finished, some data damaged or lost; 2 usage error; "
                   "3 not a container, or an I/O failure; 141 the reader of the output went away; "
                   "130/143/129 stopped by SIGINT/SIGTERM/SIGHUP (temp files removed, report and ledger "
                   "end with their summary). -o writes a regular file through a temp file renamed at the "
                   "end (mode kept, umask honoured); devices, FIFOs and /dev/stdout directly; symlinks "
                   "are followed.")

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Forward error correction for byte streams: wrap data in a block code, "
                       "recover it after damage, and report exactly what was corrected and what was not.",
                  epilog=EXIT_CODES_HELP)
codes_app = typer.Typer(invoke_without_command=True, add_completion=False,
                        help="List the code catalog, or show one code in detail.")
app.add_typer(codes_app, name="codes")


class CliError(Exception):
    """A failure reported as one line on stderr with an exit code."""

    def __init__(self, message: str, code: int) -> None:
        super().__init__(message)
        self.exit_code = code


def _fail(message: str, code: int) -> None:
    typer.echo(f"bitmend: {message}", err=True)
    raise typer.Exit(code)


@contextmanager
def _errors() -> Iterator[None]:
    """Map library exceptions to one line and an exit code, in one place."""
    from bitmend.channel.drop import NoFramesError
    from bitmend.channel.spec import ChannelSpecError
    from bitmend.codes.catalog import UnknownCodeError
    from bitmend.codes.linear import CodeDefinitionError
    from bitmend.container.assembler import DamagedDataError, NotAContainerError
    from bitmend.container.repair import RepairSpecError
    from bitmend.datagrams import EndpointError
    from bitmend.keyfile import KeyFileError
    from bitmend.records import RecordError

    # planning (and its analysis modules) is heavy to import: only a command that loaded it
    # can raise its error, so it is looked up when an error arrives, not before
    class _NoPlanError(Exception):
        pass

    def plan_error() -> type[Exception]:
        module = sys.modules.get("bitmend.planning")
        return module.PlanError if module is not None else _NoPlanError

    try:
        yield
        outputs.raise_pending_signal()  # a signal held while the outputs were committed
    except CliError as exc:
        _fail(str(exc), exc.exit_code)
    except outputs.OutputConflict as exc:
        _fail(str(exc), EXIT_USAGE)
    except outputs.BrokenOutput as exc:
        # the reader went away (e.g. `| head`): stop now, no traceback, a status that says so
        if exc.to_stdout:
            outputs.silence_stdout()
            raise typer.Exit(EXIT_BROKEN_PIPE)
        _fail(str(exc), EXIT_BROKEN_PIPE)
    except outputs.OutputError as exc:
        _fail(str(exc), EXIT_UNREADABLE)
    except outputs.Stopped as exc:
        outputs.silence_stdout()  # what stdout's buffer still holds is dropped, even into a stalled pipe
        _fail(str(exc), exc.exit_code)
    except UnknownCodeError as exc:
        _fail(str(exc), EXIT_USAGE)
    except (CodeDefinitionError, plan_error(), KeyFileError, RecordError, EndpointError, RepairSpecError) as exc:
        # a definition, key, record framing, endpoint or repair ratio that cannot be used
        _fail(str(exc), EXIT_USAGE)
    except ChannelSpecError as exc:
        _fail(str(exc), EXIT_USAGE)
    except NoFramesError as exc:
        _fail(str(exc), EXIT_UNREADABLE)
    except NotAContainerError as exc:
        _fail(str(exc), EXIT_UNREADABLE)
    except DamagedDataError as exc:
        _fail(f"stopped: {exc}", EXIT_DAMAGED)
    except BrokenPipeError:
        # printed text (typer.echo) whose reader went away: as above
        outputs.silence_stdout()
        raise typer.Exit(EXIT_BROKEN_PIPE)
    except OSError as exc:
        name = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        _fail(f"I/O error{name}: {exc.strerror or exc}", EXIT_UNREADABLE)
    except KeyboardInterrupt:
        _fail("interrupted", 130)


# ---- input and output ------------------------------------------------------------------

@contextmanager
def _open_input(path: str) -> Iterator[BinaryIO]:
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


def _open_output(path: Optional[str]):
    """stdout, or the -o target by the rules of `bitmend.outputs`: a regular file through a temp
    file renamed into place only on success (a failed or stopped run never leaves a half file
    that looks whole, nor a temp file), anything else written directly."""
    return outputs.writing(path)


@contextmanager
def _open_side_file(path: Optional[str], what: str,
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


def _stop_reason(exc: Optional[BaseException]) -> Optional[str]:
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


def _report_end(decoder, out: Optional[outputs.Output], failure: Optional[BaseException]) -> Optional[str]:
    """The summary line that ends a decode report; a run stopped early says why, how many bytes
    reached the output (0 for an -o file, whose temp file is removed) and is not complete."""
    if decoder is None:
        return None  # nothing was read: no report
    reason = _stop_reason(failure)
    if reason is None:
        return decoder.summary.to_json()
    summary = json.loads(decoder.summary.to_json())
    delivered = 0 if out is None or out.replaces_file else out.bytes_written
    summary.update(complete=False, stopped=reason, bytes_written=delivered)
    return json.dumps(summary, separators=(",", ":"))


def _ledger_end(chain, failure: Optional[BaseException]) -> Optional[str]:
    """The ledger of an inject run: what the chain did, also when the run was stopped early
    (marked "stopped"); None (no ledger file) when it failed for another reason."""
    if chain is None:
        return None
    if failure is None:
        return chain.ledger().to_json()
    reason = _stop_reason(failure)
    if reason is None:
        return None
    record = chain.ledger().to_dict()
    record["stopped"] = reason
    return json.dumps(record, indent=2)


def _input_size(stream: BinaryIO) -> int | None:
    try:
        return os.fstat(stream.fileno()).st_size or None
    except (OSError, ValueError, AttributeError):
        return None


@contextmanager
def _progress(label: str, total: int | None, enabled: bool) -> Iterator:
    """A rich progress bar on a terminal for long runs; a no-op otherwise."""
    if not enabled or not sys.stderr.isatty() or (total is not None and total < (8 << 20)):
        yield lambda done: None
        return
    from rich.progress import BarColumn, DownloadColumn, Progress, TransferSpeedColumn

    with Progress("[progress.description]{task.description}", BarColumn(), DownloadColumn(),
                  TransferSpeedColumn(), transient=True, console=None) as bar:
        task = bar.add_task(label, total=total)
        yield lambda done: bar.update(task, completed=done)


def _check_depth(depth: int) -> None:
    if not 1 <= depth <= MAX_DEPTH:
        raise CliError(f"--depth must be 1..{MAX_DEPTH}, got {depth}", EXIT_USAGE)


# ---- codes ------------------------------------------------------------------------------

def _code_facts(name: str) -> dict:
    from bitmend.codes.catalog import entry, get_code

    code = get_code(name)
    return {"name": name, "n": code.n, "k": code.k, "rate": round(code.rate, 6), "d": code.d, "t": code.t,
            "detects": code.detects, "perfect": code.is_perfect, "use": entry(name).use,
            # BCH: d is the designed distance, a lower bound; Reed-Solomon counts in 8-bit symbols
            "d_exact": getattr(code, "distance_kind", "exact") != "designed",
            "symbol_bits": getattr(code, "symbol_bits", 1)}


@codes_app.callback()
def codes(ctx: typer.Context, as_json: bool = typer.Option(False, "--json", help="Machine-readable output.")) -> None:
    """List the catalog: n, k, rate, minimum distance d, errors corrected t, errors detected."""
    if ctx.invoked_subcommand:
        return
    from bitmend.codes.catalog import code_names

    with _errors():
        facts = [_code_facts(name) for name in code_names()]
        if as_json:
            typer.echo(json.dumps(facts, indent=2))
            return
        typer.echo(f"{'code':<15}{'n':>4}{'k':>4}{'rate':>8}{'d':>6}{'t':>4}{'detects':>9}  {'unit':<6}use")
        for f in facts:
            mark = " (default)" if f["name"] == DEFAULT_CODE else ""
            d = str(f["d"]) if f["d_exact"] else f">={f['d']}"
            unit = "bit" if f["symbol_bits"] == 1 else "byte" if f["symbol_bits"] == 8 else f"{f['symbol_bits']}b"
            typer.echo(f"{f['name']:<15}{f['n']:>4}{f['k']:>4}{f['rate']:>8.3f}{d:>6}{f['t']:>4}"
                       f"{f['detects']:>9}  {unit:<6}{f['use']}{mark}")
        typer.echo(f"\ndefault: {DEFAULT_CODE} at depth {DEFAULT_DEPTH}; "
                   "t = errors corrected per codeword; detects = every pattern of up to this many "
                   "errors is at least detected while t are corrected (d - 1 - t); d >= n: designed "
                   "distance of a BCH code, a lower bound; unit: what n, k, d and t count (Reed-Solomon "
                   "symbols are bytes)")


KEY_FILE_HELP = ("Shared key (at least 16 bytes, raw or hex; not readable by others): every frame carries a tag "
                 "under it, and decode delivers only frames whose tag matches.")
CODE_FILE_HELP = ("Custom code: a text file ('generator' or 'parity-check', then rows of 0/1) or JSON "
                  "({\"generator\": [[...]]} or {\"parity_check\": [[...]]}).")


def _load_code(name: Optional[str], code_file: Optional[str]):
    """The code named by NAME/--code or read from --code-file (exactly one of them)."""
    if name and code_file:
        raise CliError("give a catalog code or --code-file, not both", EXIT_USAGE)
    if code_file:
        from bitmend.api import load_code_file
        return load_code_file(code_file)
    from bitmend.codes.catalog import get_code
    return get_code(name or DEFAULT_CODE)


@codes_app.command("show")
def codes_show(name: Optional[str] = typer.Argument(None, help="Catalog name, e.g. hamming-7-4."),
               code_file: Optional[str] = typer.Option(None, "--code-file", help=CODE_FILE_HELP),
               as_json: bool = typer.Option(False, "--json", help="Machine-readable output."),
               at: Optional[float] = typer.Option(None, "--at", help="Bit flip probability P of a BSC: add the "
                                                  "code's distance to the limit there (the best code of its "
                                                  "length at its block error).")) -> None:
    """Properties, systematic matrices, bounds, weight distribution and error probabilities
    on a binary symmetric channel of one code; with --at P, how far it is from the best
    possible code of its length."""
    from bitmend.properties import code_profile

    with _errors():
        if not name and not code_file:
            raise CliError("name a catalog code (see `bitmend codes`) or give --code-file", EXIT_USAGE)
        if at is not None and not 0.0 < at < 0.5:
            raise CliError(f"--at must be a bit flip probability between 0 and 0.5, got {at:g}", EXIT_USAGE)
        profile = code_profile(_load_code(name, code_file), at=at)
        if as_json:
            typer.echo(json.dumps(profile.to_dict(), indent=2))
            return
        for line in profile.render():
            typer.echo(line)


# ---- encode / decode / inspect -----------------------------------------------------------

@app.command()
def encode(
    source: str = typer.Argument("-", metavar="[IN]", help="Input file; - or omitted for stdin."),
    output: Optional[str] = typer.Option(None, "-o", "--output", help="Output file (default stdout)."),
    code: Optional[str] = typer.Option(None, "--code", help=f"Catalog code name (see `bitmend codes`); "
                                       f"default {DEFAULT_CODE}."),
    code_file: Optional[str] = typer.Option(None, "--code-file", help=CODE_FILE_HELP + " The code travels "
                                            "inside the container: decoding needs no file."),
    depth: int = typer.Option(DEFAULT_DEPTH, "--depth", help=f"Interleaving depth 1..{MAX_DEPTH}: "
                              "corrects any burst of depth*t bits."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", help="Payload bytes per frame (1..1048576)."),
    max_delay: float = typer.Option(DEFAULT_MAX_DELAY, "--max-delay", metavar="SECONDS",
                                    help="Send a frame at most this long after its first byte arrived, full or "
                                         "not (live sources such as `tail -f`); inf: only full frames."),
    records: Optional[str] = typer.Option(None, "--records", metavar="line|u16|u32",
                                          help="Keep record boundaries: each newline-ended line, or each record "
                                               "behind a big-endian 2- or 4-byte length, is sent as a frame of its "
                                               "own (a record longer than --frame-bytes is refused)."),
    idle: Optional[float] = typer.Option(None, "--idle", metavar="SECONDS",
                                         help="With IN = udp:HOST:PORT: end after this long without a datagram "
                                              "(default: run until SIGINT or SIGTERM)."),
    repair: Optional[str] = typer.Option(None, "--repair", metavar="R/K",
                                         help="After every K data frames (K <= 32) send R repair frames: any R "
                                              "frames of the group that are lost or damaged are rebuilt exactly. "
                                              "A group also closes at --max-delay and at the end."),
    key_file: Optional[str] = typer.Option(None, "--key-file", metavar="FILE",
                                           help=KEY_FILE_HELP),
) -> None:
    """Wrap a byte stream in coded, self-contained frames.

    IN and -o may be udp:HOST:PORT: each datagram received is one record, sent as one frame;
    each frame sent to udp: is one datagram."""
    from bitmend.api import Encoder
    from bitmend.container.format import MAX_PAYLOAD_BYTES
    from bitmend.live import pump_encode
    from bitmend.records import FRAMINGS, pump_records

    with _errors():
        _check_depth(depth)
        if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
            raise CliError(f"--frame-bytes must be 1..{MAX_PAYLOAD_BYTES}, got {frame_bytes}", EXIT_USAGE)
        if not max_delay > 0:  # (also refuses nan)
            raise CliError(f"--max-delay must be a positive number of seconds (or inf), got {max_delay:g}", EXIT_USAGE)
        if records is not None and records not in FRAMINGS:
            raise CliError(f"--records must be one of {', '.join(FRAMINGS)}, got {records!r}", EXIT_USAGE)
        _check_idle(idle)
        source_udp, output_udp = _endpoint(source), _endpoint(output)
        if idle is not None and source_udp is None:
            raise CliError("--idle applies to IN = udp:HOST:PORT only", EXIT_USAGE)
        if source_udp is not None and records is not None:
            raise CliError("a datagram is already one record: --records applies to byte-stream input", EXIT_USAGE)
        chosen = _load_code(code, code_file)  # unknown names and bad files fail before any output is made
        key = _load_key(key_file)
        from bitmend.container.writer import FrameWriter
        try:
            FrameWriter(io.BytesIO(), chosen, depth, frame_bytes, repair=repair)  # limits, before any output
        except ValueError as exc:
            raise CliError(str(exc), EXIT_USAGE) from None
        delay = None if max_delay == float("inf") else max_delay
        if output_udp is not None:
            _check_fits_datagram(chosen, depth, frame_bytes)
        if source_udp is not None:
            with outputs.deferred_signals():  # a signal ends the datagram input; the run finishes cleanly
                _encode_datagrams(source_udp, output, output_udp, code or chosen, depth, frame_bytes, idle, repair,
                                  delay, key)
            return
        with _open_input(source) as inp, _open_data_output(output, output_udp) as out:
            with _progress("encoding", _input_size(inp), True) as tick:
                with Encoder(out, code or chosen, depth, frame_bytes, repair=repair, key=key) as enc:
                    if records is not None:
                        pump_records(inp, enc, records, tick, max_delay=delay)
                    else:
                        pump_encode(inp, enc, delay, tick)


def _signal_taken() -> Optional[str]:
    """A SIGINT/SIGTERM held by outputs.deferred_signals(), taken as the end of a datagram
    input: the run then finishes normally, with its summary and report."""
    signum = outputs.take_pending_signal()
    return outputs.signal_name(signum) if signum is not None else None


def _say_listening(receiver) -> None:
    """One line once the socket is bound, so a sender (or a test) knows datagrams will land."""
    idle = f", ending after {receiver.idle:g} s without a datagram" if receiver.idle else ", until SIGINT or SIGTERM"
    typer.echo(f"bitmend: listening on {receiver.endpoint}{idle}", err=True)


def _check_idle(idle: Optional[float]) -> None:
    if idle is not None and not idle > 0:
        raise CliError(f"--idle must be a positive number of seconds, got {idle:g}", EXIT_USAGE)


def _endpoint(name: Optional[str]):
    """The udp:HOST:PORT endpoint a name gives, or None for a file name."""
    from bitmend.datagrams import EndpointError, parse_endpoint

    try:
        return parse_endpoint(name)
    except EndpointError as exc:
        raise CliError(str(exc), EXIT_USAGE) from None


def _check_fits_datagram(code, depth: int, frame_bytes: int) -> None:
    from bitmend.container import format as fmt
    from bitmend.container.writer import resolve_code
    from bitmend.datagrams import MAX_DATAGRAM

    code_id, defined = resolve_code(code)
    header = (fmt.FrameHeader.for_defined_code(defined, depth, 0, frame_bytes) if defined is not None
              else fmt.FrameHeader(code_id, depth, 0, frame_bytes))
    if header.frame_bytes > MAX_DATAGRAM:
        raise CliError(f"a full frame ({header.frame_bytes} bytes with --frame-bytes {frame_bytes}) does not fit "
                       f"one datagram ({MAX_DATAGRAM} bytes): lower --frame-bytes", EXIT_USAGE)


@contextmanager
def _open_data_output(output: Optional[str], endpoint):
    """The -o target: a datagram sender for udp:HOST:PORT, else a file or stdout (outputs rules)."""
    if endpoint is None:
        with _open_output(output) as out:
            yield out
        return
    from bitmend.datagrams import DatagramSender

    with DatagramSender(endpoint) as sender:
        yield sender


def _encode_datagrams(endpoint, output: Optional[str], output_udp, code, depth: int, frame_bytes: int,
                      idle: Optional[float], repair: Optional[str], max_delay: Optional[float],
                      key: Optional[bytes]) -> None:
    """encode udp:HOST:PORT: each datagram received is one record, sent at once as one frame;
    with --repair a group closes after K datagrams or --max-delay after its first."""
    import time

    from bitmend.api import Encoder
    from bitmend.datagrams import DatagramReceiver

    receiver = DatagramReceiver(endpoint, idle, ticks=True, stop_requested=_signal_taken)
    _say_listening(receiver)
    refused = 0
    group_since: Optional[float] = None
    with _open_data_output(output, output_udp) as out:
        with Encoder(out, code, depth, frame_bytes, repair=repair, key=key) as enc:
            for datagram in receiver:
                if datagram is not None:
                    if len(datagram) > frame_bytes:
                        refused += 1  # one oversized datagram must not end a live link
                        continue
                    enc.send_record(datagram)
                if not enc.group_open:
                    group_since = None
                elif group_since is None:
                    group_since = time.monotonic()
                elif max_delay is not None and time.monotonic() - group_since >= max_delay:
                    enc.end_group()
                    group_since = None
    ended = f", ended by {receiver.stopped_by}" if receiver.stopped_by else ""
    typer.echo(f"bitmend encode: {receiver.received} datagrams received, {receiver.received - refused} sent as "
               f"frames{ended}", err=True)
    if refused:
        raise CliError(f"{refused} datagrams longer than --frame-bytes {frame_bytes} were not sent", EXIT_DAMAGED)


@app.command()
def decode(
    source: str = typer.Argument("-", metavar="[IN]", help="Container file; - or omitted for stdin."),
    output: Optional[str] = typer.Option(None, "-o", "--output", help="Output file (default stdout)."),
    report: Optional[str] = typer.Option(None, "--report", help="Write a JSON Lines report here: "
                                         "one object per frame, then a summary."),
    on_error: Optional[str] = typer.Option(None, "--on-error", help="Damaged frames: keep (as corrected as "
                                           "possible; the default for byte streams), zero (zeros, also for lost "
                                           "frames of known size), drop (the default for records), or fail (stop)."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No summary line on stderr."),
    records: Optional[str] = typer.Option(None, "--records", metavar="line|u16|u32",
                                          help="Write each verified frame as one record in this framing; a record "
                                               "that did not arrive is missing whole (the report names it)."),
    idle: Optional[float] = typer.Option(None, "--idle", metavar="SECONDS",
                                         help="With IN = udp:HOST:PORT: end after this long without a datagram "
                                              "(default: run until SIGINT or SIGTERM, which end it cleanly)."),
    key_file: Optional[str] = typer.Option(None, "--key-file", metavar="FILE",
                                           help=KEY_FILE_HELP),
    accept_unauthenticated: bool = typer.Option(False, "--accept-unauthenticated",
                                                help="Also deliver frames whose origin cannot be checked: frames "
                                                     "without a tag while --key-file is given, or keyed frames "
                                                     "without --key-file. A tag that does not match is never "
                                                     "accepted."),
) -> None:
    """Recover the data; exit 0 only if every byte was CRC-verified.

    IN may be udp:HOST:PORT (each datagram holds frames) and -o may be udp:HOST:PORT (each
    verified frame's data is sent as one datagram, in order, once)."""
    from bitmend.api import Decoder
    from bitmend.container.assembler import ON_ERROR_CHOICES, DamagedDataError
    from bitmend.records import FRAMINGS, RECORD_ON_ERROR

    with _errors():
        if records is not None and records not in FRAMINGS:
            raise CliError(f"--records must be one of {', '.join(FRAMINGS)}, got {records!r}", EXIT_USAGE)
        _check_idle(idle)
        source_udp, output_udp = _endpoint(source), _endpoint(output)
        if idle is not None and source_udp is None:
            raise CliError("--idle applies to IN = udp:HOST:PORT only", EXIT_USAGE)
        record_mode = records is not None or output_udp is not None
        if record_mode:
            on_error = on_error or "drop"
            if on_error not in RECORD_ON_ERROR:
                raise CliError(f"--on-error for records and datagrams must be one of {', '.join(RECORD_ON_ERROR)} "
                               f"(a zero-filled record would be an invented one), got {on_error!r}", EXIT_USAGE)
        on_error = on_error or "keep"
        if on_error not in ON_ERROR_CHOICES:
            raise CliError(f"--on-error must be one of {', '.join(ON_ERROR_CHOICES)}, got {on_error!r}", EXIT_USAGE)
        outputs.check_distinct({"-o": output or "-", "--report": report})
        key = _load_key(key_file)
        if record_mode or source_udp is not None:
            with (outputs.deferred_signals() if source_udp is not None else nullcontext()):
                # with a datagram input, a signal ends the input and the run finishes cleanly
                _decode_records(source, source_udp, output, output_udp, report, on_error, records, idle, quiet,
                                key, accept_unauthenticated)
            return
        stopped: DamagedDataError | None = None
        report_file = None
        with _open_input(source) as inp:
            # made before any output (it reads nothing yet): a run stopped at any point has a summary
            on_frame = (lambda r: report_file.write_text(r.to_json() + "\n")) if report else None
            decoder = Decoder(inp, on_error, keep_frame_reports=False, on_frame=on_frame, key=key,
                              accept_unauthenticated=accept_unauthenticated)
            # the output is the outer context: the report's summary is written once the output is
            # whole (out.prepare()), and a report that cannot be written takes the output with it
            with _open_output(output) as out, \
                    _open_side_file(report, "report", lambda failure: _report_end(decoder, out, failure)) as report_file:
                with _progress("decoding", _input_size(inp), not quiet) as tick:
                    try:
                        live = not out.replaces_file  # a pipe or a device: each frame's bytes leave at once
                        while block := decoder.read1(COPY_CHUNK):
                            out.write(block)
                            if live:
                                out.flush()
                            tick(decoder.bytes_read)
                    except DamagedDataError as exc:
                        stopped = exc  # --on-error fail: keep the verified part written so far
                out.prepare()
        _end_decode(decoder._assembler, stopped, quiet)


def _end_decode(assembler, stopped, quiet: bool, first_notes: Sequence[str] = (),
                last_lines: Sequence[str] = ()) -> None:
    """decode's last words on stderr (a key mismatch, the summary, its notes) and its exit
    code: 0 only when the output is complete."""
    summary = assembler.summary()
    _say_key_mismatch(assembler)
    if not quiet:
        typer.echo(summary.one_line(), err=True)
        for note in [*first_notes, *summary.notes]:
            typer.echo(f"bitmend decode: note: {note}", err=True)
        for line in last_lines:
            typer.echo(f"bitmend decode: {line}", err=True)
    if stopped is not None:
        raise CliError(f"stopped: {stopped}", EXIT_DAMAGED)
    raise typer.Exit(EXIT_OK if summary.complete else EXIT_DAMAGED)


def _load_key(key_file: Optional[str]) -> Optional[bytes]:
    if key_file is None:
        return None
    from bitmend.keyfile import load_key_file

    try:
        return load_key_file(key_file)
    except OSError as exc:
        raise CliError(f"cannot read key file {key_file}: {exc.strerror or exc}", EXIT_UNREADABLE) from None


def _say_key_mismatch(assembler) -> None:
    """One clear line when frames were held back because the key and the frames disagree."""
    if assembler.keyed_without_key:
        typer.echo(f"bitmend decode: the frames are keyed: give --key-file to check them "
                   f"({assembler.keyed_without_key} frames not delivered; nothing unverified was written)", err=True)
    elif assembler.untagged_with_key:
        typer.echo(f"bitmend decode: the frames carry no tag, but --key-file was given "
                   f"({assembler.untagged_with_key} frames not delivered; --accept-unauthenticated takes them)",
                   err=True)


def _decode_records(source: str, source_udp, output: Optional[str], output_udp, report: Optional[str],
                    on_error: str, framing: Optional[str], idle: Optional[float], quiet: bool,
                    key: Optional[bytes] = None, accept_unauthenticated: bool = False) -> None:
    """decode in record mode (--records, or datagrams in or out): each verified frame's data
    is one record, written in its framing or sent as one datagram; lost records are left out."""
    from bitmend.container.assembler import DamagedDataError
    from bitmend.records import RecordReader, record_assembler, framed

    receiver = None
    if source_udp is not None:
        from bitmend.datagrams import DatagramReceiver

        receiver = DatagramReceiver(source_udp, idle, stop_requested=_signal_taken)
        _say_listening(receiver)
    stopped: DamagedDataError | None = None
    report_file = None
    with (nullcontext(None) if receiver is not None else _open_input(source)) as inp:
        on_frame = (lambda r: report_file.write_text(r.to_json() + "\n")) if report else None
        reader = RecordReader(record_assembler(receiver if receiver is not None else inp, on_error, key,
                                               accept_unauthenticated), on_frame,
                              keep_frame_reports=False)
        with _open_data_output(output, output_udp) as out, \
                _open_side_file(report, "report", lambda failure: _report_end(reader, out, failure)) as report_file:
            live = not out.replaces_file
            try:
                for _, record, _ in reader.with_reports():
                    out.write(record if output_udp is not None or framing is None else framed(record, framing))
                    if live:
                        out.flush()
            except DamagedDataError as exc:
                stopped = exc
            if hasattr(out, "prepare"):
                out.prepare()
    missing = []
    if reader.missing:
        shown = ", ".join(str(n) for n in reader.missing[:20]) + (" ..." if len(reader.missing) > 20 else "")
        missing.append(f"records missing (by sequence number): {shown}")
    received = []
    if receiver is not None:
        ended = f"; ended by {receiver.stopped_by}" if receiver.stopped_by else ""
        received.append(f"{receiver.received} datagrams received{ended}")
    _end_decode(reader._assembler, stopped, quiet, missing, received)


@app.command()
def inspect(
    source: str = typer.Argument("-", metavar="[IN]", help="Container file; - or omitted for stdin."),
    as_json: bool = typer.Option(False, "--json", help="JSON Lines: one object per frame, then a summary."),
) -> None:
    """List frames (sequence, offset, code, depth, sizes) without decoding payloads."""
    from bitmend.container.assembler import NotAContainerError
    from bitmend.container.reader import FrameScanner
    from bitmend.codes.catalog import CATALOG

    names = {e.code_id: e.name for e in CATALOG}
    with _errors():
        with _open_input(source) as inp:
            scanner = FrameScanner(inp, decode_payloads=False)
            count = payload = wire = 0
            streams: dict[str | None, int] = {}  # stream identity (None: version 1) -> frames
            for f in scanner.frames():
                h = f.header
                stream = f"{h.stream_id:016x}" if h.identified else None
                if count == 0 and not as_json:
                    typer.echo(f"{'seq':>8} {'offset':>12} {'stream':<17}{'code':<14}{'depth':>6}{'payload':>9}"
                               f"{'frame':>9}  notes")
                count += 1
                payload += 0 if h.repair else h.length
                wire += h.frame_bytes
                streams[stream] = streams.get(stream, 0) + 1
                notes = [w for w, on in (("last", h.last), ("repair", h.repair), ("keyed", h.keyed),
                                         ("truncated", f.truncated),
                                         ("header from copy", f.header_from_copy)) if on]
                if as_json:
                    typer.echo(json.dumps({"type": "frame", "seq": h.seq, "offset": f.offset,
                                           "stream": stream, "version": h.version,
                                           "position": h.position if h.identified and not h.repair else None,
                                           "code": names.get(h.code_id) or h.code_name,
                                           "depth": h.depth, "payload_bytes": h.length, "frame_bytes": h.frame_bytes,
                                           "last": h.last, "repair": h.repair, "keyed": h.keyed,
                                           "truncated": f.truncated,
                                           "marker_distance": f.marker_distance}, separators=(",", ":")))
                else:
                    typer.echo(f"{h.seq:>8} {f.offset:>12} {stream or '(version 1)':<17}"
                               f"{names.get(h.code_id) or h.code_name:<14}{h.depth:>6}{h.length:>9}"
                               f"{h.frame_bytes:>9}  {', '.join(notes)}")
            if count == 0:
                errors = scanner.stats.header_errors
                raise NotAContainerError("no decodable bitmend frame found in the input" +
                                         (f" ({errors[0]})" if errors else ""))
            overhead = wire / payload - 1 if payload else float("inf")
            if as_json:
                typer.echo(json.dumps({"type": "summary", "frames": count, "payload_bytes": payload,
                                       "container_bytes": wire, "skipped_bytes": scanner.stats.skipped_bytes,
                                       "streams": len(streams),
                                       "stream_frames": [{"stream": k, "frames": v} for k, v in streams.items()]},
                                      separators=(",", ":")))
            else:
                typer.echo(f"{count} frame{'s' if count != 1 else ''} in {len(streams)} "
                           f"stream{'s' if len(streams) != 1 else ''}, {payload} payload bytes in {wire} container "
                           f"bytes (overhead {overhead:.1%}), {scanner.stats.skipped_bytes} bytes outside frames")


# ---- inject / simulate ----------------------------------------------------------------------

CHANNEL_HELP = ("Fault model SPEC: bsc:p=1e-3 | burst:enter=1e-4,leave=0.1,bad=0.5[,good=0] | bytes:p=1e-3 | "
                "drop:p=0.01 | slip:p=1e-5. Repeat to chain models, applied in order.")


@app.command()
def inject(
    source: str = typer.Argument("-", metavar="[IN]", help="Input file; - or omitted for stdin."),
    output: Optional[str] = typer.Option(None, "-o", "--output", help="Output file (default stdout)."),
    channel: list[str] = typer.Option(..., "--channel", help=CHANNEL_HELP),
    seed: Optional[int] = typer.Option(None, "--seed", help="Seed of every random choice: the same seed gives the "
                                       "same damage (default: a fresh seed, written to the ledger and stderr)."),
    ledger: Optional[str] = typer.Option(None, "--ledger", help="Write what was done here as JSON: bits seen, "
                                         "flipped, bytes substituted, frames dropped, slips; positions for small inputs."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No summary line on stderr."),
) -> None:
    """Damage any byte stream on purpose, reproducibly (a streaming filter for fault tests)."""
    from bitmend.channel.spec import parse_channels
    from bitmend.inject import make_chain, run_chain

    with _errors():
        parse_channels(channel)  # a bad SPEC fails before any output is made
        outputs.check_distinct({"-o": output or "-", "--ledger": ledger})
        chain = make_chain(channel, seed)  # made first: a run stopped at any point has a ledger
        with _open_input(source) as inp, _open_output(output) as out, \
                _open_side_file(ledger, "ledger", lambda failure: _ledger_end(chain, failure)):
            with _progress("injecting", _input_size(inp), not quiet) as tick:
                record = run_chain(chain, inp, out, progress=tick)
            out.prepare()  # the ledger is written once the damaged copy is whole
        if not quiet:
            typer.echo(f"bitmend inject: seed {record.seed}: {record.one_line()}", err=True)


@app.command()
def simulate(
    code: str = typer.Option(DEFAULT_CODE, "--code", help="Catalog code name (see `bitmend codes`)."),
    code_file: Optional[str] = typer.Option(None, "--code-file", help=CODE_FILE_HELP),
    depth: int = typer.Option(DEFAULT_DEPTH, "--depth", help=f"Interleaving depth 1..{MAX_DEPTH}."),
    channel: list[str] = typer.Option(..., "--channel", help=CHANNEL_HELP + " Only bsc, burst and bytes here."),
    bits: float = typer.Option(1e7, "--bits", help="Payload bits to send per point, rounded up to whole frames "
                               "(e.g. 1e8)."),
    seed: Optional[int] = typer.Option(None, "--seed", help="Seed of data and channel (default: a fresh one, "
                                       "printed with the results)."),
    sweep: Optional[str] = typer.Option(None, "--sweep", help="Vary one channel parameter on a log grid: "
                                        "NAME=LOW..HIGH:COUNT, e.g. p=1e-4..1e-1:12."),
    plot: Optional[str] = typer.Option(None, "--plot", help="Draw measured points, theory and the uncoded line "
                                       "into F.png or F.svg (needs matplotlib)."),
    as_json: bool = typer.Option(False, "--json", help="Machine-readable output (JSON)."),
    as_csv: bool = typer.Option(False, "--csv", help="Machine-readable output (CSV, one row per point)."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", help="Payload bytes per simulated frame "
                                    "(the unit of the frame error rate)."),
    workers: Optional[int] = typer.Option(None, "--workers", metavar="N", help="Run a campaign of fixed work units "
                                          "on N processes of this machine (a local Dask cluster; 1: this process). "
                                          "A seed gives the same result for every N."),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", metavar="ADDRESS", help="Run the campaign on the "
                                            "Dask cluster whose scheduler is at HOST:PORT (its workers need bitmend "
                                            "installed). Unreachable: exit 3."),
    connect_timeout: float = typer.Option(10.0, "--connect-timeout", metavar="SECONDS", help="How long to wait for "
                                          "the --scheduler (or a --workers cluster) to answer."),
) -> None:
    """Monte Carlo trials of a code on a channel through the real encoder and decoder, with
    exact 95% intervals, beside theory and the uncoded channel. Ctrl-C during a campaign
    (--workers, --scheduler) prints what it measured so far and exits 130."""
    from bitmend import simulate as sim
    from bitmend.channel.spec import parse_channels
    from bitmend.container.format import MAX_PAYLOAD_BYTES

    with _errors():
        _check_depth(depth)
        if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
            raise CliError(f"--frame-bytes must be 1..{MAX_PAYLOAD_BYTES}, got {frame_bytes}", EXIT_USAGE)
        if not (bits >= 1 and bits == int(bits) and bits <= sim.MAX_BITS):
            raise CliError(f"--bits must be a whole number 1..{sim.MAX_BITS:.3g}, got {bits:g}", EXIT_USAGE)
        if as_json and as_csv:
            raise CliError("choose one of --json and --csv", EXIT_USAGE)
        if seed is not None and seed < 0:
            raise CliError(f"--seed must be >= 0, got {seed}", EXIT_USAGE)
        if code_file:
            if code != DEFAULT_CODE:
                raise CliError("give --code or --code-file, not both", EXIT_USAGE)
            from bitmend.api import load_code_file
            code = load_code_file(code_file)  # the simulator takes a code object as well as a name
        else:
            from bitmend.codes.catalog import get_code
            get_code(code)
        sim.check_channels(parse_channels(channel))
        grid = sim.parse_sweep(sweep) if sweep else None
        if plot:
            from bitmend.plot import PlotUnavailableError, check_plot_path
            try:
                check_plot_path(plot)
            except (ValueError, PlotUnavailableError) as exc:
                raise CliError(str(exc), EXIT_USAGE) from None
        stopped = None  # what stopped a campaign early, raised again once its partial result is out
        if workers is not None or scheduler is not None:
            result, stopped = _simulate_campaign(code, depth, channel, grid, int(bits), seed, frame_bytes,
                                                     workers, scheduler, connect_timeout)
            points = result.points if grid else (result,)
        else:
            total = sim.planned_coded_bytes(code, depth, int(bits), len(grid[1]) if grid else 1, frame_bytes)
            with _progress("simulating", total, True) as tick:
                if grid:
                    result = sim.sweep(code, depth, channel, grid, int(bits), seed, frame_bytes=frame_bytes,
                                       progress=tick)
                    points = result.points
                else:
                    result = sim.simulate(code, depth, channel, int(bits), seed, frame_bytes=frame_bytes,
                                          progress=tick)
                    points = (result,)
        if plot:
            from bitmend.plot import plot_results
            plot_results(result, plot, None if isinstance(code, str) else code)
        if as_json:
            typer.echo(result.to_json())
        elif as_csv:
            typer.echo(sim.to_csv(points), nl=False)
        else:
            lines = sim.format_sweep(result) if grid else sim.format_result(result)
            for line in lines + ([f"plot:      {plot}"] if plot else []):
                typer.echo(line)
        if stopped is not None:
            raise stopped


def _simulate_campaign(code, depth: int, channel: list[str], grid, bits: int, seed: Optional[int], frame_bytes: int,
                       workers: Optional[int], scheduler: Optional[str], connect_timeout: float) -> tuple:
    """(result, None) of `simulate --workers/--scheduler`, or (what the finished units
    measured, the interruption) after Ctrl-C or another stopping signal."""
    from bitmend import campaign as cmp

    if workers is not None and scheduler is not None:
        raise CliError("give --workers or --scheduler, not both", EXIT_USAGE)
    if workers is not None and workers < 1:
        raise CliError(f"--workers must be >= 1, got {workers}", EXIT_USAGE)
    if not connect_timeout > 0:
        raise CliError(f"--connect-timeout must be a positive number of seconds, got {connect_timeout:g}", EXIT_USAGE)
    try:
        with cmp.terminal_progress("simulating") as tick:
            kwargs = dict(frame_bytes=frame_bytes, workers=workers or 1, scheduler=scheduler, progress=tick,
                          connect_timeout=connect_timeout)
            if grid:
                return cmp.campaign_sweep(code, depth, channel, grid, bits, seed, **kwargs), None
            return cmp.campaign(code, depth, channel, bits, seed, **kwargs), None
    except cmp.SchedulerAddressError as exc:
        raise CliError(str(exc), EXIT_USAGE) from None
    except cmp.CampaignError as exc:
        raise CliError(str(exc), EXIT_UNREADABLE) from None
    except cmp.CampaignInterrupted as interrupted:
        if interrupted.partial is None:
            typer.echo("bitmend: no work unit had finished: nothing measured", err=True)
            raise interrupted.stop from None
        typer.echo("bitmend: interrupted; what the finished work units measured follows", err=True)
        return interrupted.partial, interrupted.stop


# ---- plan ----------------------------------------------------------------------------------

@app.command()
def plan(
    channel: list[str] = typer.Option(..., "--channel", help="The measured channel, as a fault model SPEC: "
                                      "bsc:p=1e-3 | burst:enter=1e-4,leave=0.1,bad=0.5[,good=0] | bytes:p=1e-3 | "
                                      "drop:p=0.01 | slip:p=1e-5. Repeat to chain models."),
    target: float = typer.Option(..., "--target", help="Residual error rate to meet, e.g. 1e-9."),
    per: str = typer.Option("bit", "--per", help="What the target counts: bit (wrong bits per delivered bit; "
                            "with drop:p=, bits never delivered count too) or frame (frames not delivered verified)."),
    max_overhead: Optional[str] = typer.Option(None, "--max-overhead", help="Largest overhead to accept, as a "
                                               "fraction or a percentage (0.25 or 25%); counts the whole frame."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", help="Payload bytes per frame."),
    max_depth: int = typer.Option(MAX_DEPTH, "--max-depth", help=f"Deepest interleaving to consider, 1..{MAX_DEPTH} "
                                  "(latency and memory grow with the depth)."),
    code_file: Optional[list[str]] = typer.Option(None, "--code-file", help="A custom code to rank with the "
                                                  "catalog (repeatable). " + CODE_FILE_HELP),
    verify: bool = typer.Option(False, "--verify", help="Confirm the top choice with a short simulation."),
    verify_bits: Optional[float] = typer.Option(None, "--verify-bits", help="Payload bits for --verify "
                                                "(default: enough to expect about 30 events, at most 2^24)."),
    seed: int = typer.Option(1, "--seed", help="Seed of the --verify simulation."),
    show: int = typer.Option(5, "--show", help="Choices to list."),
    as_json: bool = typer.Option(False, "--json", help="Machine-readable output."),
) -> None:
    """Rank codes that meet a residual error target on a channel by whole-frame overhead, each
    at its cheapest interleaving depth; with the formulas and assumptions behind each
    prediction, and on a BSC each code's distance to the best possible code. With drop:p=
    in the channel, also the repair ratio R/K (encode --repair) that rebuilds lost frames."""
    from bitmend.api import load_code_file
    from bitmend.planning import make_plan

    with _errors():
        if verify_bits is not None and not (verify_bits >= 1 and verify_bits == int(verify_bits)):
            raise CliError(f"--verify-bits must be a whole number >= 1, got {verify_bits:g}", EXIT_USAGE)
        extra = [load_code_file(path) for path in code_file or ()]
        result = make_plan(channel, target, per, frame_bytes, max_overhead, extra, verify,
                           int(verify_bits) if verify_bits else None, seed, max_depth)
        if as_json:
            typer.echo(json.dumps(result.to_dict(), indent=2))
        else:
            for line in result.render(show):
                typer.echo(line)
        if verify and result.verification is None:
            typer.echo("bitmend plan: nothing to verify: no choice meets the target", err=True)


@app.command()
def demo(
    sample: Optional[str] = typer.Option(None, "--sample", help="Input file (default: the bundled "
                                         "river-gauge telemetry log in samples/)."),
    flip_rate: float = typer.Option(1e-3, "--flip-rate", help="Bit flip probability of the test channel."),
    seed: int = typer.Option(2026, "--seed", help="Seed of the test channel."),
    channel: Optional[list[str]] = typer.Option(None, "--channel", help="Fault model SPEC instead of a BSC at "
                                                "--flip-rate (as for inject; repeat to chain)."),
) -> None:
    """Encode the bundled telemetry log, inject faults, decode, and prove the data came back,
    with the channel's ledger beside the decoder's report."""
    from bitmend.demo import run_demo

    with _errors():
        if seed < 0:
            raise CliError(f"--seed must be >= 0, got {seed}", EXIT_USAGE)
        ok = run_demo(sample, flip_rate, seed, typer.echo, channel or None)
        raise typer.Exit(EXIT_OK if ok else EXIT_DAMAGED)


def _command_path(ctx) -> str:
    """'bitmend codes show' for a context, however the program was started."""
    names = []
    while ctx is not None and ctx.parent is not None:
        names.append(ctx.info_name)
        ctx = ctx.parent
    return " ".join(["bitmend", *reversed(names)])


def _flush_stdout() -> None:
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


def main() -> None:
    """Console entry point: usage errors become one line and exit 2; never a traceback.
    SIGINT, SIGTERM and SIGHUP stop a run cleanly (exit 128 + the signal's number)."""
    outputs.install_signal_handlers()
    try:
        code = app(standalone_mode=False)
        outputs.raise_pending_signal()
        _flush_stdout()
    except outputs.Stopped as exc:  # a signal outside a command's own error handling
        outputs.remove_temp_files()
        outputs.silence_stdout()
        typer.echo(f"bitmend: {exc}", err=True)
        code = exc.exit_code
    except outputs.BrokenOutput:
        outputs.silence_stdout()
        code = EXIT_BROKEN_PIPE
    except outputs.OutputError as exc:
        typer.echo(f"bitmend: {exc}", err=True)
        code = EXIT_UNREADABLE
    except Exception as exc:
        # typer raises its own (or click's) UsageError, whose exit_code is 2; match by shape
        # so that either packaging of click works
        if getattr(exc, "exit_code", None) == EXIT_USAGE and hasattr(exc, "format_message"):
            message = exc.format_message()
            if message:  # (a bare `bitmend` has already printed the help)
                typer.echo(f"bitmend: {message} (see {_command_path(getattr(exc, 'ctx', None))} --help)", err=True)
            code = EXIT_USAGE
        elif type(exc).__name__ == "Abort":
            typer.echo("bitmend: interrupted", err=True)
            code = 130
        else:  # last resort: never a traceback
            typer.echo(f"bitmend: internal error: {type(exc).__name__}: {exc}", err=True)
            code = EXIT_UNREADABLE
    outputs.remove_temp_files()  # only a signal between a temp file's birth and its owner leaves one here
    raise SystemExit(code if isinstance(code, int) else EXIT_OK)
