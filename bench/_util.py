"""Small helpers shared by the benchmark scripts (timing and a local server)."""

from __future__ import annotations

import contextlib
import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from collections.abc import Callable, Iterator
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def best_of(fn: Callable[[], object], repeat: int = 7, number: int = 1) -> float:
    """Best wall time of ``repeat`` runs of ``number`` calls, seconds per call."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        best = min(best, (time.perf_counter() - t0) / number)
    return best


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class ServerURL(str):
    """The base URL of a local server, carrying the server's process id."""

    pid: int


@contextlib.contextmanager
def local_server(
    env: dict[str, str] | None = None,
    workers: int = 1,
    data_dir: Path | None = None,
    loop: str = "asyncio",
) -> Iterator[ServerURL]:
    """Start ``foldwise serve`` on 127.0.0.1 and yield its base URL; stop it afterwards.

    With one worker the process serving requests is the one started here (``.pid``)."""
    port = free_port()
    full_env = {**os.environ, **(env or {})}
    if data_dir is not None:
        full_env["FOLDWISE_DATA_DIR"] = str(data_dir)
    # The server's log goes to a file: a pipe nobody reads would fill and stall it.
    log = tempfile.NamedTemporaryFile(prefix="foldwise-bench-", suffix=".log", delete=False)
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "service.cli",
            "serve",
            "--host",
            "127.0.0.1",
            "--port",
            str(port),
            "--workers",
            str(workers),
            "--loop",
            loop,
        ],
        cwd=ROOT,
        env=full_env,
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    base = ServerURL(f"http://127.0.0.1:{port}")
    base.pid = proc.pid
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                with urllib.request.urlopen(base + "/healthz", timeout=1) as r:
                    if r.status == 200:
                        break
            except OSError:
                if proc.poll() is not None:
                    err = Path(log.name).read_text(errors="replace")
                    raise RuntimeError(f"server exited: {err[-2000:]}") from None
                if time.monotonic() > deadline:
                    raise RuntimeError("server did not start in 60 s") from None
                time.sleep(0.2)
        yield base
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
