"""A TCP forwarder on 127.0.0.1 that a test can take down and bring back.

The app's database URL points at the forwarder, so a test can make PostgreSQL
unreachable for the app (refused connections, open ones cut) without touching the
shared server.
"""

from __future__ import annotations

import asyncio
import contextlib
import threading

from ._server import free_port

__all__ = ["TcpProxy"]


class TcpProxy:
    def __init__(self, target_host: str, target_port: int) -> None:
        self.target = (target_host, target_port)
        self.port = free_port()
        self._loop = asyncio.new_event_loop()
        self._thread = threading.Thread(target=self._loop.run_forever, daemon=True)
        self._thread.start()
        self._server: asyncio.Server | None = None
        self._writers: set[asyncio.StreamWriter] = set()

    def _run(self, coro: object) -> None:
        asyncio.run_coroutine_threadsafe(coro, self._loop).result(timeout=10)  # type: ignore[arg-type]

    @property
    def up(self) -> bool:
        return self._server is not None

    def start(self) -> None:
        """Listen (again) on the same port and forward to the target."""
        self._run(self._open())

    def stop(self) -> None:
        """Refuse new connections and cut every open one, as a database outage would."""
        self._run(self._close())

    def shutdown(self) -> None:
        if self.up:
            self.stop()
        self._loop.call_soon_threadsafe(self._loop.stop)
        self._thread.join(timeout=5)
        self._loop.close()

    async def _open(self) -> None:
        self._server = await asyncio.start_server(
            self._handle, "127.0.0.1", self.port, reuse_address=True
        )

    async def _close(self) -> None:
        if self._server is None:
            return
        self._server.close()
        for w in list(self._writers):
            w.transport.abort()
        self._writers.clear()
        await self._server.wait_closed()
        self._server = None

    async def _handle(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        try:
            up_reader, up_writer = await asyncio.open_connection(*self.target)
        except OSError:
            writer.transport.abort()
            return
        pair = {writer, up_writer}
        self._writers |= pair
        try:
            await asyncio.gather(self._pipe(reader, up_writer), self._pipe(up_reader, writer))
        finally:
            self._writers -= pair

    @staticmethod
    async def _pipe(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        try:
            while data := await reader.read(65536):
                writer.write(data)
                await writer.drain()
        except (ConnectionError, OSError):
            pass
        finally:
            with contextlib.suppress(Exception):
                writer.close()
