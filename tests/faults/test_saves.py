"""Saves through two uvicorn workers: concurrent, then cut off by SIGKILL.

One server start per backend serves both checks, because starting workers is most of
the cost of these tests:

1. 200 saves from 16 threads at once through ``foldwise serve --workers 2``: every one
   is acknowledged (201) and reads back unchanged.
2. Writers keep saving; the whole server (parent and workers) is SIGKILLed with saves
   in flight. A new server on the same data must start and return every save
   acknowledged before the kill, unchanged. Saves cut off mid-flight may be lost,
   never half written.
"""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import httpx
import pytest

from ._server import Server, check_saved, running, save_body

CONCURRENT_SAVES = 200
THREADS = 16
WRITERS = 4
ACKED_BEFORE_KILL = 40

pytestmark = pytest.mark.slow


def _concurrent_saves(server: Server) -> dict[int, dict[str, Any]]:
    with httpx.Client(
        base_url=server.base, timeout=60, limits=httpx.Limits(max_connections=THREADS)
    ) as client:

        def save(n: int) -> tuple[int, dict[str, Any]]:
            r = client.post("/api/v1/diagnoses", json=save_body(n))
            assert r.status_code == 201, f"save {n}: {r.status_code} {r.text[:300]}"
            return n, r.json()

        with ThreadPoolExecutor(THREADS) as pool:
            acked = dict(pool.map(save, range(CONCURRENT_SAVES)))
        assert len({s["id"] for s in acked.values()}) == CONCURRENT_SAVES
        for n, saved in acked.items():
            check_saved(client, n, saved)
    return acked


def _save_until_killed(server: Server, first_n: int) -> dict[int, dict[str, Any]]:
    acked: dict[int, dict[str, Any]] = {}
    refused: list[str] = []
    lock = threading.Lock()
    counter = iter(range(first_n, first_n + 1_000_000))

    def writer() -> None:
        with httpx.Client(base_url=server.base, timeout=30) as client:
            while True:
                with lock:
                    n = next(counter)
                try:
                    r = client.post("/api/v1/diagnoses", json=save_body(n))
                except httpx.TransportError:
                    return  # the server is gone
                with lock:
                    if r.status_code == 201:
                        acked[n] = r.json()
                    else:
                        refused.append(f"save {n}: {r.status_code} {r.text[:300]}")

    threads = [threading.Thread(target=writer, daemon=True) for _ in range(WRITERS)]
    for t in threads:
        t.start()
    deadline = time.monotonic() + 60
    while len(acked) < ACKED_BEFORE_KILL and time.monotonic() < deadline:
        time.sleep(0.01)
    server.kill()  # every writer has a save in flight
    for t in threads:
        t.join(timeout=30)
    assert not any(t.is_alive() for t in threads)
    assert not refused, refused[:3]
    with lock:
        return dict(acked)


class TestSavesConcurrentThenKilled:
    def test_basic(self, server_env: dict[str, str], tmp_path: Path) -> None:
        server = Server(server_env, workers=2, log_path=tmp_path / "first.log")
        try:
            server.wait_until("/readyz")
            acked = _concurrent_saves(server)
            before_kill = _save_until_killed(server, first_n=CONCURRENT_SAVES)
        finally:
            server.stop()
        assert len(before_kill) >= ACKED_BEFORE_KILL, server.log_tail()
        # Not a graceful stop: the parent died by SIGKILL (and its workers with it).
        assert server.proc.returncode == -9
        acked.update(before_kill)

        with (
            running(server_env, workers=1, log_path=tmp_path / "second.log") as again,
            httpx.Client(base_url=again.base, timeout=30) as client,
        ):
            for n, saved in acked.items():
                check_saved(client, n, saved)
