"""deploy/compose.audit.yaml: a scheduler and two workers that can reach it."""

from __future__ import annotations

from pathlib import Path

import yaml

COMPOSE = Path(__file__).resolve().parents[2] / "deploy" / "compose.audit.yaml"


def test_scheduler_and_two_workers() -> None:
    services = yaml.safe_load(COMPOSE.read_text())["services"]
    sched = services["scheduler"]["command"]
    assert sched[:2] == ["dask", "scheduler"]
    port = sched[sched.index("--port") + 1]
    workers = [s for s in services.values() if s["command"][:2] == ["dask", "worker"]]
    assert len(workers) == 2
    for w in workers:
        assert w["command"][2] == f"tcp://scheduler:{port}"
        assert w["command"][w["command"].index("--nthreads") + 1] == "1"
        assert any(v.endswith(":/archive:ro") for v in w["volumes"])
    # The scheduler is published on loopback only.
    assert services["scheduler"]["ports"] == [f"127.0.0.1:{port}:{port}"]
