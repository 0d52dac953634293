"""Python API in the style of the gzip module: open(), Encoder, Decoder and one-shot helpers.

    with bitmend.open("log.bmd", "wb", code="hamming-15-11", depth=8) as f:
        f.write(data)
    with bitmend.open("log.bmd", "rb") as f:
        data = f.read()
        print(f.report.summary.one_line())
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from typing import BinaryIO, Callable, Iterator

from bitmend.codes.catalog import DEFAULT_CODE, DEFAULT_DEPTH
from bitmend.codes.custom import MAX_DEFINITION_CHARS, parse_code_definition
from bitmend.codes.linear import BinaryLinearCode, CodeDefinitionError
from bitmend.container.assembler import Assembler, DamagedDataError, NotAContainerError
from bitmend.container.format import DEFAULT_FRAME_BYTES
from bitmend.container.writer import FrameWriter
from bitmend.keyfile import MIN_KEY_BYTES, KeyFileError, load_key_file
from bitmend.report import DecodeReport, FrameReport, Summary

__all__ = ["open", "Encoder", "Decoder", "encode_bytes", "decode_bytes", "Decoded", "load_code_file",
           "load_key_file", "KeyFileError", "NotAContainerError", "DamagedDataError"]

PathOrFile = str | os.PathLike | BinaryIO
CodeChoice = str | BinaryLinearCode  # a catalog name, or a code object (custom codes travel in the frames)


def load_code_file(path: str | os.PathLike) -> BinaryLinearCode:
    """A custom code from a text or JSON definition file (format in bitmend.codes.custom).
    Raises CodeDefinitionError (one line naming the file) for a malformed definition and
    OSError if the file cannot be read."""
    with io.open(path, "rb") as f:
        raw = f.read(MAX_DEFINITION_CHARS + 1)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise CodeDefinitionError(f"{os.fspath(path)}: not a text file (a code definition is text or JSON)") from None
    return parse_code_definition(text, source=os.fspath(path))


def _checked_key(key: bytes | None) -> bytes | None:
    """A key as bytes, refused when shorter than 16 bytes (keyfile.MIN_KEY_BYTES)."""
    if key is None:
        return None
    if not isinstance(key, (bytes, bytearray, memoryview)):
        raise TypeError(f"a key is bytes, got {type(key).__name__} (bitmend.load_key_file reads a key file)")
    key = bytes(key)
    if len(key) < MIN_KEY_BYTES:
        raise ValueError(f"a key must be at least {MIN_KEY_BYTES} bytes, got {len(key)}")
    return key


class Encoder(io.BufferedIOBase):
    """Writable binary file object: bytes written are framed, coded and sent to fileobj."""

    def __init__(self, fileobj: BinaryIO, code: CodeChoice = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, close_fileobj: bool = False,
                 stream_id: int | None = None, repair: str | tuple[int, int] | None = None,
                 key: bytes | None = None) -> None:
        """repair: 'R/K' (or (R, K)): R repair frames after every K data frames, so that any
        R frames of a group lost or damaged are rebuilt (docs/FORMAT.md, "Repair frames").
        key: a shared secret of at least 16 bytes; every frame then carries a tag under it,
        and a decoder with the same key delivers only frames whose tag matches."""
        super().__init__()
        self._fileobj = fileobj
        self._writer = FrameWriter(fileobj, code, depth, frame_bytes, stream_id, repair, _checked_key(key))
        self._close_fileobj = close_fileobj

    def writable(self) -> bool:
        return True

    def write(self, data: bytes) -> int:  # type: ignore[override]
        if self.closed:
            raise ValueError("write to closed file")
        return self._writer.write(bytes(data))

    def flush(self) -> None:
        """Send buffered bytes as a frame now (use at packet boundaries)."""
        if not self.closed and not self._writer.closed:
            self._writer.flush()

    def send_record(self, record: bytes) -> None:
        """Send record as a frame of its own, now (its boundaries survive the link; see
        bitmend.records). ValueError for a record longer than a frame."""
        if self.closed:
            raise ValueError("write to closed file")
        self._writer.send_record(bytes(record))

    @property
    def group_open(self) -> bool:
        """Data frames are out whose repair frames are not yet sent (repair only)."""
        return self._writer.group_open

    def end_group(self) -> None:
        """Send the repair frames of the open group now (at a deadline; repair only)."""
        if not self.closed:
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
        if not self.closed:
            self._writer.flush_sink()

    @property
    def stream_id(self) -> int:
        """The identity every frame of this stream carries (64 bits, random unless given)."""
        return self._writer.stream_id

    @property
    def bytes_in(self) -> int:
        return self._writer.bytes_in

    @property
    def bytes_out(self) -> int:
        return self._writer.bytes_out

    def abandon(self) -> None:
        """Close without the closing frame, after a failure: a reader then sees a stream that
        ended early, never one that looks whole."""
        if self.closed:
            return
        self._writer.closed = True
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
            self._writer.close()
        finally:
            try:
                super().close()  # io calls flush(), a no-op once the writer is closed
            finally:
                if self._close_fileobj:
                    self._fileobj.close()


class _DecodedRaw(io.RawIOBase):
    """Raw reader: serves the assembler's output chunks through readinto."""

    def __init__(self, chunks: Iterator[bytes]) -> None:
        super().__init__()
        self._chunks = chunks
        self._current = memoryview(b"")

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:  # type: ignore[override]
        while not self._current:
            chunk = next(self._chunks, None)
            if chunk is None:
                return 0
            self._current = memoryview(chunk)
        size = min(len(buffer), len(self._current))
        buffer[:size] = self._current[:size]
        self._current = self._current[size:]
        return size


class Decoder(io.BufferedReader):
    """Readable binary file object over a container; .report holds what was found.

    on_error: 'keep' delivers damaged frames' bytes as corrected as far as possible,
    'zero' replaces them (and lost frames of known size) with zeros, 'drop' leaves them
    out, 'fail' raises DamagedDataError at the first damaged or lost frame.
    on_frame, if given, is called with each FrameReport as it is produced.
    """

    def __init__(self, fileobj: BinaryIO, on_error: str = "keep", keep_frame_reports: bool = True,
                 on_frame: Callable[[FrameReport], None] | None = None, close_fileobj: bool = False,
                 key: bytes | None = None, accept_unauthenticated: bool = False) -> None:
        """key: the shared key of keyed frames (only frames whose tag matches are delivered);
        accept_unauthenticated: also deliver frames whose origin cannot be checked (no tag
        while a key is given, or tags but no key). A tag that does not match is never
        accepted."""
        self._assembler = Assembler(fileobj, on_error, key=_checked_key(key),
                                    accept_unauthenticated=accept_unauthenticated)
        self._frame_reports: list[FrameReport] = []
        self._keep = keep_frame_reports
        self._on_frame = on_frame
        self._fileobj = fileobj
        self._close_fileobj = close_fileobj
        super().__init__(_DecodedRaw(self._data_chunks()), buffer_size=1 << 16)

    def _data_chunks(self) -> Iterator[bytes]:
        for data, report in self._assembler:
            if report is not None:  # None: more data of the frame reported just before
                if self._keep:
                    self._frame_reports.append(report)
                if self._on_frame:
                    self._on_frame(report)
            if data:
                yield data

    @property
    def report(self) -> DecodeReport:
        """Frame reports so far and the summary (final once the stream is read to the end)."""
        return DecodeReport(list(self._frame_reports), self._assembler.summary())

    @property
    def summary(self) -> Summary:
        """What the stream held so far (final once it is read to the end)."""
        return self._assembler.summary()

    @property
    def keyed_without_key(self) -> int:
        """Frames held back because they carry a tag and no key was given to check it."""
        return self._assembler.keyed_without_key

    @property
    def untagged_with_key(self) -> int:
        """Frames held back because they carry no tag while a key was given."""
        return self._assembler.untagged_with_key

    @property
    def bytes_read(self) -> int:
        """Container bytes consumed from the source so far."""
        return self._assembler.scanner.bytes_read

    def close(self) -> None:
        if self.closed:
            return
        try:
            super().close()
        finally:
            if self._close_fileobj:
                self._fileobj.close()


def open(file: PathOrFile, mode: str = "rb", *, code: CodeChoice = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
         frame_bytes: int = DEFAULT_FRAME_BYTES, on_error: str = "keep",
         stream_id: int | None = None, repair: str | tuple[int, int] | None = None,
         key: bytes | None = None) -> Encoder | Decoder:
    """Open a bitmend container for reading ('rb') or writing ('wb'), from a path or a
    binary file object; code, depth and frame_bytes apply to writing, on_error to reading.
    code is a catalog name or a code object (e.g. from load_code_file): a code outside the
    catalog is written into every frame, so reading needs nothing but the container.
    stream_id (writing) is the stream's 64-bit identity, drawn at random unless given."""
    if mode not in ("rb", "r", "wb", "w"):
        raise ValueError(f"mode must be 'rb' or 'wb', got {mode!r}")
    writing = mode.startswith("w")
    if isinstance(file, (str, bytes, os.PathLike)):
        fileobj = io.open(file, "wb" if writing else "rb")
        owned = True
    elif hasattr(file, "write" if writing else "read"):
        fileobj, owned = file, False
    else:
        raise TypeError("file must be a path or a binary file object")
    if writing:
        return Encoder(fileobj, code, depth, frame_bytes, close_fileobj=owned, stream_id=stream_id, repair=repair,
                       key=key)
    return Decoder(fileobj, on_error, close_fileobj=owned, key=key)


@dataclass(frozen=True)
class Decoded:
    """Result of decode_bytes: the recovered data and the report."""

    data: bytes
    report: DecodeReport


def encode_bytes(data: bytes, code: CodeChoice = DEFAULT_CODE, depth: int = DEFAULT_DEPTH,
                 frame_bytes: int = DEFAULT_FRAME_BYTES, stream_id: int | None = None,
                 repair: str | tuple[int, int] | None = None, key: bytes | None = None) -> bytes:
    """The container for data (one-shot); code is a catalog name or a code object;
    stream_id is drawn at random unless given (give one only to make output reproducible);
    repair 'R/K' adds R repair frames after every K data frames."""
    sink = io.BytesIO()
    with Encoder(sink, code, depth, frame_bytes, stream_id=stream_id, repair=repair, key=key) as enc:
        enc.write(data)
    return sink.getvalue()


def decode_bytes(container: bytes, on_error: str = "keep", key: bytes | None = None,
                 accept_unauthenticated: bool = False) -> Decoded:
    """Decode a whole container held in memory; raises NotAContainerError if no frame is
    found and, with on_error='fail', DamagedDataError at the first damaged or lost frame.
    key and accept_unauthenticated as for Decoder."""
    with Decoder(io.BytesIO(container), on_error, key=key, accept_unauthenticated=accept_unauthenticated) as dec:
        data = dec.read()
        return Decoded(data, dec.report)
