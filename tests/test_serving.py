"""How the service is started: event loop choice and TCP_NODELAY on every connection."""

from __future__ import annotations

import asyncio
import socket
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import httpx
import pytest
import uvicorn
from uvicorn.server import ServerState

from service.cli import build_parser
from service.serving import NoDelayHttp, serve, set_nodelay


def _listener_like_uvicorns_workers() -> socket.socket:
    # uvicorn's Config.bind_socket (used with --workers > 1) makes socket.socket(family):
    # protocol number 0, which CPython's asyncio does not recognise as TCP.
    sock = socket.socket(socket.AF_INET)
    sock.bind(("127.0.0.1", 0))
    sock.listen()
    assert sock.proto == 0
    return sock


def _nodelay(transport: asyncio.BaseTransport) -> int:
    sock = transport.get_extra_info("socket")
    return int(sock.getsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY))


def _accepted_nodelay(make_protocol: Any) -> int:
    """TCP_NODELAY on the server side of one connection accepted through asyncio.

    In a thread of its own: the browser tests keep an event loop running in this one."""
    with ThreadPoolExecutor(1) as pool:
        return pool.submit(asyncio.run, _accept_one(make_protocol)).result()


async def _accept_one(make_protocol: Any) -> int:
    loop = asyncio.get_running_loop()
    seen: asyncio.Future[int] = loop.create_future()
    listener = _listener_like_uvicorns_workers()
    server = await loop.create_server(lambda: make_protocol(seen), sock=listener)
    try:
        port = listener.getsockname()[1]
        _, writer = await asyncio.open_connection("127.0.0.1", port)
        value = await asyncio.wait_for(seen, 10)
        writer.close()
        await writer.wait_closed()
        return value
    finally:
        server.close()
        await server.wait_closed()


class _Plain(asyncio.Protocol):
    def __init__(self, seen: asyncio.Future[int]) -> None:
        self.seen = seen

    def connection_made(self, transport: asyncio.BaseTransport) -> None:
        self.seen.set_result(_nodelay(transport))


async def _app(scope: Any, receive: Any, send: Any) -> None:  # never called here
    raise AssertionError("no request is sent")


def _nodelay_http(seen: asyncio.Future[int]) -> NoDelayHttp:
    class Probe(NoDelayHttp):
        def connection_made(self, transport):  # type: ignore[no-untyped-def]
            super().connection_made(transport)
            seen.set_result(_nodelay(transport))

    config = uvicorn.Config(_app, log_level="warning")
    return Probe(config=config, server_state=ServerState(), app_state={})


class TestNoDelay:
    def test_asyncio_leaves_nagle_on_for_such_a_listener(self) -> None:
        # The problem being fixed (CPython's base_events._set_nodelay checks the
        # protocol number): without the fix, Nagle's algorithm stays on.
        assert _accepted_nodelay(_Plain) == 0

    def test_protocol_turns_it_off(self) -> None:
        assert _accepted_nodelay(_nodelay_http) != 0

    def test_not_a_tcp_socket(self) -> None:
        a, b = socket.socketpair(socket.AF_UNIX)
        with a, b:
            assert set_nodelay(a) is False
        assert set_nodelay(None) is False


class TestServeArguments:
    def test_loop_choice(self) -> None:
        assert build_parser().parse_args(["serve"]).loop == "asyncio"
        assert build_parser().parse_args(["serve", "--loop", "uvloop"]).loop == "uvloop"
        with pytest.raises(SystemExit):
            build_parser().parse_args(["serve", "--loop", "trio"])

    def test_unknown_loop_is_refused_before_starting(self) -> None:
        with pytest.raises(ValueError, match="loop='trio' must be one of asyncio, uvloop"):
            serve("127.0.0.1", 0, 1, "warning", loop="trio")  # type: ignore[arg-type]


async def _answers(app: Any, requests: list[tuple[str, str, dict[str, str]]]) -> list[Any]:
    """Real HTTP through the protocol the server uses, read by httpx."""
    loop = asyncio.get_running_loop()
    config = uvicorn.Config(app, log_level="warning")
    state = ServerState()
    listener = _listener_like_uvicorns_workers()
    server = await loop.create_server(
        lambda: NoDelayHttp(config=config, server_state=state, app_state={}), sock=listener
    )
    port = listener.getsockname()[1]
    try:
        async with httpx.AsyncClient(base_url=f"http://127.0.0.1:{port}") as client:
            out = []
            for method, path, headers in requests:
                r = await client.request(method, path, headers=headers)
                out.append((r.status_code, r.headers, r.content))
            return out
    finally:
        server.close()
        await server.wait_closed()


async def _small_app(scope: Any, receive: Any, send: Any) -> None:
    if scope["type"] != "http":
        return
    path = scope["path"]
    if path == "/empty":
        await send({"type": "http.response.start", "status": 204, "headers": []})
        await send({"type": "http.response.body", "body": b""})
        return
    if path == "/stream":
        await send({"type": "http.response.start", "status": 200, "headers": []})
        for i in range(5):
            await send({"type": "http.response.body", "body": b"part%d;" % i, "more_body": True})
            await asyncio.sleep(0.001)
        await send({"type": "http.response.body", "body": b"", "more_body": False})
        return
    body = b"y" * (200_000 if path == "/big" else 10)
    headers = [(b"content-length", str(len(body)).encode()), (b"content-type", b"text/plain")]
    await send({"type": "http.response.start", "status": 200, "headers": headers})
    await send({"type": "http.response.body", "body": body})


class TestHttpThroughTheProtocol:
    def test_responses_arrive_whole(self) -> None:
        requests = [
            ("GET", "/small", {}),
            ("GET", "/big", {}),
            ("GET", "/empty", {}),
            ("GET", "/stream", {}),
            ("HEAD", "/small", {}),
            ("GET", "/small", {"connection": "close"}),
        ]
        with ThreadPoolExecutor(1) as pool:
            got = pool.submit(asyncio.run, _answers(_small_app, requests)).result()
        small, big, empty, stream, head, closing = got
        assert small[0] == 200 and small[2] == b"y" * 10
        assert big[0] == 200 and big[2] == b"y" * 200_000
        assert empty[0] == 204 and empty[2] == b""
        assert stream[0] == 200 and stream[1]["transfer-encoding"] == "chunked"
        assert stream[2] == b"part0;part1;part2;part3;part4;"
        assert head[0] == 200 and head[2] == b""
        assert closing[0] == 200 and closing[2] == b"y" * 10
        assert closing[1]["connection"] == "close"
