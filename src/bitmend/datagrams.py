"""Datagram endpoints: `udp:HOST:PORT` as an input (bound and listened on) or an output (sent to).

Each datagram received is one record; each frame or record sent is one datagram. A receiver
runs until `--idle` seconds pass without a datagram, or until its caller asks it to stop (the
CLI does on SIGINT/SIGTERM), which ends it like the end of a file: what arrived is delivered
and the summary and report are written.
"""

from __future__ import annotations

import select
import socket
from dataclasses import dataclass
from typing import Callable, Iterator

from bitmend.errors import SettingError

MAX_DATAGRAM = 65507  # the largest UDP payload over IPv4
POLL_SECONDS = 0.2  # how often a waiting receiver looks for a stop request
RECEIVE_BUFFER = 8 << 20  # bytes asked for the socket's receive buffer


class EndpointError(SettingError):
    """A malformed udp:HOST:PORT, or a frame too large for one datagram."""


@dataclass(frozen=True)
class UdpEndpoint:
    host: str
    port: int

    @property
    def address(self) -> tuple[str, int]:
        return self.host, self.port

    def __str__(self) -> str:
        host = f"[{self.host}]" if ":" in self.host else self.host
        return f"udp:{host}:{self.port}"


def parse_endpoint(text: str | None) -> UdpEndpoint | None:
    """UdpEndpoint for 'udp:HOST:PORT' ('udp:[::1]:9000' for IPv6), None for anything else
    (a file name). Raises EndpointError for a udp: name that does not parse."""
    if not text or not text.startswith("udp:"):
        return None
    rest = text[4:]
    if rest.startswith("["):
        host, sep, port = rest[1:].partition("]:")
    else:
        host, sep, port = rest.rpartition(":")
    if not sep or not host or not port.isdigit() or not 0 < int(port) < 65536:
        raise EndpointError(f"{text}: expected udp:HOST:PORT with a port 1..65535 (udp:[::1]:PORT for IPv6)")
    return UdpEndpoint(host, int(port))


def _socket_for(endpoint: UdpEndpoint) -> socket.socket:
    family = socket.AF_INET6 if ":" in endpoint.host else socket.AF_INET
    return socket.socket(family, socket.SOCK_DGRAM)


class DatagramReceiver:
    """Datagrams arriving at a bound address, as an iterator of bytes."""

    def __init__(self, endpoint: UdpEndpoint, idle: float | None = None, ticks: bool = False,
                 stop_requested: Callable[[], str | None] | None = None) -> None:
        """ticks: also yield None at every poll without a datagram (about every 0.2 s), so
        the caller can act on its own deadlines. stop_requested, asked at every poll, names
        a reason to end (a signal the caller caught) or returns None."""
        self.endpoint = endpoint
        self.idle = idle
        self.ticks = ticks
        self._stop_requested = stop_requested
        self.received = 0
        self.stopped_by: str | None = None  # the signal that ended the run, if one did
        self._sock = _socket_for(endpoint)
        try:
            # a deep receive buffer rides out bursts while a frame is being decoded (the kernel
            # caps the request at net.core.rmem_max)
            self._sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, RECEIVE_BUFFER)
        except OSError:
            pass
        try:
            self._sock.bind(endpoint.address)
        except OSError as exc:
            self._sock.close()
            raise OSError(exc.errno, f"cannot listen on {endpoint}: {exc.strerror}") from None

    def __iter__(self) -> Iterator[bytes | None]:
        """Datagrams until --idle seconds of silence or a stop signal (taken as the end of
        input, not as a failure: the caller finishes normally)."""
        import time

        last = time.monotonic()
        try:
            while True:
                reason = self._stop_requested() if self._stop_requested is not None else None
                if reason is not None:
                    self.stopped_by = reason
                    return
                wait = POLL_SECONDS
                if self.idle is not None:
                    left = last + self.idle - time.monotonic()
                    if left <= 0:
                        return
                    wait = min(wait, left)
                ready, _, _ = select.select([self._sock], [], [], wait)
                if not ready:
                    if self.ticks:
                        yield None
                    continue
                data = self._sock.recv(MAX_DATAGRAM + 1)
                last = time.monotonic()
                self.received += 1
                yield data
        finally:
            self._sock.close()

    def close(self) -> None:
        self._sock.close()


class DatagramSender:
    """Sends each write() as one datagram to an address (a binary-file-like sink)."""

    def __init__(self, endpoint: UdpEndpoint) -> None:
        self.endpoint = endpoint
        self.label = str(endpoint)
        self.sent = 0
        self.bytes_written = 0
        self.replaces_file = False
        self._sock = _socket_for(endpoint)

    def write(self, datagram: bytes) -> int:
        if len(datagram) > MAX_DATAGRAM:
            raise EndpointError(f"{self.endpoint}: a frame of {len(datagram)} bytes does not fit one datagram "
                                f"({MAX_DATAGRAM} at most): lower --frame-bytes")
        self._sock.sendto(datagram, self.endpoint.address)
        self.sent += 1
        self.bytes_written += len(datagram)
        return len(datagram)

    def flush(self) -> None:
        pass

    def prepare(self) -> None:
        """Nothing to make ready at the end of a run: each datagram has left already (an
        -o file is renamed into place here)."""

    def close(self) -> None:
        self._sock.close()

    def __enter__(self) -> "DatagramSender":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def check_fits_datagram(code, depth: int, frame_bytes: int) -> None:
    """EndpointError unless a full frame of this code, depth and payload size fits one
    datagram (each frame sent to udp: is one datagram, never cut)."""
    from bitmend.container import format as fmt
    from bitmend.container.writer import resolve_code

    code_id, defined = resolve_code(code)
    header = (fmt.FrameHeader.for_defined_code(defined, depth, 0, frame_bytes) if defined is not None
              else fmt.FrameHeader(code_id, depth, 0, frame_bytes))
    if header.frame_bytes > MAX_DATAGRAM:
        raise EndpointError(f"a full frame ({header.frame_bytes} bytes with --frame-bytes {frame_bytes}) does not "
                            f"fit one datagram ({MAX_DATAGRAM} bytes): lower --frame-bytes")


def pump_datagrams(receiver: DatagramReceiver, encoder, frame_bytes: int, max_delay: float | None) -> int:
    """Send each datagram received as one record (one frame) through encoder, at once; a
    repair group still open max_delay seconds after its first frame is closed (None: only
    when full). Datagrams longer than frame_bytes are not sent: one oversized datagram must
    not end a live link. Returns how many were refused. The receiver must tick (yield None
    at every poll) so that the deadline is seen on a quiet link."""
    import time

    refused = 0
    group_since: float | None = None
    for datagram in receiver:
        if datagram is not None:
            if len(datagram) > frame_bytes:
                refused += 1
                continue
            encoder.send_record(datagram)
        if not encoder.group_open:
            group_since = None
        elif group_since is None:
            group_since = time.monotonic()
        elif max_delay is not None and time.monotonic() - group_since >= max_delay:
            encoder.end_group()
            group_since = None
    return refused
