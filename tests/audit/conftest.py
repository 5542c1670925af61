"""A real Dask scheduler and workers, started as separate processes on 127.0.0.1, and a
small generated archive of the demo bench."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from service.audit.demo import make_demo_archive
from service.config import Settings

ROOT = Path(__file__).resolve().parents[2]
DASK = Path(sys.executable).with_name("dask")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class DaskProcesses:
    """A scheduler process and worker processes (no nanny: a killed worker stays dead)."""

    address: str
    scheduler: subprocess.Popen
    workers: list[subprocess.Popen] = field(default_factory=list)
    logs: list = field(default_factory=list)

    def stop(self) -> None:
        for p in [*self.workers, self.scheduler]:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in [*self.workers, self.scheduler]:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        for f in self.logs:
            f.close()


def start_dask(n_workers: int, log_dir: Path) -> DaskProcesses:
    env = {**os.environ, "PYTHONPATH": str(ROOT), "PYTHONWARNINGS": "ignore"}
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    log_dir.mkdir(parents=True, exist_ok=True)
    logs = [
        open(log_dir / f"{n}.log", "wb")
        for n in ["scheduler"] + [f"worker{i}" for i in range(n_workers)]
    ]
    sched = subprocess.Popen(
        [str(DASK), "scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
        env=env,
        cwd=ROOT,
        stdout=subprocess.DEVNULL,
        stderr=logs[0],
    )
    procs = DaskProcesses(address, sched, logs=logs)
    for i in range(n_workers):
        procs.workers.append(
            subprocess.Popen(
                [
                    str(DASK),
                    "worker",
                    address,
                    "--host",
                    "127.0.0.1",
                    "--nthreads",
                    "1",
                    "--no-nanny",
                    "--no-dashboard",
                    "--memory-limit",
                    "1GiB",
                    "--name",
                    f"w{i}",
                ],
                env=env,
                cwd=ROOT,
                stdout=subprocess.DEVNULL,
                stderr=logs[i + 1],
            )
        )
    from distributed import Client

    deadline = time.monotonic() + 90
    while True:
        try:
            with Client(address, timeout=5) as c:
                c.wait_for_workers(n_workers, timeout=60)
            break
        except OSError:
            if time.monotonic() > deadline:
                procs.stop()
                raise
            time.sleep(0.5)
    return procs


@pytest.fixture(scope="session")
def archive(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, Path]:
    """(folder, manifest, library): 15 demo recordings and three wrong rows."""
    folder = tmp_path_factory.mktemp("archive")
    manifest, library = make_demo_archive(folder, count=15, seed=3, seconds=0.5)
    return folder, manifest, library


@pytest.fixture(scope="session")
def archive50(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, Path]:
    """(folder, manifest, library): 50 demo recordings, every row good (the issue's
    sample size for parity with the single-recording answer)."""
    folder = tmp_path_factory.mktemp("archive50")
    manifest, library = make_demo_archive(folder, count=50, seed=7, seconds=0.5, bad_rows=False)
    return folder, manifest, library


@pytest.fixture(scope="session")
def dask_cluster(tmp_path_factory: pytest.TempPathFactory) -> Iterator[DaskProcesses]:
    procs = start_dask(2, tmp_path_factory.mktemp("dask-logs"))
    yield procs
    procs.stop()


@pytest.fixture
def audit_settings(tmp_path: Path) -> Settings:
    return Settings(data_dir=tmp_path / "data")
