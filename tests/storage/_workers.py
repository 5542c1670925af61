"""Functions run in child processes (multiprocessing, spawn) by the concurrency tests.

They live in a module of their own so a spawned interpreter can import them by name.
"""

from __future__ import annotations

import json
import os
import signal
from pathlib import Path
from typing import Any

import numpy as np

from service.storage import Store

SPECTRUM_FREQ = np.arange(64) * 12.5


def expected_record(worker: int, i: int) -> dict[str, Any]:
    """What worker ``worker`` saves as its ``i``-th record."""
    return {
        "request": {"worker": worker, "i": i, "sample_rate_hz": 12_800.0, "lines": [1, 2, i]},
        "result": {"peaks": [{"apparent_hz": 100.0 + i, "verdict": "alias"}], "n": i},
        "title": f"worker {worker} save {i}",
        "amplitude": np.arange(64, dtype=np.float64) + 1000.0 * worker + i,
    }


def save_many(url: str, worker: int, count: int, barrier: Any, out_path: str) -> None:
    """Migrate (all workers at once, on a fresh database), then save ``count`` records."""
    store = Store.from_url(url)
    barrier.wait(timeout=60)
    store.migrate()
    saved = []
    for i in range(count):
        rec = expected_record(worker, i)
        record_id, token = store.create(
            "diagnose",
            rec["request"],
            rec["result"],
            "2026.12.1",
            "0.1.0",
            spectrum=(SPECTRUM_FREQ, rec["amplitude"]),
            title=rec["title"],
        )
        # Only acknowledged saves are reported back.
        saved.append({"id": record_id, "token": token, "worker": worker, "i": i})
    store.close()
    Path(out_path).write_text(json.dumps(saved))


def save_then_die(url: str, out_path: str) -> None:
    """Save one record, report its id, then die by SIGKILL without any clean-up."""
    store = Store.from_url(url)
    rec = expected_record(7, 0)
    record_id, _ = store.create(
        "plan", rec["request"], rec["result"], "c", "a", spectrum=(SPECTRUM_FREQ, rec["amplitude"])
    )
    with open(out_path, "w") as fh:
        fh.write(record_id)
        fh.flush()
        os.fsync(fh.fileno())
    os.kill(os.getpid(), signal.SIGKILL)


def open_fresh(base: str, rounds: int, barrier: Any, out_path: str) -> None:
    """For each round, open a connection on a new SQLite file at the same moment as the
    other workers; write the errors met (one line each) to ``out_path``."""
    errors = []
    for r in range(rounds):
        barrier.wait(timeout=60)
        store = Store.from_url(f"sqlite:///{base}/round{r}.sqlite3")
        try:
            with store._write_engine.connect():
                pass
        except Exception as exc:
            errors.append(f"round {r}: {exc!s:.200}")
        finally:
            store.close()
    Path(out_path).write_text("\n".join(errors))
