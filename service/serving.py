"""Start the web service: uvicorn with the event loop and socket options Foldwise wants.

Three choices here were measured, not assumed (``bench/fold_http.py``, 32 connections
on one worker, 2 cores):

* **Event loop: asyncio by default.** uvloop answers about as many requests per second,
  but under steady load a few requests wait far longer than the rest: with a new
  20-tone fold body per request its p99 was 120–150 ms where asyncio's was about 30 ms,
  and /healthz's p99 13–19 ms against about 10 ms. ``--loop uvloop`` is still there.
* **TCP_NODELAY on every connection.** asyncio sets it only on sockets whose protocol
  number is TCP; the listening socket uvicorn makes for several workers has protocol 0,
  so with ``--workers 2`` every response waited for the client's delayed ACK (about
  40 ms each). :class:`NoDelayHttp` sets it whatever the listening socket.
* **Writes go out as they are made.** uvicorn writes a response's head and its body
  separately. Holding writes until the loop's next turn and sending them together was
  tried: with only computed folds it cut kernel time per request from about 80 µs to
  26 µs and raised throughput by 17 %, but an answer then waits behind whatever else
  that turn runs. Under the mixed load of ``bench/load.py`` (folds beside diagnoses
  and saves, two workers) two runs with it gave 617 and 720 req/s in all and fold p50
  57–81 ms; three without, 876–1230 req/s and 24–45 ms. It was taken out.
"""

from __future__ import annotations

import contextlib
import socket
from typing import Literal

import uvicorn
from uvicorn.protocols.http.httptools_impl import HttpToolsProtocol

__all__ = ["LOOPS", "NoDelayHttp", "serve"]

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


class NoDelayHttp(HttpToolsProtocol):
    """uvicorn's httptools protocol, with TCP_NODELAY set when a connection is made."""

    def connection_made(self, transport):  # type: ignore[no-untyped-def]
        set_nodelay(transport.get_extra_info("socket"))
        super().connection_made(transport)


def serve(host: str, port: int, workers: int, log_level: str, loop: Loop = "asyncio") -> None:
    """Run the service until interrupted (uvicorn's own signal handling)."""
    if loop not in LOOPS:
        raise ValueError(f"loop={loop!r} must be one of {', '.join(LOOPS)}")
    uvicorn.run(
        "service.app:create_app",
        factory=True,
        host=host,
        port=port,
        workers=workers,
        log_level=log_level,
        access_log=False,  # the app writes its own JSON access log
        loop=loop,
        http="service.serving:NoDelayHttp",
    )
