"""Python API in the style of the gzip module: open(), Encoder, Decoder and one-shot helpers.

    with bitmend.open("log.bmd", "wb", code="hamming-15-11", depth=8) as f:
        f.write(data)
    with bitmend.open("log.bmd", "rb") as f:
        data = f.read()
        print(f.report.summary.one_line())

Encoder and Decoder are file objects as the standard library's compressed files are:
`mode` ('wb' / 'rb'), `name`, `tell()` counted in plain-data bytes, lines and `peek` when
reading, ValueError for any use after close. They are not seekable: a container is written
and read front to back. Text modes 'wt' / 'rt' wrap them in io.TextIOWrapper.
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from typing import TYPE_CHECKING, BinaryIO, Callable, Iterator

from bitmend.codes.base import BlockCode
from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH, code_id
from bitmend.codes.linear import BinaryLinearCode, CodeDefinitionError
from bitmend.container.assembler import (ON_ERROR_CHOICES, Assembler, AssemblerReadings, DamagedDataError,
                                        NotAContainerError)
from bitmend.container.format import DEFAULT_FRAME_BYTES, check_depth, check_frame_bytes
from bitmend.container.reader import stream_length_at_end
from bitmend.container.repair import parse_repair
from bitmend.container.workers import resolve_jobs
from bitmend.errors import SettingError
from bitmend.keyfile import MIN_KEY_BYTES, KeyFileError, load_key_file
from bitmend.report import DecodeReport, FrameReport

if TYPE_CHECKING:  # imported where used: a decoder needs neither the writer nor the definition parser
    from bitmend.container.writer import FrameWriter
    import numpy as np

__all__ = ["open", "Encoder", "Decoder", "encode_bytes", "decode_bytes", "Decoded", "load_code_file",
           "load_key_file", "KeyFileError", "NotAContainerError", "DamagedDataError"]

PathOrFile = str | os.PathLike | BinaryIO
CodeChoice = str | BlockCode  # a catalog name, or a code object (custom codes travel in the frames)


def load_code_file(path: str | os.PathLike) -> BinaryLinearCode:
    """A custom code from a text or JSON definition file (format in bitmend.codes.custom).
    Raises CodeDefinitionError (one line naming the file) for a malformed definition and
    OSError if the file cannot be read."""
    from bitmend.codes.custom import MAX_DEFINITION_CHARS, parse_code_definition

    with io.open(path, "rb") as f:
        raw = f.read(MAX_DEFINITION_CHARS + 1)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise CodeDefinitionError(f"{os.fspath(path)}: not a text file (a code definition is text or JSON)") from None
    return parse_code_definition(text, source=os.fspath(path))


def _checked_key(key: bytes | None) -> bytes | None:
    """A key as bytes; SettingError when shorter than 16 bytes (keyfile.MIN_KEY_BYTES)."""
    if key is None:
        return None
    if not isinstance(key, (bytes, bytearray, memoryview)):
        raise TypeError(f"a key is bytes, got {type(key).__name__} (bitmend.load_key_file reads a key file)")
    key = bytes(key)
    if len(key) < MIN_KEY_BYTES:
        raise SettingError(f"a key must be at least {MIN_KEY_BYTES} bytes, got {len(key)}")
    return key


def _name_of(fileobj: BinaryIO) -> str | bytes:
    """The name a file object reports: its own `name` when that is a path (str or bytes),
    else '' (as gzip.GzipFile does: in-memory files and descriptors have no path)."""
    name = getattr(fileobj, "name", "")
    return name if isinstance(name, (str, bytes)) else ""


def _check_write_settings(code: CodeChoice, depth: int, frame_bytes: int,
                          repair: str | tuple[int, int] | None) -> None:
    """UnknownCodeError for a code name outside the catalog, SettingError for a depth or
    frame size a header cannot carry, RepairSpecError for a malformed repair spec: before
    any file is opened or any byte is written."""
    if isinstance(code, str):
        code_id(code)
    check_depth(depth)
    check_frame_bytes(frame_bytes)
    parse_repair(repair)


def _check_on_error(on_error: str) -> None:
    if on_error not in ON_ERROR_CHOICES:
        raise SettingError(f"on_error must be one of {', '.join(ON_ERROR_CHOICES)}, got {on_error!r}")


def _closed_error() -> ValueError:
    return ValueError("I/O operation on closed file")


class Encoder(io.BufferedIOBase):
    """Writable binary file object: bytes written are framed, coded and sent to fileobj.

    mode is 'wb'; name is the wrapped file's path ('' for an in-memory file); tell() counts
    the plain bytes written so far. Not seekable: a container is written front to back.
    Every method but close() raises ValueError once the encoder is closed."""

    _writer: FrameWriter | None = None  # None only while __init__ has not finished
    _fileobj: BinaryIO | None = None
    _close_fileobj = False

    def __init__(self, fileobj: BinaryIO, code: CodeChoice = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, close_fileobj: bool = False,
                 stream_id: int | None = None, repair: str | tuple[int, int] | None = None,
                 key: bytes | None = None, jobs: int = 1) -> None:
        """jobs: worker processes that code the frames (0: one per core; 1, the default: all
        in this process); the container is the same byte for byte for any number, and frames
        leave in batches when it is above 1.
        repair: 'R/K' (or (R, K)): R repair frames after every K data frames, so that any
        R frames of a group lost or damaged are rebuilt (docs/FORMAT.md, "Repair frames").
        key: a shared secret of at least 16 bytes; every frame then carries a tag under it,
        and a decoder with the same key delivers only frames whose tag matches."""
        super().__init__()
        _check_write_settings(code, depth, frame_bytes, repair)
        from bitmend.container.writer import FrameWriter

        self._writer = FrameWriter(fileobj, code, depth, frame_bytes, stream_id, repair, _checked_key(key),
                                   resolve_jobs(jobs))
        self._fileobj = fileobj
        self._close_fileobj = close_fileobj
        self._name = _name_of(fileobj)

    @property
    def mode(self) -> str:
        return "wb"

    @property
    def name(self) -> str | bytes:
        """The wrapped file's path as given (str or bytes), '' if it has none."""
        return self._name

    def _check_not_closed(self) -> None:
        if self.closed:
            raise _closed_error()

    def readable(self) -> bool:
        self._check_not_closed()
        return False

    def writable(self) -> bool:
        self._check_not_closed()
        return True

    def seekable(self) -> bool:
        self._check_not_closed()
        return False

    def fileno(self) -> int:
        """The wrapped file's descriptor (io.UnsupportedOperation if it has none)."""
        self._check_not_closed()
        return _fileno_of(self._fileobj)

    def tell(self) -> int:
        """Plain-data bytes written so far (not container bytes: see bytes_out)."""
        self._check_not_closed()
        return self._writer.bytes_in

    def write(self, data: bytes) -> int:  # type: ignore[override]
        self._check_not_closed()
        return self._writer.write(bytes(data))

    def flush(self) -> None:
        """Send buffered bytes as a frame now (use at packet boundaries)."""
        self._check_not_closed()
        # io's close() calls flush() too: after abandon(), or after an __init__ that failed
        if self._writer is not None and not self._writer.closed:
            self._writer.flush()

    def send_record(self, record: bytes) -> None:
        """Send record as a frame of its own, now (its boundaries survive the link; see
        bitmend.records). ValueError for a record longer than a frame."""
        self._check_not_closed()
        self._writer.send_record(bytes(record))

    @property
    def group_open(self) -> bool:
        """Data frames are out whose repair frames are not yet sent (repair only)."""
        return self._writer.group_open

    def end_group(self) -> None:
        """Send the repair frames of the open group now (at a deadline; repair only)."""
        self._check_not_closed()
        self._writer.end_group()
        self._writer.flush_sink()

    @property
    def frame_bytes(self) -> int:
        """Payload bytes per full frame."""
        return self._writer._frame_bytes

    @property
    def pending_bytes(self) -> int:
        """Bytes written but not yet sent in a frame."""
        return self._writer.pending_bytes

    def flush_output(self) -> None:
        """Push frames already made to the underlying file now, without cutting a frame."""
        self._check_not_closed()
        self._writer.flush_sink()

    @property
    def stream_id(self) -> int:
        """The identity every frame of this stream carries (64 bits, random unless given)."""
        return self._writer.stream_id

    @property
    def bytes_in(self) -> int:
        """Plain-data bytes written so far."""
        return self._writer.bytes_in

    @property
    def bytes_out(self) -> int:
        """Container bytes sent to the wrapped file so far."""
        return self._writer.bytes_out

    def abandon(self) -> None:
        """Close without the closing frame, after a failure: a reader then sees a stream that
        ended early, never one that looks whole."""
        if self.closed:
            return
        try:
            if self._writer is not None:
                self._writer.abandon()
        finally:
            self.close()

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is not None:
            self.abandon()  # an error on the way: no closing frame
        else:
            self.close()

    def close(self) -> None:
        if self.closed:
            return
        try:
            if self._writer is not None:
                self._writer.close()
        finally:
            try:
                super().close()  # io calls flush() first, a no-op once the writer is closed
            finally:
                if self._close_fileobj:
                    self._fileobj.close()


def _fileno_of(fileobj: BinaryIO) -> int:
    fileno = getattr(fileobj, "fileno", None)
    if fileno is None:
        raise io.UnsupportedOperation("fileno: the wrapped file object has no file descriptor")
    return fileno()


def _raised_again(first: Exception) -> Exception:
    """A new exception like first (same class, same message) whose cause is first: every
    read after a failure raises, so a failed stream never reads as a clean end."""
    try:
        again = type(first)(*first.args)
    except Exception:  # a class whose constructor takes other arguments than its args
        return first
    again.__cause__ = first
    return again


class _PlainData(io.RawIOBase):
    """The decoded plain data as a raw stream: serves the assembler's chunks through
    readinto, counts the bytes served (tell) and remembers the failure that ended them."""

    def __init__(self, chunks: Iterator[bytes]) -> None:
        super().__init__()
        self._chunks = chunks
        self._current = memoryview(b"")
        self._served = 0
        self.failure: Exception | None = None  # what stopped the stream, raised again on every later read

    def readable(self) -> bool:
        return True

    def tell(self) -> int:
        return self._served

    def _next_chunk(self) -> bytes | None:
        if self.failure is not None:
            raise _raised_again(self.failure)
        try:
            return next(self._chunks, None)
        except Exception as exc:  # the chunk generator is finished now: keep its failure
            self.failure = exc
            raise

    def readinto(self, buffer) -> int:  # type: ignore[override]
        while not self._current:
            chunk = self._next_chunk()
            if chunk is None:
                return 0
            self._current = memoryview(chunk)
        size = min(len(buffer), len(self._current))
        buffer[:size] = self._current[:size]
        self._current = self._current[size:]
        self._served += size
        return size

    def readall(self) -> bytes:
        """The rest at once: chunks joined, not copied through a small buffer."""
        parts = [bytes(self._current)]
        self._current = memoryview(b"")
        while (chunk := self._next_chunk()) is not None:
            parts.append(chunk)
        data = b"".join(parts)
        self._served += len(data)
        return data


class Decoder(AssemblerReadings, io.BufferedIOBase):
    """Readable binary file object over a container; .report holds what was found.

    on_error: 'keep' delivers damaged frames' bytes as corrected as far as possible,
    'zero' replaces them (and lost frames of known size) with zeros, 'drop' leaves them
    out, 'fail' raises DamagedDataError at the first damaged or lost frame, and again at
    every later read. on_frame, if given, is called with each FrameReport as it is produced.

    mode is 'rb'; name is the wrapped file's path ('' for an in-memory file); tell() counts
    the plain bytes delivered so far. read, read1, readinto, readline, peek and iteration
    over lines work as for any buffered binary file; seeking does not (a container is read
    front to back). Every method but close() raises ValueError once the decoder is closed.
    """

    _buffer: io.BufferedReader | None = None  # None only while __init__ has not finished
    _assembler: Assembler | None = None
    _fileobj: BinaryIO | None = None
    _close_fileobj = False

    def __init__(self, fileobj: BinaryIO, on_error: str = "keep", keep_frame_reports: bool = True,
                 on_frame: Callable[[FrameReport], None] | None = None, close_fileobj: bool = False,
                 key: bytes | None = None, accept_unauthenticated: bool = False, jobs: int = 1) -> None:
        """jobs: worker processes that decode the frames' payloads (0: one per core; 1, the
        default: all in this process); data, reports and errors are the same for any number.
        key: the shared key of keyed frames (only frames whose tag matches are delivered);
        accept_unauthenticated: also deliver frames whose origin cannot be checked (no tag
        while a key is given, or tags but no key). A tag that does not match is never
        accepted."""
        super().__init__()
        _check_on_error(on_error)
        self._assembler = Assembler(fileobj, on_error, key=_checked_key(key),
                                    accept_unauthenticated=accept_unauthenticated, jobs=resolve_jobs(jobs))
        self._frame_reports: list[FrameReport] = []
        self._keep = keep_frame_reports
        self._on_frame = on_frame
        self._plain = _PlainData(self._data_chunks())
        self._buffer = io.BufferedReader(self._plain, buffer_size=1 << 16)
        self._fileobj = fileobj
        self._close_fileobj = close_fileobj
        self._name = _name_of(fileobj)

    def _data_chunks(self) -> Iterator[bytes]:
        for data, reports in self._assembler:
            if self._keep:
                self._frame_reports.extend(reports)
            if self._on_frame:
                for report in reports:
                    self._on_frame(report)
            if data:
                yield data

    @property
    def mode(self) -> str:
        return "rb"

    @property
    def name(self) -> str | bytes:
        """The wrapped file's path as given (str or bytes), '' if it has none."""
        return self._name

    def _check_can_read(self) -> None:
        if self.closed:
            raise _closed_error()
        if self._plain.failure is not None:
            raise _raised_again(self._plain.failure)

    def readable(self) -> bool:
        if self.closed:
            raise _closed_error()
        return True

    def writable(self) -> bool:
        if self.closed:
            raise _closed_error()
        return False

    def seekable(self) -> bool:
        if self.closed:
            raise _closed_error()
        return False

    def fileno(self) -> int:
        """The wrapped file's descriptor (io.UnsupportedOperation if it has none)."""
        if self.closed:
            raise _closed_error()
        return _fileno_of(self._fileobj)

    def tell(self) -> int:
        """Plain-data bytes delivered so far (not container bytes: see bytes_read)."""
        if self.closed:
            raise _closed_error()
        return self._buffer.tell()

    def read(self, size: int | None = -1) -> bytes:
        self._check_can_read()
        return self._buffer.read(size)

    def read1(self, size: int = -1) -> bytes:
        """At most size bytes with at most one pass through the decoder (what one frame
        gives), so bytes leave as soon as their frame is decoded."""
        self._check_can_read()
        return self._buffer.read1(size)

    def readinto(self, buffer) -> int:  # type: ignore[override]
        self._check_can_read()
        return self._buffer.readinto(buffer)

    def readinto1(self, buffer) -> int:  # type: ignore[override]
        self._check_can_read()
        return self._buffer.readinto1(buffer)

    def peek(self, size: int = 0) -> bytes:
        """Bytes ahead without consuming them (at least one unless at the end)."""
        self._check_can_read()
        return self._buffer.peek(size)

    def readline(self, size: int | None = -1) -> bytes:
        self._check_can_read()
        return self._buffer.readline(size)

    @property
    def report(self) -> DecodeReport:
        """Frame reports so far and the summary (final once the stream is read to the end)."""
        return DecodeReport(list(self._frame_reports), self._assembler.summary())

    def close(self) -> None:
        if self.closed:
            return
        try:
            if self._buffer is not None:
                self._buffer.close()
            if self._assembler is not None:
                self._assembler.close()
        finally:
            try:
                super().close()
            finally:
                if self._close_fileobj:
                    self._fileobj.close()


_WRITE_ONLY = ("code", "depth", "frame_bytes", "stream_id", "repair")
_READ_ONLY = ("on_error", "accept_unauthenticated")
_TEXT_ONLY = ("encoding", "errors", "newline")
_MODES = {"rb": (False, False), "r": (False, False), "rt": (False, True),
          "wb": (True, False), "w": (True, False), "wt": (True, True)}


def _checked_mode(mode: str, **arguments: object) -> tuple[bool, bool]:
    """(writing, text) for an open() mode, after refusing every argument given (not None)
    that the mode does not take: ValueError naming the argument and the mode."""
    if mode not in _MODES:
        raise ValueError(f"mode must be 'rb', 'wb', 'rt' or 'wt', got {mode!r}")
    writing, text = _MODES[mode]
    given = {name for name, value in arguments.items() if value is not None}
    other_direction = [name for name in (_READ_ONLY if writing else _WRITE_ONLY) if name in given]
    if other_direction:
        raise ValueError(f"{other_direction[0]}= applies to {'reading' if writing else 'writing'} only, "
                         f"not to mode {mode!r}")
    text_only = [name for name in _TEXT_ONLY if name in given and not text]
    if text_only:
        raise ValueError(f"{text_only[0]}= applies to text modes ('rt', 'wt') only, not to mode {mode!r}")
    return writing, text


def _binary_file(file: PathOrFile, writing: bool) -> tuple[BinaryIO, bool]:
    """(the binary file object to use, whether open() opened it and so must close it)."""
    if isinstance(file, (str, bytes, os.PathLike)):
        return io.open(file, "wb" if writing else "rb"), True
    if hasattr(file, "write" if writing else "read"):
        return file, False
    raise TypeError(f"file must be a path or a binary file object open for "
                    f"{'writing' if writing else 'reading'}, got {type(file).__name__}")


def open(file: PathOrFile, mode: str = "rb", *, code: CodeChoice | None = None, depth: int | None = None,
         frame_bytes: int | None = None, stream_id: int | None = None,
         repair: str | tuple[int, int] | None = None, key: bytes | None = None, on_error: str | None = None,
         accept_unauthenticated: bool | None = None, encoding: str | None = None, errors: str | None = None,
         newline: str | None = None) -> Encoder | Decoder | io.TextIOWrapper:
    """Open a bitmend container for reading ('rb', or 'rt' for text) or writing ('wb', or
    'wt'), from a path or a binary file object.

    Writing takes code (a catalog name, default DEFAULT_CODE, or a code object such as
    load_code_file gives: a code outside the catalog is written into every frame, so reading
    needs nothing but the container), depth, frame_bytes, stream_id (the stream's 64-bit
    identity, random unless given) and repair ('R/K'). Reading takes on_error (default
    'keep') and accept_unauthenticated. key applies to both; encoding, errors and newline
    to text modes only, as for io.TextIOWrapper. An argument of the other direction is
    refused (ValueError) rather than ignored, and every value is checked before a file is
    opened: UnknownCodeError, SettingError, RepairSpecError."""
    writing, text = _checked_mode(mode, code=code, depth=depth, frame_bytes=frame_bytes, stream_id=stream_id,
                                  repair=repair, on_error=on_error, accept_unauthenticated=accept_unauthenticated,
                                  encoding=encoding, errors=errors, newline=newline)
    code = DEFAULT_CODE if code is None else code
    depth = DEFAULT_DEPTH if depth is None else depth
    frame_bytes = DEFAULT_FRAME_BYTES if frame_bytes is None else frame_bytes
    on_error = "keep" if on_error is None else on_error
    if writing:
        _check_write_settings(code, depth, frame_bytes, repair)
    else:
        _check_on_error(on_error)
    _checked_key(key)
    fileobj, owned = _binary_file(file, writing)
    try:
        if writing:
            binary: Encoder | Decoder = Encoder(fileobj, code, depth, frame_bytes, close_fileobj=owned,
                                                stream_id=stream_id, repair=repair, key=key)
        else:
            binary = Decoder(fileobj, on_error, close_fileobj=owned, key=key,
                             accept_unauthenticated=bool(accept_unauthenticated))
    except BaseException:
        if owned:
            fileobj.close()
        raise
    if text:
        return io.TextIOWrapper(binary, io.text_encoding(encoding), errors, newline)
    return binary


@dataclass(frozen=True)
class Decoded:
    """Result of decode_bytes: the recovered data and the report."""

    data: bytes
    report: DecodeReport


FILLED_OUTPUT_MIN = 1 << 20  # decode_bytes: containers smaller than this join their pieces (a small copy)


class _Pieces(io.RawIOBase):
    """A write-only sink that keeps what it is given and joins it once at the end: one copy
    of the container instead of a growing buffer's. Frame runs arrive as fresh arrays the
    writer never touches again and are kept as they are; anything else is copied.

    Given the container's size beforehand (FrameWriter.container_bytes), it starts with a
    bytes object of that size to fill (filled_bytes): the writer codes runs straight into
    it (reserve_frames) and smaller writes are copied in, so nothing is joined at the end. Any
    write past that size goes to the pieces, so the result is right whatever the size."""

    whole_writes = True  # copies (or keeps) each write before returning; see batch_encode

    def __init__(self) -> None:
        super().__init__()
        self._pieces: list[bytes | memoryview] = []
        self._filled: tuple[bytes, np.ndarray] | None = None
        self._at = 0  # bytes of the filled object written so far

    def expect(self, size: int | None) -> None:
        """Start a bytes object of `size` bytes to fill (before the first write)."""
        if size is not None and not self._pieces and not self._at:
            from bitmend.filled_bytes import fillable_bytes  # numpy: not for a small file's encode

            self._filled = fillable_bytes(size)

    def writable(self) -> bool:
        return True

    def reserve_frames(self, size: int) -> np.ndarray | None:
        """The next `size` bytes of the output to write into directly, or None (write() them)."""
        if self._filled is None or self._pieces or self._at + size > len(self._filled[0]):
            return None
        region = self._filled[1][self._at: self._at + size]
        self._at += size
        return region

    def write(self, data) -> int:
        region = self.reserve_frames(len(data))
        if region is not None:
            memoryview(region)[:] = data
            return len(data)
        if isinstance(data, bytes):
            self._pieces.append(data)
        elif type(data).__name__ == "ndarray" and data.flags.owndata:  # a frame run (format.encode_frames)
            self._pieces.append(memoryview(data))
        else:
            data = bytes(data)
            self._pieces.append(data)
        return len(data)

    def joined(self) -> bytes:
        if self._filled is None:
            return b"".join(self._pieces)
        blob, self._filled = self._filled[0], None  # the writable array goes before the bytes go out
        if self._at == len(blob) and not self._pieces:
            return blob
        return b"".join([memoryview(blob)[: self._at], *self._pieces])


def encode_bytes(data: bytes, code: CodeChoice = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                 repair: str | tuple[int, int] | None = None, key: bytes | None = None, jobs: int = 1) -> bytes:
    """The container for data (one-shot); code is a catalog name or a code object; jobs as
    for Encoder;
    stream_id is drawn at random unless given (give one only to make output reproducible);
    repair 'R/K' adds R repair frames after every K data frames."""
    sink = _Pieces()
    with Encoder(sink, code, depth, frame_bytes, stream_id=stream_id, repair=repair, key=key, jobs=jobs) as enc:
        sink.expect(enc._writer.container_bytes(len(data)))
        enc.write(data)
    return sink.joined()


def decode_bytes(container: bytes, on_error: str = "keep", key: bytes | None = None,
                 accept_unauthenticated: bool = False, jobs: int = 1) -> Decoded:
    """Decode a whole container held in memory; raises NotAContainerError if no frame is
    found and, with on_error='fail', DamagedDataError at the first damaged or lost frame.
    key, accept_unauthenticated and jobs as for Decoder."""
    _check_on_error(on_error)
    # the scanner reads the container where it lies; the output is filled in one object
    # when its size can be told from the last frame (else the pieces are joined once)
    container = bytes(container)
    assembler = Assembler(container, on_error, key=_checked_key(key),
                          accept_unauthenticated=accept_unauthenticated, jobs=resolve_jobs(jobs))
    sink = _Pieces()
    if len(container) >= FILLED_OUTPUT_MIN:
        sink.expect(stream_length_at_end(container))
    reports: list[FrameReport] = []
    try:
        for data, found in assembler:
            reports.extend(found)
            sink.write(data)
    finally:
        assembler.close()
    return Decoded(sink.joined(), DecodeReport(reports, assembler.summary()))
