"""The bitmend command line: parse, call the library, print, set the exit code.

Exit codes: 0 every byte recovered and CRC-verified; 1 finished but data damaged or lost;
2 usage error; 3 nothing decodable (not a container) or an I/O failure.
"""

from __future__ import annotations

import json
import os
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import BinaryIO, Iterator, Optional

import typer

from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, MAX_DEPTH
from bitmend.container.format import DEFAULT_FRAME_BYTES

EXIT_OK, EXIT_DAMAGED, EXIT_USAGE, EXIT_UNREADABLE = 0, 1, 2, 3
COPY_CHUNK = 1 << 20

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Forward error correction for byte streams: wrap data in a block code, "
                       "recover it after damage, and report exactly what was corrected and what was not.")
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
    from bitmend.codes.catalog import UnknownCodeError
    from bitmend.container.assembler import DamagedDataError, NotAContainerError

    try:
        yield
    except CliError as exc:
        _fail(str(exc), exc.exit_code)
    except UnknownCodeError as exc:
        _fail(str(exc), EXIT_USAGE)
    except NotAContainerError as exc:
        _fail(str(exc), EXIT_UNREADABLE)
    except DamagedDataError as exc:
        _fail(f"stopped: {exc}", EXIT_DAMAGED)
    except BrokenPipeError:
        # the reader went away (e.g. `| head`): quiet exit, as shell tools do
        try:
            sys.stdout = open(os.devnull, "w")
        finally:
            raise typer.Exit(EXIT_OK)
    except OSError as exc:
        name = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        _fail(f"I/O error{name}: {exc.strerror or exc}", EXIT_UNREADABLE)
    except KeyboardInterrupt:
        _fail("interrupted", 130)


# ---- input and output ------------------------------------------------------------------

@contextmanager
def _open_input(path: str) -> Iterator[BinaryIO]:
    if path == "-":
        yield sys.stdin.buffer
        return
    try:
        f = open(path, "rb")
    except OSError as exc:
        raise CliError(f"cannot read {path}: {exc.strerror}", EXIT_UNREADABLE) from None
    with f:
        yield f


@contextmanager
def _open_output(path: Optional[str]) -> Iterator[BinaryIO]:
    """stdout, or a temporary file beside path renamed into place only on success, so a
    failed run never leaves a half-written file that looks whole."""
    if path is None or path == "-":
        yield sys.stdout.buffer
        sys.stdout.buffer.flush()
        return
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=directory)
    except OSError as exc:
        raise CliError(f"cannot write {path}: {exc.strerror}", EXIT_UNREADABLE) from None
    ok = False
    try:
        with os.fdopen(fd, "wb") as f:
            yield f
        ok = True
    finally:
        if ok:
            os.replace(tmp, target)
        else:
            os.unlink(tmp)


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
            "detects": code.detects, "perfect": code.is_perfect, "use": entry(name).use}


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
        typer.echo(f"{'code':<15}{'n':>4}{'k':>4}{'rate':>8}{'d':>4}{'t':>4}{'detects':>9}  use")
        for f in facts:
            mark = " (default)" if f["name"] == DEFAULT_CODE else ""
            typer.echo(f"{f['name']:<15}{f['n']:>4}{f['k']:>4}{f['rate']:>8.3f}{f['d']:>4}{f['t']:>4}"
                       f"{f['detects']:>9}  {f['use']}{mark}")
        typer.echo(f"\ndefault: {DEFAULT_CODE} at depth {DEFAULT_DEPTH}; "
                   "t = errors corrected per codeword; detects = every pattern of up to this many "
                   "errors is at least detected while t are corrected (d - 1 - t)")


@codes_app.command("show")
def codes_show(name: str = typer.Argument(..., help="Catalog name, e.g. hamming-7-4."),
               as_json: bool = typer.Option(False, "--json", help="Machine-readable output.")) -> None:
    """Properties, systematic matrices and weight distribution of one code."""
    from bitmend.codes.catalog import get_code

    with _errors():
        code = get_code(name)
        facts = _code_facts(name)
        wd = code.weight_distribution
        facts["weight_distribution"] = {str(w): a for w, a in enumerate(wd.counts) if a}
        facts["weight_distribution_method"] = wd.method
        facts["G"] = ["".join(map(str, row)) for row in code.G]
        facts["H"] = ["".join(map(str, row)) for row in code.H]
        if as_json:
            typer.echo(json.dumps(facts, indent=2))
            return
        typer.echo(f"{name}: ({code.n},{code.k}) rate {code.rate:.4f}, d = {code.d}, corrects t = {code.t}, "
                   f"detects {code.detects} more{', perfect' if code.is_perfect else ''}")
        typer.echo(f"weight distribution ({wd.method}): " +
                   ", ".join(f"A{w}={a}" for w, a in facts["weight_distribution"].items()))
        for label, rows in (("G = [I | P]", facts["G"]), ("H = [P^T | I]", facts["H"])):
            typer.echo(f"{label}:")
            for row in rows:
                typer.echo(f"  {row}")


# ---- encode / decode / inspect -----------------------------------------------------------

@app.command()
def encode(
    source: str = typer.Argument("-", metavar="[IN]", help="Input file; - or omitted for stdin."),
    output: Optional[str] = typer.Option(None, "-o", "--output", help="Output file (default stdout)."),
    code: str = typer.Option(DEFAULT_CODE, "--code", help="Catalog code name (see `bitmend codes`)."),
    depth: int = typer.Option(DEFAULT_DEPTH, "--depth", help=f"Interleaving depth 1..{MAX_DEPTH}: "
                              "corrects any burst of depth*t bits."),
    frame_bytes: int = typer.Option(DEFAULT_FRAME_BYTES, "--frame-bytes", help="Payload bytes per frame (1..1048576)."),
) -> None:
    """Wrap a byte stream in coded, self-contained frames."""
    from bitmend.api import Encoder
    from bitmend.container.format import MAX_PAYLOAD_BYTES

    with _errors():
        _check_depth(depth)
        if not 1 <= frame_bytes <= MAX_PAYLOAD_BYTES:
            raise CliError(f"--frame-bytes must be 1..{MAX_PAYLOAD_BYTES}, got {frame_bytes}", EXIT_USAGE)
        from bitmend.codes.catalog import get_code
        get_code(code)  # unknown names fail before any output is made
        with _open_input(source) as inp, _open_output(output) as out:
            with _progress("encoding", _input_size(inp), True) as tick:
                with Encoder(out, code, depth, frame_bytes) as enc:
                    while block := inp.read(COPY_CHUNK):
                        enc.write(block)
                        tick(enc.bytes_in)


@app.command()
def decode(
    source: str = typer.Argument("-", metavar="[IN]", help="Container file; - or omitted for stdin."),
    output: Optional[str] = typer.Option(None, "-o", "--output", help="Output file (default stdout)."),
    report: Optional[str] = typer.Option(None, "--report", help="Write a JSON Lines report here: "
                                         "one object per frame, then a summary."),
    on_error: str = typer.Option("keep", "--on-error", help="Damaged frames: keep (as corrected as possible), "
                                 "zero (zeros, also for lost frames of known size), drop, or fail (stop)."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No summary line on stderr."),
) -> None:
    """Recover the data; exit 0 only if every byte was CRC-verified."""
    from bitmend.api import Decoder
    from bitmend.container.assembler import ON_ERROR_CHOICES, DamagedDataError

    with _errors():
        if on_error not in ON_ERROR_CHOICES:
            raise CliError(f"--on-error must be one of {', '.join(ON_ERROR_CHOICES)}, got {on_error!r}", EXIT_USAGE)
        report_file = None
        if report:
            try:
                report_file = open(report, "w", encoding="utf-8")
            except OSError as exc:
                raise CliError(f"cannot write report {report}: {exc.strerror}", EXIT_UNREADABLE) from None
        on_frame = (lambda r: report_file.write(r.to_json() + "\n")) if report_file else None
        decoder = None
        stopped: DamagedDataError | None = None
        try:
            with _open_input(source) as inp:
                decoder = Decoder(inp, on_error, keep_frame_reports=False, on_frame=on_frame)
                try:
                    with _open_output(output) as out, _progress("decoding", _input_size(inp), not quiet) as tick:
                        try:
                            while block := decoder.read1(COPY_CHUNK):
                                out.write(block)
                                tick(decoder.bytes_read)
                        except DamagedDataError as exc:
                            stopped = exc  # --on-error fail: keep the verified part written so far
                except Exception:
                    if report_file and decoder is not None:
                        report_file.write(decoder.summary.to_json() + "\n")
                    raise
            summary = decoder.summary
            if report_file:
                report_file.write(summary.to_json() + "\n")
        finally:
            if report_file:
                report_file.close()
        if not quiet:
            typer.echo(summary.one_line(), err=True)
            for note in summary.notes:
                typer.echo(f"bitmend decode: note: {note}", err=True)
        if stopped is not None:
            raise CliError(f"stopped: {stopped}", EXIT_DAMAGED)
        raise typer.Exit(EXIT_OK if summary.complete else EXIT_DAMAGED)


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
            for f in scanner.frames():
                h = f.header
                if count == 0 and not as_json:
                    typer.echo(f"{'seq':>8} {'offset':>12} {'code':<14}{'depth':>6}{'payload':>9}{'frame':>9}  notes")
                count += 1
                payload += h.length
                wire += h.frame_bytes
                notes = [w for w, on in (("last", h.last), ("truncated", f.truncated),
                                         ("header from copy", f.header_from_copy)) if on]
                if as_json:
                    typer.echo(json.dumps({"type": "frame", "seq": h.seq, "offset": f.offset, "code": names[h.code_id],
                                           "depth": h.depth, "payload_bytes": h.length, "frame_bytes": h.frame_bytes,
                                           "last": h.last, "truncated": f.truncated,
                                           "marker_distance": f.marker_distance}, separators=(",", ":")))
                else:
                    typer.echo(f"{h.seq:>8} {f.offset:>12} {names[h.code_id]:<14}{h.depth:>6}{h.length:>9}"
                               f"{h.frame_bytes:>9}  {', '.join(notes)}")
            if count == 0:
                errors = scanner.stats.header_errors
                raise NotAContainerError("no decodable bitmend frame found in the input" +
                                         (f" ({errors[0]})" if errors else ""))
            overhead = wire / payload - 1 if payload else float("inf")
            if as_json:
                typer.echo(json.dumps({"type": "summary", "frames": count, "payload_bytes": payload,
                                       "container_bytes": wire, "skipped_bytes": scanner.stats.skipped_bytes},
                                      separators=(",", ":")))
            else:
                typer.echo(f"{count} frames, {payload} payload bytes in {wire} container bytes "
                           f"(overhead {overhead:.1%}), {scanner.stats.skipped_bytes} bytes outside frames")


@app.command()
def demo(
    sample: Optional[str] = typer.Option(None, "--sample", help="Input file (default: the bundled "
                                         "river-gauge telemetry log in samples/)."),
    flip_rate: float = typer.Option(1e-3, "--flip-rate", help="Bit flip probability of the test channel."),
    seed: int = typer.Option(2026, "--seed", help="Seed of the test channel."),
) -> None:
    """Encode the bundled telemetry log, flip bits, decode, and prove the data came back."""
    from bitmend.demo import run_demo

    with _errors():
        ok = run_demo(sample, flip_rate, seed, typer.echo)
        raise typer.Exit(EXIT_OK if ok else EXIT_DAMAGED)


def _command_path(ctx) -> str:
    """'bitmend codes show' for a context, however the program was started."""
    names = []
    while ctx is not None and ctx.parent is not None:
        names.append(ctx.info_name)
        ctx = ctx.parent
    return " ".join(["bitmend", *reversed(names)])


def main() -> None:
    """Console entry point: usage errors become one line and exit 2; never a traceback."""
    try:
        code = app(standalone_mode=False)
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
    raise SystemExit(code if isinstance(code, int) else EXIT_OK)
