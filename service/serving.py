"""Start the web service: uvicorn with the event loop and socket options Foldwise wants.

Two choices here were measured, not assumed (``bench/fold_http.py``, 32 connections
on one worker, 2 cores):

* **Event loop: asyncio by default.** uvloop answers about as many requests per second,
  but under steady load a few requests wait far longer than the rest: with a new
  20-tone fold body per request its p99 was 120–150 ms where asyncio's was about 30 ms,
  and /healthz's p99 13–19 ms against about 10 ms. ``--loop uvloop`` is still there.
* **TCP_NODELAY on every connection.** asyncio sets it only on sockets whose protocol
  number is TCP; the listening socket uvicorn makes for several workers has protocol 0,
  so with ``--workers 2`` every response waited for the client's delayed ACK (about
  40 ms each). :class:`NoDelayHttp` sets it whatever the listening socket.
* **Writes held to the next turn of the loop.** uvicorn writes the head of a response
  and its body separately: two system calls and two TCP segments per response, each
  waking the client. :class:`CoalescingTransport` sends what one turn of the loop wrote
  in one go: with a new 20-tone fold body per request, kernel time per request fell
  from about 80 µs to about 26 µs and throughput rose by about 17 %. Joining only the
  head with its body, sent at once, saved the system call but not the kernel time.
"""

from __future__ import annotations

import asyncio
import contextlib
import socket
from typing import Any, Literal

import uvicorn
from uvicorn.protocols.http.httptools_impl import HttpToolsProtocol

__all__ = ["LOOPS", "CoalescingTransport", "NoDelayHttp", "serve"]

LOOPS = ("asyncio", "uvloop")
Loop = Literal["asyncio", "uvloop"]


def set_nodelay(sock: object) -> bool:
    """Turn Nagle's algorithm off on a TCP socket; whether it was one."""
    family = getattr(sock, "family", None)
    if family not in (socket.AF_INET, socket.AF_INET6):
        return False  # a Unix socket has no Nagle's algorithm
    with contextlib.suppress(OSError):
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)  # type: ignore[attr-defined]
        return True
    return False


class CoalescingTransport(asyncio.Transport):
    """Holds the writes made in one turn of the event loop and sends them together at
    the start of the next, when the loop runs its ready callbacks.

    The head and body of a response become one system call and one TCP segment, and
    the answers to many connections leave back to back. The price: under load, an
    answer finished early in a busy turn waits for the rest of that turn. Measured, the
    throughput gained outweighs it (p99 24–28 ms against 28–30 ms when each answer was
    sent the moment it was complete). A write of :data:`MAX_HELD`
    bytes or more, or one that brings the held bytes there, sends at once (after what
    is held, never copied); close and write_eof send what is held first, and the buffer
    size counts it, so ordering and flow control stay the wrapped transport's.
    """

    #: Bytes held per connection before they are sent without waiting for the loop.
    MAX_HELD = 64 * 1024

    def __init__(self, transport: asyncio.Transport, loop: asyncio.AbstractEventLoop) -> None:
        super().__init__()
        self._transport = transport
        self._loop = loop
        self._held: bytearray | None = None

    def write(self, data: bytes | bytearray | memoryview) -> None:
        if not data:
            return
        if len(data) >= self.MAX_HELD:
            self._send_held()
            self._transport.write(data)
            return
        if self._held is None:
            self._held = bytearray(data)
            self._loop.call_soon(self._send_held)
            return
        self._held += data
        if len(self._held) >= self.MAX_HELD:
            self._send_held()

    def writelines(self, list_of_data: Any) -> None:
        self.write(b"".join(bytes(d) for d in list_of_data))

    def _send_held(self) -> None:
        held, self._held = self._held, None
        if held is not None and not self._transport.is_closing():
            self._transport.write(held)

    def close(self) -> None:
        self._send_held()
        self._transport.close()

    def abort(self) -> None:
        self._held = None
        self._transport.abort()

    def write_eof(self) -> None:
        self._send_held()
        self._transport.write_eof()

    def can_write_eof(self) -> bool:
        return self._transport.can_write_eof()

    def is_closing(self) -> bool:
        return self._transport.is_closing()

    def get_extra_info(self, name: str, default: Any = None) -> Any:
        return self._transport.get_extra_info(name, default)

    def pause_reading(self) -> None:
        self._transport.pause_reading()

    def resume_reading(self) -> None:
        self._transport.resume_reading()

    def is_reading(self) -> bool:
        return self._transport.is_reading()

    def set_write_buffer_limits(self, high: int | None = None, low: int | None = None) -> None:
        self._transport.set_write_buffer_limits(high, low)

    def get_write_buffer_size(self) -> int:
        return self._transport.get_write_buffer_size() + len(self._held or b"")

    def get_write_buffer_limits(self) -> tuple[int, int]:
        return self._transport.get_write_buffer_limits()

    def set_protocol(self, protocol: asyncio.BaseProtocol) -> None:
        self._transport.set_protocol(protocol)

    def get_protocol(self) -> asyncio.BaseProtocol:
        return self._transport.get_protocol()


class NoDelayHttp(HttpToolsProtocol):
    """uvicorn's httptools protocol, with TCP_NODELAY set when a connection is made and
    writes coalesced by :class:`CoalescingTransport`."""

    def connection_made(self, transport):  # type: ignore[no-untyped-def]
        set_nodelay(transport.get_extra_info("socket"))
        super().connection_made(CoalescingTransport(transport, self.loop))


def serve(host: str, port: int, workers: int, log_level: str, loop: Loop = "asyncio") -> None:
    """Run the service until interrupted (uvicorn's own signal handling)."""
    if loop not in LOOPS:
        raise ValueError(f"loop={loop!r} must be one of {', '.join(LOOPS)}")
    uvicorn.run(
        "service.api.app:create_app",
        factory=True,
        host=host,
        port=port,
        workers=workers,
        log_level=log_level,
        access_log=False,  # the app writes its own JSON access log
        loop=loop,
        http="service.serving:NoDelayHttp",
    )
