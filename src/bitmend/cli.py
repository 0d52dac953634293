"""The bitmend command line: parse, call the library, print, set the exit code.

Exit codes: 0 every byte recovered and CRC-verified; 1 finished but data damaged or lost;
2 usage error (also: two outputs naming the same file); 3 nothing decodable (not a container)
or an I/O failure (a closed stdin or stdout, a full device, an output that is a directory);
141 (128 + SIGPIPE) the reader of the output went away (`| head`): the run stops at once,
silently for stdout, with one line for a named FIFO; 130, 143, 129 (128 + the signal's number)
stopped by SIGINT, SIGTERM or SIGHUP. A run that stops early removes its temp files, and
its --report or --ledger file still ends with its summary, marked "stopped".

Options are checked by typer itself (ranges, choices, the callbacks of `bitmend.cli_options`);
library errors become one line and an exit code in `_errors()`, in one place. Where and how
outputs are written: bitmend.outputs. The library loads inside the commands that need it, so
that a small encode or decode never imports planning, simulation, plotting or Dask, and a
small file's encode (container/small_frames.py) not even numpy; only the command being run is
built (`_app_for`).
"""

from __future__ import annotations

import os
import sys
from contextlib import contextmanager, nullcontext
from typing import Iterator, Optional, Sequence

import typer

from bitmend import outputs
from bitmend.cli_io import (EXIT_BROKEN_PIPE, EXIT_DAMAGED, EXIT_OK, EXIT_UNREADABLE, EXIT_USAGE, CliError,
                            flush_stdout, input_size, ledger_end, open_data_output, open_input, open_side_file,
                            progress, report_end)
from bitmend.cli_options import (CODE_FILE_HELP, DECODE_JOBS_HELP, ENCODE_JOBS_HELP, KEY_FILE_HELP, Framing,
                                 OnError, Per, TextArgument, bit_flip_probability, command, positive_seconds,
                                 seconds_or_inf, simulated_bits, whole_number)
# numpy-free copies of the catalog's and the format's defaults and limits (tests hold them equal):
# importing codes.catalog or container.format here would load numpy for every command
from bitmend.container.small_frames import (DEFAULT_CODE, DEFAULT_DEPTH, DEFAULT_FRAME_BYTES, MAX_DEPTH,
                                            MAX_PAYLOAD_BYTES)
from bitmend.errors import BitmendError, CodeError, ContainerError, SettingError
from bitmend.live import DEFAULT_MAX_DELAY
from bitmend.wording import counted

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
CODES_SUMMARY = "List the code catalog, or show one code in detail."
codes_app = typer.Typer(invoke_without_command=True, add_completion=False, help=CODES_SUMMARY,
                        short_help=CODES_SUMMARY)
app.add_typer(codes_app, name="codes")

_FILE_OUT = typer.Option(None, "-o", "--output", metavar="OUT", help="Output file (default stdout).")


# ---- library errors: one line and an exit code --------------------------------------------------

def _fail(message: str, code: int) -> None:
    typer.echo(f"bitmend: {message}", err=True)
    raise typer.Exit(code)


def _library_exit_code(exc: BitmendError) -> int:
    """The exit code of a library error, by its group. Order matters: damaged data and
    unreadable containers are ContainerErrors, which are OSErrors too."""
    from bitmend.container.assembler import DamagedDataError

    campaign = sys.modules.get("bitmend.campaign")  # heavy: only a command that loaded it can raise its errors
    if isinstance(exc, DamagedDataError):
        return EXIT_DAMAGED
    if isinstance(exc, ContainerError):
        return EXIT_UNREADABLE  # not a container, no frames to drop
    if isinstance(exc, (CodeError, SettingError)):
        return EXIT_USAGE
    if campaign is not None and isinstance(exc, campaign.CampaignError):
        return EXIT_USAGE if isinstance(exc, campaign.SchedulerAddressError) else EXIT_UNREADABLE
    return EXIT_USAGE  # a request this installation cannot serve (plotting without matplotlib)


@contextmanager
def _errors() -> Iterator[None]:
    """Map every failure of a command to one line on stderr and an exit code, in one place."""
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
    except BitmendError as exc:  # before OSError: container errors are OSErrors
        code = _library_exit_code(exc)
        _fail(f"stopped: {exc}" if code == EXIT_DAMAGED else str(exc), code)
    except BrokenPipeError:
        # printed text (typer.echo) whose reader went away: as above
        outputs.silence_stdout()
        raise typer.Exit(EXIT_BROKEN_PIPE)
    except OSError as exc:
        name = f" {exc.filename}" if exc.filename else ""
        _fail(f"I/O error{name}: {exc.strerror or exc}", EXIT_UNREADABLE)
    except KeyboardInterrupt:
        _fail("interrupted", 130)


def _usage(message: str) -> CliError:
    return CliError(message, EXIT_USAGE)


# ---- codes ------------------------------------------------------------------------------

CODES_LEGEND = ("t = errors corrected per codeword; detects = every pattern of up to this many errors is at "
                "least detected while t are corrected (d - 1 - t); >=d: a designed distance (BCH), a lower "
                "bound on the true minimum distance; unit: what n, k, d and t count (Reed-Solomon symbols "
                "are bytes)")


def _code_facts(name: str) -> dict:
    from bitmend.codes.catalog import entry, get_code

    code = get_code(name)
    return {"name": name, "n": code.n, "k": code.k, "rate": round(code.rate, 6), "d": code.d, "t": code.t,
            "detects": code.detects, "perfect": code.is_perfect, "use": entry(name).use,
            "d_exact": code.distance_kind == "exact", "symbol_bits": code.symbol_bits}


def _catalog_row(f: dict) -> str:
    d = str(f["d"]) if f["d_exact"] else f">={f['d']}"
    unit = {1: "bit", 8: "byte"}.get(f["symbol_bits"], f"{f['symbol_bits']}b")
    return f"{f['name']:<15}{f['n']:>4}{f['k']:>4}{f['rate']:>8.3f}{d:>6}{f['t']:>4}{f['detects']:>9}  {unit:<6}{f['use']}"


@codes_app.callback()
def codes(ctx: typer.Context, as_json: bool = typer.Option(False, "--json", help="Machine-readable output.")) -> None:
    """List the catalog: n, k, rate, minimum distance d, errors corrected t, errors detected."""
    if ctx.invoked_subcommand:
        return
    from bitmend.codes.catalog import code_names

    with _errors():
        facts = [_code_facts(name) for name in code_names()]
        if as_json:
            import json

            typer.echo(json.dumps(facts, indent=2))
            return
        typer.echo(f"{'code':<15}{'n':>4}{'k':>4}{'rate':>8}{'d':>6}{'t':>4}{'detects':>9}  {'unit':<6}use")
        for f in facts:
            typer.echo(_catalog_row(f))
        typer.echo(f"\ndefault: {DEFAULT_CODE} at depth {DEFAULT_DEPTH}; {CODES_LEGEND}")


def _load_code(name: Optional[str], code_file: Optional[str]):
    """The code named by NAME/--code or read from --code-file (at most one of them)."""
    if name and code_file:
        raise _usage("give a catalog code or --code-file, not both")
    if code_file:
        from bitmend.api import load_code_file
        return load_code_file(code_file)
    from bitmend.codes.catalog import get_code
    return get_code(name or DEFAULT_CODE)


@command(codes_app, "show")
def codes_show(name: Optional[str] = typer.Argument(None, metavar="[NAME]", click_type=TextArgument(),
                                                    help="Catalog name, e.g. hamming-7-4."),
               code_file: Optional[str] = typer.Option(None, "--code-file", metavar="FILE", help=CODE_FILE_HELP),
               as_json: bool = typer.Option(False, "--json", help="Machine-readable output."),
               at: Optional[float] = typer.Option(None, "--at", metavar="P", callback=bit_flip_probability,
                                                  help="Bit flip probability P of a BSC (0 < P < 0.5): add the "
                                                       "code's distance to the limit there (the best code of its "
                                                       "length at its block error).")) -> None:
    """Properties, matrices, bounds and weight distribution of one code.

    Also its error probabilities on a binary symmetric channel; with --at P, how far it is
    from the best possible code of its length."""
    from bitmend.properties import code_profile

    with _errors():
        if not name and not code_file:
            raise _usage("name a catalog code (see `bitmend codes`) or give --code-file")
        profile = code_profile(_load_code(name, code_file), at=at)
        if as_json:
            import json

            typer.echo(json.dumps(profile.to_dict(), indent=2))
            return
        for line in profile.render():
            typer.echo(line)


# ---- encode -----------------------------------------------------------------------------------

def _endpoint(name: Optional[str]):
    """The udp:HOST:PORT endpoint a name gives, or None for a file name."""
    if not name or not name.startswith("udp:"):
        return None  # as parse_endpoint says, without importing the network module for a file
    from bitmend.datagrams import parse_endpoint

    return parse_endpoint(name)


def _check_idle_input(idle: Optional[float], source_udp) -> None:
    if idle is not None and source_udp is None:
        raise _usage("--idle applies to IN = udp:HOST:PORT only")


def _check_encoder_settings(code, depth: int, frame_bytes: int, repair: Optional[str], output_udp) -> None:
    """Refuse settings the frame writer cannot serve before any output is made."""
    import io

    from bitmend.container.writer import FrameWriter

    FrameWriter(io.BytesIO(), code, depth, frame_bytes, repair=repair)  # its limits raise SettingError
    if output_udp is not None:
        from bitmend.datagrams import check_fits_datagram
        check_fits_datagram(code, depth, frame_bytes)


@command(app)
def encode(
    source: str = typer.Argument("-", metavar="[IN]", click_type=TextArgument(),
                                 help="Input file; - or omitted for stdin."),
    output: Optional[str] = _FILE_OUT,
    code: Optional[str] = typer.Option(None, "--code", metavar="NAME", help=f"Catalog code name (see `bitmend "
                                       f"codes`); default {DEFAULT_CODE}."),
    code_file: Optional[str] = typer.Option(None, "--code-file", metavar="FILE", help=CODE_FILE_HELP + " The code "
                                            "travels inside the container: decoding needs no file."),
    depth: int = typer.Option(DEFAULT_DEPTH, "--depth", metavar="D", min=1, max=MAX_DEPTH,
                              help="Interleaving depth: corrects any burst of depth*t bits."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", metavar="B", min=1, max=MAX_PAYLOAD_BYTES,
                                    help="Payload bytes per frame."),
    max_delay: float = typer.Option(DEFAULT_MAX_DELAY, "--max-delay", metavar="SECONDS", callback=seconds_or_inf,
                                    help="Send a frame at most this long after its first byte arrived, full or "
                                         "not (live sources such as `tail -f`); inf: only full frames."),
    records: Optional[Framing] = typer.Option(None, "--records", metavar="line|u16|u32",
                                              help="Keep record boundaries: each newline-ended line, or each record "
                                                   "behind a big-endian 2- or 4-byte length, is sent as a frame of "
                                                   "its own (a record longer than --frame-bytes is refused)."),
    idle: Optional[float] = typer.Option(None, "--idle", metavar="SECONDS", callback=positive_seconds,
                                         help="With IN = udp:HOST:PORT: end after this long without a datagram "
                                              "(default: run until SIGINT or SIGTERM)."),
    repair: Optional[str] = typer.Option(None, "--repair", metavar="R/K",
                                         help="After every K data frames (K <= 32) send R repair frames: any R "
                                              "frames of the group that are lost or damaged are rebuilt exactly. "
                                              "A group also closes at --max-delay and at the end."),
    key_file: Optional[str] = typer.Option(None, "--key-file", metavar="FILE", help=KEY_FILE_HELP),
    jobs: int = typer.Option(0, "--jobs", metavar="N", min=0, help=ENCODE_JOBS_HELP),
) -> None:
    """Wrap a byte stream in coded, self-contained frames.

    IN and -o may be udp:HOST:PORT: each datagram received is one record, sent as one frame;
    each frame sent to udp: is one datagram."""
    with _errors():
        plain = (records is None and idle is None and repair is None and code_file is None and jobs <= 1
                 and not source.startswith("udp:") and not (output or "").startswith("udp:"))
        if plain and _small_input(source, code or DEFAULT_CODE):
            _encode_small(source, output, code or DEFAULT_CODE, depth, frame_bytes, _load_key(key_file))
            return
        source_udp, output_udp = _endpoint(source), _endpoint(output)
        _check_idle_input(idle, source_udp)
        if source_udp is not None and records is not None:
            raise _usage("a datagram is already one record: --records applies to byte-stream input")
        _check_jobs(jobs, records is not None or source_udp is not None or output_udp is not None)
        chosen = _load_code(code, code_file)  # unknown names and bad files fail before any output is made
        key = _load_key(key_file)
        _check_encoder_settings(chosen, depth, frame_bytes, repair, output_udp)
        settings = dict(code=code or chosen, depth=depth, frame_bytes=frame_bytes, repair=repair, key=key)
        delay = None if max_delay == float("inf") else max_delay
        if source_udp is not None:
            with outputs.deferred_signals():  # a signal ends the datagram input; the run finishes cleanly
                _encode_datagrams(source_udp, output, output_udp, settings, idle, delay)
        else:
            _encode_stream(source, output, output_udp, settings, records, delay, jobs)


def _small_input(source: str, code: str) -> bool:
    """True when IN is a regular file (or stdin redirected from one) small enough for the
    plain-Python frame writer with this code (container/small_frames.py), which then spares
    the run numpy's import: the same container, in a fraction of the start-up time."""
    import stat

    from bitmend.container.small_frames import small_enough

    try:
        info = os.fstat(0) if source == "-" else os.stat(source)
    except OSError:
        return False  # the normal path reports it
    return stat.S_ISREG(info.st_mode) and small_enough(code, info.st_size)


def _encode_small(source: str, output: Optional[str], code: str, depth: int, frame_bytes: int,
                  key: Optional[bytes]) -> None:
    """encode a small regular file with the plain-Python writer. The whole file is there at
    once, so every frame is full but the last, as the normal path would send them."""
    from bitmend.container.small_frames import SmallFrameWriter

    with open_input(source) as inp, open_data_output(output, None) as out:
        writer = SmallFrameWriter(out, code, depth, frame_bytes, key=key)
        while block := inp.read(COPY_CHUNK):
            writer.write(block)
        writer.close()


def _check_jobs(jobs: int, record_mode: bool) -> None:
    """Records and datagrams are coded one frame at a time as they come (batches would hold
    them back): more than one job there is refused rather than ignored."""
    if record_mode and jobs > 1:
        raise _usage("--jobs applies to byte streams; records and datagrams are coded one frame at a time")


def _jobs_for(jobs: int, inp) -> int:
    """--jobs as given, or for 0 the automatic choice by the input's size (a pipe: 1)."""
    from bitmend.container.workers import automatic_jobs

    return jobs if jobs > 0 else automatic_jobs(input_size(inp))


def _encode_stream(source: str, output: Optional[str], output_udp, settings: dict, records: Optional[Framing],
                   delay: Optional[float], jobs: int = 1) -> None:
    """encode a file or stdin: bytes (or records) in, frames out, each frame at most delay
    seconds after its first byte arrived."""
    from bitmend.api import Encoder
    from bitmend.live import pump_encode
    from bitmend.records import pump_records

    with open_input(source) as inp, open_data_output(output, output_udp) as out:
        workers = _jobs_for(jobs, inp) if records is None and output_udp is None else 1
        # the encoder (and its forked workers) before the progress bar and its thread
        with Encoder(out, **settings, jobs=workers) as enc, progress("encoding", input_size(inp), True) as tick:
            if records is not None:
                pump_records(inp, enc, records.value, tick, max_delay=delay)
            else:
                pump_encode(inp, enc, delay, tick)


def _signal_taken() -> Optional[str]:
    """A SIGINT/SIGTERM held by outputs.deferred_signals(), taken as the end of a datagram
    input: the run then finishes normally, with its summary and report."""
    signum = outputs.take_pending_signal()
    return outputs.signal_name(signum) if signum is not None else None


def _listen(endpoint, idle: Optional[float], ticks: bool = False):
    """A bound datagram receiver, and one line once it is bound, so a sender (or a test)
    knows datagrams will land."""
    from bitmend.datagrams import DatagramReceiver

    receiver = DatagramReceiver(endpoint, idle, ticks=ticks, stop_requested=_signal_taken)
    until = f", ending after {idle:g} s without a datagram" if idle else ", until SIGINT or SIGTERM"
    typer.echo(f"bitmend: listening on {receiver.endpoint}{until}", err=True)
    return receiver


def _encode_datagrams(endpoint, output: Optional[str], output_udp, settings: dict, idle: Optional[float],
                      delay: Optional[float]) -> None:
    """encode udp:HOST:PORT: each datagram received is one record, sent at once as one frame;
    with --repair a group closes after K datagrams or --max-delay after its first."""
    from bitmend.api import Encoder
    from bitmend.datagrams import pump_datagrams

    receiver = _listen(endpoint, idle, ticks=True)
    with open_data_output(output, output_udp) as out, Encoder(out, **settings) as enc:
        refused = pump_datagrams(receiver, enc, settings["frame_bytes"], delay)
    ended = f", ended by {receiver.stopped_by}" if receiver.stopped_by else ""
    typer.echo(f"bitmend encode: {counted(receiver.received, 'datagram')} received, "
               f"{receiver.received - refused} sent as frames{ended}", err=True)
    if refused:
        raise CliError(f"{counted(refused, 'datagram')} longer than --frame-bytes {settings['frame_bytes']} "
                       f"{'was' if refused == 1 else 'were'} not sent", EXIT_DAMAGED)


# ---- decode -----------------------------------------------------------------------------------

def _decode_policy(on_error: Optional[OnError], record_mode: bool) -> str:
    """--on-error as given, else the default: drop for records and datagrams (a record is
    whole or missing), keep for byte streams. A record is never zero-filled."""
    if not record_mode:
        return (on_error or OnError.keep).value
    chosen = on_error or OnError.drop
    if chosen is OnError.zero:
        raise _usage("--on-error for records and datagrams must be one of drop, keep, fail "
                     "(a zero-filled record would be an invented one), got 'zero'")
    return chosen.value


@command(app)
def decode(
    source: str = typer.Argument("-", metavar="[IN]", click_type=TextArgument(),
                                 help="Container file; - or omitted for stdin."),
    output: Optional[str] = _FILE_OUT,
    report: Optional[str] = typer.Option(None, "--report", metavar="FILE", help="Write a JSON Lines report here: "
                                         "one object per frame, then a summary."),
    on_error: Optional[OnError] = typer.Option(None, "--on-error", metavar="POLICY",
                                               help="Damaged frames: keep (as corrected as possible; the default "
                                                    "for byte streams), zero (zeros, also for lost frames of known "
                                                    "size), drop (the default for records), or fail (stop)."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No summary line on stderr."),
    records: Optional[Framing] = typer.Option(None, "--records", metavar="line|u16|u32",
                                              help="Write each verified frame as one record in this framing; a "
                                                   "record that did not arrive is missing whole (the report names "
                                                   "it)."),
    idle: Optional[float] = typer.Option(None, "--idle", metavar="SECONDS", callback=positive_seconds,
                                         help="With IN = udp:HOST:PORT: end after this long without a datagram "
                                              "(default: run until SIGINT or SIGTERM, which end it cleanly)."),
    key_file: Optional[str] = typer.Option(None, "--key-file", metavar="FILE", help=KEY_FILE_HELP),
    accept_unauthenticated: bool = typer.Option(False, "--accept-unauthenticated",
                                                help="Also deliver frames whose origin cannot be checked: frames "
                                                     "without a tag while --key-file is given, or keyed frames "
                                                     "without --key-file. A tag that does not match is never "
                                                     "accepted."),
    jobs: int = typer.Option(0, "--jobs", metavar="N", min=0, help=DECODE_JOBS_HELP),
) -> None:
    """Recover the data; exit 0 only if every byte was CRC-verified.

    IN may be udp:HOST:PORT (each datagram holds frames) and -o may be udp:HOST:PORT (each
    verified frame's data is sent as one datagram, in order, once)."""
    with _errors():
        source_udp, output_udp = _endpoint(source), _endpoint(output)
        _check_idle_input(idle, source_udp)
        record_mode = records is not None or output_udp is not None
        _check_jobs(jobs, record_mode or source_udp is not None)
        policy = _decode_policy(on_error, record_mode)
        outputs.check_distinct({"-o": output or "-", "--report": report})
        key = _load_key(key_file)
        if record_mode or source_udp is not None:
            with (outputs.deferred_signals() if source_udp is not None else nullcontext()):
                # with a datagram input, a signal ends the input and the run finishes cleanly
                _decode_records(source, source_udp, output, output_udp, report, policy,
                                records.value if records else None, idle, quiet, key, accept_unauthenticated)
        else:
            _decode_stream(source, output, report, policy, quiet, key, accept_unauthenticated, jobs)


def _decode_stream(source: str, output: Optional[str], report: Optional[str], on_error: str, quiet: bool,
                   key: Optional[bytes], accept_unauthenticated: bool, jobs: int = 1) -> None:
    """decode a byte stream: verified bytes out as each frame completes, a report line per
    frame, then decode's last words and exit code."""
    from bitmend.api import Decoder
    from bitmend.container.assembler import DamagedDataError

    stopped: DamagedDataError | None = None
    report_file = None
    with open_input(source) as inp:
        # made before any output (it reads nothing yet): a run stopped at any point has a summary
        on_frame = (lambda r: report_file.write_text(r.to_json() + "\n")) if report else None
        decoder = Decoder(inp, on_error, keep_frame_reports=False, on_frame=on_frame, key=key,
                          accept_unauthenticated=accept_unauthenticated, jobs=_jobs_for(jobs, inp))
        # the output is the outer context: the report's summary is written once the output is
        # whole (out.prepare()), and a report that cannot be written takes the output with it
        with outputs.writing(output) as out, \
                open_side_file(report, "report", lambda failure: report_end(decoder, out, failure)) as report_file:
            with progress("decoding", input_size(inp), not quiet) as tick:
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
    _end_decode(decoder, stopped, quiet)


def _end_decode(reader, stopped, quiet: bool, first_notes: Sequence[str] = (),
                last_lines: Sequence[str] = ()) -> None:
    """decode's last words on stderr (a key mismatch, the summary, its notes) and its exit
    code: 0 only when the output is complete. reader: a Decoder or a RecordReader."""
    summary = reader.summary
    _say_key_mismatch(reader)
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
    except BitmendError:
        raise
    except OSError as exc:
        raise CliError(f"cannot read key file {key_file}: {exc.strerror or exc}", EXIT_UNREADABLE) from None


def _say_key_mismatch(reader) -> None:
    """One clear line when frames were held back because the key and the frames disagree."""
    if reader.keyed_without_key:
        typer.echo(f"bitmend decode: the frames are keyed: give --key-file to check them "
                   f"({counted(reader.keyed_without_key, 'frame')} not delivered; nothing unverified was written)",
                   err=True)
    elif reader.untagged_with_key:
        typer.echo(f"bitmend decode: the frames carry no tag, but --key-file was given "
                   f"({counted(reader.untagged_with_key, 'frame')} not delivered; --accept-unauthenticated "
                   f"takes them)", err=True)


def _decode_records(source: str, source_udp, output: Optional[str], output_udp, report: Optional[str],
                    on_error: str, framing: Optional[str], idle: Optional[float], quiet: bool,
                    key: Optional[bytes] = None, accept_unauthenticated: bool = False) -> None:
    """decode in record mode (--records, or datagrams in or out): each verified frame's data
    is one record, written in its framing or sent as one datagram; lost records are left out."""
    from bitmend.container.assembler import DamagedDataError
    from bitmend.records import RecordReader, framed, record_assembler

    receiver = _listen(source_udp, idle) if source_udp is not None else None
    stopped: DamagedDataError | None = None
    report_file = None
    with (nullcontext(None) if receiver is not None else open_input(source)) as inp:
        on_frame = (lambda r: report_file.write_text(r.to_json() + "\n")) if report else None
        reader = RecordReader(record_assembler(receiver if receiver is not None else inp, on_error, key,
                                               accept_unauthenticated), on_frame, keep_frame_reports=False)
        with open_data_output(output, output_udp) as out, \
                open_side_file(report, "report", lambda failure: report_end(reader, out, failure)) as report_file:
            live = not out.replaces_file
            try:
                for _, record, _ in reader.with_reports():
                    out.write(record if output_udp is not None or framing is None else framed(record, framing))
                    if live:
                        out.flush()
            except DamagedDataError as exc:
                stopped = exc
            out.prepare()
    _end_decode(reader, stopped, quiet, _missing_records(reader.missing), _received(receiver))


def _missing_records(missing: Sequence[int]) -> list[str]:
    if not missing:
        return []
    shown = ", ".join(str(n) for n in missing[:20]) + (" ..." if len(missing) > 20 else "")
    return [f"records missing (by sequence number): {shown}"]


def _received(receiver) -> list[str]:
    if receiver is None:
        return []
    ended = f"; ended by {receiver.stopped_by}" if receiver.stopped_by else ""
    return [f"{counted(receiver.received, 'datagram')} received{ended}"]


# ---- inspect ----------------------------------------------------------------------------------

@command(app)
def inspect(
    source: str = typer.Argument("-", metavar="[IN]", click_type=TextArgument(),
                                 help="Container file; - or omitted for stdin."),
    as_json: bool = typer.Option(False, "--json", help="JSON Lines: one object per frame, then a summary."),
) -> None:
    """List frames (sequence, offset, code, depth, sizes) without decoding payloads."""
    from bitmend.container.survey import TABLE_HEADER, ContainerSurvey

    with _errors():
        with open_input(source) as inp:
            survey = ContainerSurvey(inp)
            for number, frame in enumerate(survey.frames()):
                if number == 0 and not as_json:
                    typer.echo(TABLE_HEADER)
                typer.echo(frame.to_json() if as_json else frame.table_row())
            summary = survey.summary()
            typer.echo(summary.to_json() if as_json else summary.one_line())


# ---- inject / simulate ----------------------------------------------------------------------

CHANNEL_HELP = ("Fault model SPEC: bsc:p=1e-3 | burst:enter=1e-4,leave=0.1,bad=0.5[,good=0] | bytes:p=1e-3 | "
                "drop:p=0.01 | slip:p=1e-5. Repeat to chain models, applied in order.")


@command(app)
def inject(
    source: str = typer.Argument("-", metavar="[IN]", click_type=TextArgument(),
                                 help="Input file; - or omitted for stdin."),
    output: Optional[str] = _FILE_OUT,
    channel: list[str] = typer.Option(..., "--channel", metavar="SPEC", help=CHANNEL_HELP),
    seed: Optional[int] = typer.Option(None, "--seed", metavar="N", min=0,
                                       help="Seed of every random choice: the same seed gives the same damage "
                                            "(default: a fresh seed, written to the ledger and stderr)."),
    ledger: Optional[str] = typer.Option(None, "--ledger", metavar="FILE",
                                         help="Write what was done here as JSON: bits seen, flipped, bytes "
                                              "substituted, frames dropped, slips; positions for small inputs."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No summary line on stderr."),
) -> None:
    """Damage any byte stream on purpose, reproducibly: a streaming filter for fault tests."""
    from bitmend.channel.spec import parse_channels
    from bitmend.inject import make_chain, run_chain

    with _errors():
        parse_channels(channel)  # a bad SPEC fails before any output is made
        outputs.check_distinct({"-o": output or "-", "--ledger": ledger})
        chain = make_chain(channel, seed)  # made first: a run stopped at any point has a ledger
        with open_input(source) as inp, outputs.writing(output) as out, \
                open_side_file(ledger, "ledger", lambda failure: ledger_end(chain, failure)):
            with progress("injecting", input_size(inp), not quiet) as tick:
                record = run_chain(chain, inp, out, progress=tick)
            out.prepare()  # the ledger is written once the damaged copy is whole
        if not quiet:
            typer.echo(f"bitmend inject: seed {record.seed}: {record.one_line()}", err=True)


@command(app)
def simulate(
    code: str = typer.Option(DEFAULT_CODE, "--code", metavar="NAME", help="Catalog code name (see `bitmend codes`)."),
    code_file: Optional[str] = typer.Option(None, "--code-file", metavar="FILE", help=CODE_FILE_HELP),
    depth: int = typer.Option(DEFAULT_DEPTH, "--depth", metavar="D", min=1, max=MAX_DEPTH,
                              help="Interleaving depth."),
    channel: list[str] = typer.Option(..., "--channel", metavar="SPEC",
                                      help=CHANNEL_HELP + " Only bsc, burst and bytes here."),
    bits: float = typer.Option(1e7, "--bits", metavar="N", callback=simulated_bits,
                               help="Payload bits to send per point, rounded up to whole frames (e.g. 1e8)."),
    seed: Optional[int] = typer.Option(None, "--seed", metavar="N", min=0, help="Seed of data and channel "
                                       "(default: a fresh one, printed with the results)."),
    sweep: Optional[str] = typer.Option(None, "--sweep", metavar="GRID", help="Vary one channel parameter on a "
                                        "log grid: NAME=LOW..HIGH:COUNT, e.g. p=1e-4..1e-1:12."),
    plot: Optional[str] = typer.Option(None, "--plot", metavar="FILE", help="Draw measured points, theory and the "
                                       "uncoded line into FILE.png or FILE.svg (needs matplotlib)."),
    as_json: bool = typer.Option(False, "--json", help="Machine-readable output (JSON)."),
    as_csv: bool = typer.Option(False, "--csv", help="Machine-readable output (CSV, one row per point)."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", metavar="B", min=1, max=MAX_PAYLOAD_BYTES,
                                    help="Payload bytes per simulated frame (the unit of the frame error rate)."),
    workers: Optional[int] = typer.Option(None, "--workers", metavar="N", min=1,
                                          help="Run a campaign of fixed work units on N processes of this machine "
                                               "(a local Dask cluster; 1: this process). A seed gives the same "
                                               "result for every N."),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", metavar="ADDRESS", help="Run the campaign on the "
                                            "Dask cluster whose scheduler is at HOST:PORT (its workers need bitmend "
                                            "installed). Unreachable: exit 3."),
    connect_timeout: float = typer.Option(10.0, "--connect-timeout", metavar="SECONDS", callback=positive_seconds,
                                          help="How long to wait for the --scheduler (or a --workers cluster) to "
                                               "answer."),
) -> None:
    """Monte Carlo trials of a code on a channel through the real encoder and decoder.

    Each point has exact 95% intervals, beside theory and the uncoded channel. Ctrl-C during
    a campaign (--workers, --scheduler) prints what it measured so far and exits 130."""
    with _errors():
        if as_json and as_csv:
            raise _usage("choose one of --json and --csv")
        if workers is not None and scheduler is not None:
            raise _usage("give --workers or --scheduler, not both")
        custom, grid = _simulation_inputs(code, code_file, channel, sweep, plot)
        stopped = None  # what stopped a campaign early, raised again once its partial result is out
        if workers is not None or scheduler is not None:
            result, stopped = _simulate_campaign(custom or code, depth, channel, grid, int(bits), seed, frame_bytes,
                                                 workers, scheduler, connect_timeout)
        else:
            result = _simulate_here(custom or code, depth, channel, grid, int(bits), seed, frame_bytes)
        if plot:
            from bitmend.plot import plot_results
            plot_results(result, plot, custom)
        _print_simulation(result, grid is not None, as_json, as_csv, plot)
        if stopped is not None:
            raise stopped


def _simulation_inputs(code: str, code_file: Optional[str], channel: list[str], sweep: Optional[str],
                       plot: Optional[str]) -> tuple:
    """(the custom code or None, the sweep grid or None), every input checked before any trial."""
    from bitmend import simulate as sim
    from bitmend.channel.spec import parse_channels

    if code_file and code != DEFAULT_CODE:
        raise _usage("give --code or --code-file, not both")
    if code_file:
        from bitmend.api import load_code_file
        custom = load_code_file(code_file)  # the simulator takes a code object as well as a name
    else:
        from bitmend.codes.catalog import get_code
        get_code(code)
        custom = None
    sim.check_channels(parse_channels(channel))
    grid = sim.parse_sweep(sweep) if sweep else None
    if plot:
        from bitmend.plot import check_plot_path
        check_plot_path(plot)  # SettingError for a file type that is not drawn
    return custom, grid


def _simulate_here(code, depth: int, channel: list[str], grid, bits: int, seed: Optional[int], frame_bytes: int):
    """simulate in this process, with a progress bar on a terminal."""
    from bitmend import simulate as sim

    total = sim.planned_coded_bytes(code, depth, bits, len(grid[1]) if grid else 1, frame_bytes)
    with progress("simulating", total, True) as tick:
        if grid:
            return sim.sweep(code, depth, channel, grid, bits, seed, frame_bytes=frame_bytes, progress=tick)
        return sim.simulate(code, depth, channel, bits, seed, frame_bytes=frame_bytes, progress=tick)


def _print_simulation(result, swept: bool, as_json: bool, as_csv: bool, plot: Optional[str]) -> None:
    from bitmend import simulate as sim

    if as_json:
        typer.echo(result.to_json())
    elif as_csv:
        typer.echo(sim.to_csv(result.points if swept else (result,)), nl=False)
    else:
        lines = sim.format_sweep(result) if swept else sim.format_result(result)
        for line in lines + ([f"plot:      {plot}"] if plot else []):
            typer.echo(line)


def _simulate_campaign(code, depth: int, channel: list[str], grid, bits: int, seed: Optional[int], frame_bytes: int,
                       workers: Optional[int], scheduler: Optional[str], connect_timeout: float) -> tuple:
    """(result, None) of `simulate --workers/--scheduler`, or (what the finished units
    measured, the interruption) after Ctrl-C or another stopping signal."""
    from bitmend import campaign as cmp

    try:
        with cmp.terminal_progress("simulating") as tick:
            kwargs = dict(frame_bytes=frame_bytes, workers=workers or 1, scheduler=scheduler, progress=tick,
                          connect_timeout=connect_timeout)
            if grid:
                return cmp.campaign_sweep(code, depth, channel, grid, bits, seed, **kwargs), None
            return cmp.campaign(code, depth, channel, bits, seed, **kwargs), None
    except cmp.CampaignInterrupted as interrupted:
        if interrupted.partial is None:
            typer.echo("bitmend: no work unit had finished: nothing measured", err=True)
            raise interrupted.stop from None
        typer.echo("bitmend: interrupted; what the finished work units measured follows", err=True)
        return interrupted.partial, interrupted.stop


# ---- plan ----------------------------------------------------------------------------------

@command(app)
def plan(
    channel: list[str] = typer.Option(..., "--channel", metavar="SPEC",
                                      help="The measured channel, as a fault model SPEC: bsc:p=1e-3 | "
                                           "burst:enter=1e-4,leave=0.1,bad=0.5[,good=0] | bytes:p=1e-3 | "
                                           "drop:p=0.01 | slip:p=1e-5. Repeat to chain models."),
    target: float = typer.Option(..., "--target", metavar="RATE", help="Residual error rate to meet, e.g. 1e-9."),
    per: Per = typer.Option(Per.bit, "--per", metavar="bit|frame",
                            help="What the target counts: bit (wrong bits per delivered bit; with drop:p=, bits "
                                 "never delivered count too) or frame (frames not delivered verified)."),
    max_overhead: Optional[str] = typer.Option(None, "--max-overhead", metavar="X", help="Largest overhead to "
                                               "accept, as a fraction or a percentage (0.25 or 25%); counts the "
                                               "whole frame."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", metavar="B", min=1, max=MAX_PAYLOAD_BYTES,
                                    help="Payload bytes per frame."),
    max_depth: int = typer.Option(MAX_DEPTH, "--max-depth", metavar="D", min=1, max=MAX_DEPTH,
                                  help="Deepest interleaving to consider (latency and memory grow with the depth)."),
    code_file: Optional[list[str]] = typer.Option(None, "--code-file", metavar="FILE", help="A custom code to rank "
                                                  "with the catalog (repeatable). " + CODE_FILE_HELP),
    verify: bool = typer.Option(False, "--verify", help="Confirm the top choice with a short simulation."),
    verify_bits: Optional[float] = typer.Option(None, "--verify-bits", metavar="N", callback=whole_number,
                                                help="Payload bits for --verify (default: enough to expect about "
                                                     "30 events, at most 2^24)."),
    seed: int = typer.Option(1, "--seed", metavar="N", min=0, help="Seed of the --verify simulation."),
    show: int = typer.Option(5, "--show", metavar="N", min=1, help="Choices to list."),
    as_json: bool = typer.Option(False, "--json", help="Machine-readable output."),
) -> None:
    """Rank the codes that meet a residual error target on a channel, by whole-frame overhead.

    Each code is taken at its cheapest interleaving depth, with the formulas and assumptions
    behind each prediction, and on a BSC each code's distance to the best possible code. With
    drop:p= in the channel, also the repair ratio R/K (encode --repair) that rebuilds lost frames."""
    from bitmend.api import load_code_file
    from bitmend.planning import make_plan

    with _errors():
        extra = [load_code_file(path) for path in code_file or ()]
        result = make_plan(channel, target, per.value, frame_bytes, max_overhead, extra, verify,
                           int(verify_bits) if verify_bits else None, seed, max_depth)
        if as_json:
            import json

            typer.echo(json.dumps(result.to_dict(), indent=2))
        else:
            for line in result.render(show):
                typer.echo(line)
        if verify and result.verification is None:
            typer.echo("bitmend plan: nothing to verify: no choice meets the target", err=True)


@command(app)
def demo(
    sample: Optional[str] = typer.Option(None, "--sample", metavar="FILE", help="Input file (default: the bundled "
                                         "river-gauge telemetry log in samples/)."),
    flip_rate: float = typer.Option(1e-3, "--flip-rate", metavar="P", help="Bit flip probability of the test "
                                    "channel."),
    seed: int = typer.Option(2026, "--seed", metavar="N", min=0, help="Seed of the test channel."),
    channel: Optional[list[str]] = typer.Option(None, "--channel", metavar="SPEC", help="Fault model SPEC instead "
                                                "of a BSC at --flip-rate (as for inject; repeat to chain)."),
) -> None:
    """Encode the bundled telemetry log, inject faults, decode, and prove the data came back.

    The channel's ledger is shown beside the decoder's report."""
    from bitmend.demo import run_demo

    with _errors():
        ok = run_demo(sample, flip_rate, seed, typer.echo, channel or None)
        raise typer.Exit(EXIT_OK if ok else EXIT_DAMAGED)


# ---- entry point --------------------------------------------------------------------------------

def _command_path(ctx) -> str:
    """'bitmend codes show' for a context, however the program was started."""
    names = []
    while ctx is not None and ctx.parent is not None:
        names.append(ctx.info_name)
        ctx = ctx.parent
    return " ".join(["bitmend", *reversed(names)])


def _usage_error_code(exc: Exception) -> Optional[int]:
    """typer's (or click's) own usage error, shown as one line: its exit code 2, or None if
    exc is something else. Matched by shape, so that either packaging of click works."""
    if getattr(exc, "exit_code", None) != EXIT_USAGE or not hasattr(exc, "format_message"):
        return None
    message = " ".join(exc.format_message().split())  # one line, whatever the message's layout
    if message:  # (a bare `bitmend` has already printed the help)
        typer.echo(f"bitmend: {message} (see {_command_path(getattr(exc, 'ctx', None))} --help)", err=True)
    return EXIT_USAGE


def _unexpected(exc: Exception) -> int:
    """Ctrl-C at a prompt of typer's (exit 130), or the last resort: one line, never a traceback."""
    if type(exc).__name__ == "Abort":
        typer.echo("bitmend: interrupted", err=True)
        return 130
    typer.echo(f"bitmend: internal error: {type(exc).__name__}: {exc}", err=True)
    return EXIT_UNREADABLE


def _one_command() -> None:
    """The group callback of an app that holds one command (see _app_for); it does nothing."""


def _app_for(args: Sequence[str]) -> typer.Typer:
    """The app that runs `bitmend ARGS`: for one of the top-level commands, an app that holds
    that command alone, because typer builds the options of every command it holds before it
    parses anything (about 25 ms for them all, a seventh of a small encode's run). The command
    runs, parses and prints its help and errors exactly as in the whole app, under the same
    name. Anything else (no command, an option first, codes, a mistyped name) gets the whole
    app, whose help lists every command and whose errors name the commands there are."""
    if args:
        for info in app.registered_commands:
            name = info.name or typer.main.get_command_name(info.callback.__name__)
            if name == args[0]:
                single = typer.Typer(add_completion=False, pretty_exceptions_enable=False)
                single.callback()(_one_command)  # a group, so that the command is named on the line
                single.registered_commands = [info]
                return single
    return app


def main() -> None:
    """Console entry point: usage errors become one line and exit 2; never a traceback.
    SIGINT, SIGTERM and SIGHUP stop a run cleanly (exit 128 + the signal's number)."""
    # numpy's OpenBLAS starts a thread per core as numpy is imported. bitmend's array work is
    # integer and table-driven (its only float products are of 2x2 and 3x3 chain matrices), so
    # those threads buy nothing and cost start-up: a fifth of a small decode's wall time on two
    # busy cores. Before anything imports numpy; a value the user set is kept.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    from bitmend.kernels.loader import Settings  # numba-free

    Settings.numba_without_blas = True  # this process compiles no BLAS call (kernels/jit.py)
    outputs.install_signal_handlers()
    try:
        code = _app_for(sys.argv[1:])(standalone_mode=False)
        outputs.raise_pending_signal()
        flush_stdout()
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
        code = _usage_error_code(exc)
        if code is None:
            code = _unexpected(exc)
    outputs.remove_temp_files()  # only a signal between a temp file's birth and its owner leaves one here
    raise SystemExit(code if isinstance(code, int) else EXIT_OK)
