"""Real ``foldwise serve`` processes for the fault and deployment tests.

Each server runs in a process group of its own (uvicorn's parent and its worker
processes), so a test can SIGKILL the whole group at once, as a crash or an
out-of-memory kill would, and start a new server on the same data.
"""

from __future__ import annotations

import contextlib
import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx

ROOT = Path(__file__).resolve().parents[2]
START_TIMEOUT_S = 120.0


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def clean_env(extra: dict[str, str]) -> dict[str, str]:
    """The test's environment without any FOLDWISE_* variable, plus ``extra``."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("FOLDWISE_")}
    env.update(extra)
    return env


class Server:
    """One ``foldwise serve`` on 127.0.0.1 with its own process group."""

    def __init__(
        self, env: dict[str, str], workers: int, log_path: Path, port: int | None = None
    ) -> None:
        self.port = port or free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        self.log_path = log_path
        self._log = log_path.open("ab")
        self.proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "service.cli",
                "serve",
                "--host",
                "127.0.0.1",
                "--port",
                str(self.port),
                "--workers",
                str(workers),
            ],
            cwd=ROOT,
            env=clean_env(env),
            stdin=subprocess.DEVNULL,
            stdout=self._log,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )

    def log_tail(self, chars: int = 3000) -> str:
        return self.log_path.read_text(errors="replace")[-chars:]

    def wait_until(self, path: str, timeout_s: float = START_TIMEOUT_S) -> None:
        """Poll ``path`` until it answers 200; fail with the server's log otherwise."""
        deadline = time.monotonic() + timeout_s
        while True:
            try:
                if httpx.get(self.base + path, timeout=2).status_code == 200:
                    return
            except httpx.TransportError:
                pass
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited early:\n{self.log_tail()}")
            if time.monotonic() > deadline:
                raise RuntimeError(f"{path} not 200 after {timeout_s:.0f} s:\n{self.log_tail()}")
            time.sleep(0.2)

    def kill(self) -> None:
        """SIGKILL the parent and every worker at once."""
        with contextlib.suppress(ProcessLookupError):
            os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=10)

    def stop(self) -> None:
        if self.proc.poll() is None:
            with contextlib.suppress(ProcessLookupError):
                os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self.kill()
        # Workers left behind by a parent that died first go with the group.
        with contextlib.suppress(ProcessLookupError):
            os.killpg(self.proc.pid, signal.SIGKILL)
        self._log.close()


@contextlib.contextmanager
def running(
    env: dict[str, str],
    workers: int,
    log_path: Path,
    ready_path: str = "/readyz",
    port: int | None = None,
) -> Iterator[Server]:
    """A started server (``ready_path`` answered 200), stopped afterwards."""
    server = Server(env, workers, log_path, port)
    try:
        server.wait_until(ready_path)
        yield server
    finally:
        server.stop()


def save_body(n: int) -> dict[str, Any]:
    """A small fold request to save, different for every ``n`` (so no answer is cached)."""
    return {
        "kind": "fold",
        "title": f"bench run {n}",
        "request": {
            "sample_rate_hz": 12_800.0,
            "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0},
            "tones": [
                {"label": "inverter carrier", "freq_hz": 10_000.0 + n, "amplitude": 0.5},
                {"label": "first mesh", "freq_hz": 2550.0 + 0.25 * n, "amplitude": 0.8},
            ],
        },
    }


def check_saved(client: httpx.Client, n: int, saved: dict[str, Any]) -> None:
    """The record behind an acknowledged save reads back as it was acknowledged."""
    r = client.get(f"/api/v1/diagnoses/{saved['id']}")
    assert r.status_code == 200, f"save {n} ({saved['id']}): {r.status_code} {r.text[:300]}"
    got = r.json()
    sent = save_body(n)
    assert got["id"] == saved["id"]
    assert got["kind"] == "fold" and got["title"] == sent["title"]
    assert got["result"] == saved["result"]
    assert [t["freq_hz"] for t in got["request"]["tones"]] == [
        t["freq_hz"] for t in sent["request"]["tones"]
    ]
