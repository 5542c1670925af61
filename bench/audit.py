"""Benchmark the archive audit (issue 16's bars) on the generated demo archive.

Throughput: ``--count`` generated recordings (default 2,000) audited by a local Dask
cluster of one worker and of two workers (one thread each, started before the clock runs
and warmed up); printed: seconds, recordings per second and the ratio two/one (bar:
>= 1.6x). The machine has two cores: anything else running skews the ratio.

Memory: a ``--rows``-row manifest (default 20,000) over the same recordings, each row
with its own band of interest so every row is a distinct diagnosis, run in a child
process with two workers; printed: the peak resident memory of the client process and
of each worker (bar: <= 1 GiB each).

Run: ``.venv/bin/python bench/audit.py [--count N] [--rows N] [--folder DIR]``; a quick
check: ``--count 200 --rows 1000``; ``--rows 0`` skips the memory run. Exits 1 when a bar is missed.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import pandas as pd  # noqa: E402

from service.audit import run_audit  # noqa: E402
from service.audit.demo import make_demo_archive  # noqa: E402

GIB = 1024**3


def _archive(folder: Path, count: int) -> tuple[Path, Path]:
    """The generated archive, reused when a previous run made one of this size."""
    stamp = folder / "count.txt"
    if stamp.exists() and stamp.read_text() == str(count):
        return folder / "manifest.csv", folder / "library.json"
    shutil.rmtree(folder, ignore_errors=True)
    t0 = time.perf_counter()
    manifest, library = make_demo_archive(folder, count=count, seed=16, bad_rows=False)
    stamp.write_text(str(count))
    print(f"generated {count} recordings in {time.perf_counter() - t0:.1f} s")
    return manifest, library


def _timed_audit(manifest: Path, library: Path, folder: Path, workers: int) -> float:
    from distributed import LocalCluster

    with LocalCluster(
        n_workers=workers,
        threads_per_worker=1,
        processes=True,
        memory_limit="1GiB",
        host="127.0.0.1",
        dashboard_address=None,
    ) as cl:
        with tempfile.TemporaryDirectory() as warm:  # imports and first-call costs
            head = Path(warm) / "m.csv"
            pd.read_csv(manifest).head(4 * workers).to_csv(head, index=False)
            run_audit(
                head,
                library,
                folder,
                Path(warm) / "out",
                scheduler=cl.scheduler_address,
                progress=False,
            )
        with tempfile.TemporaryDirectory() as out:
            t0 = time.perf_counter()
            s = run_audit(
                manifest, library, folder, out, scheduler=cl.scheduler_address, progress=False
            )
            elapsed = time.perf_counter() - t0
    assert s.errors == 0 and s.computed == s.total, s
    return elapsed


def _peak_rss_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux: KiB


def _memory_child(manifest: Path, library: Path, folder: Path) -> None:
    """Runs in a fresh process so the client's peak is the audit's own."""
    from distributed import Client, LocalCluster

    with LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        memory_limit="1GiB",
        host="127.0.0.1",
        dashboard_address=None,
    ) as cl:
        with tempfile.TemporaryDirectory() as out:
            t0 = time.perf_counter()
            s = run_audit(
                manifest, library, folder, out, scheduler=cl.scheduler_address, progress=False
            )
            elapsed = time.perf_counter() - t0
            with Client(cl.scheduler_address) as c:
                workers = c.run(_peak_rss_bytes)
    print(
        json.dumps(
            {
                "rows": s.total,
                "computed": s.computed,
                "errors": s.errors,
                "peaks": s.peaks,
                "seconds": elapsed,
                "client": _peak_rss_bytes(),
                "workers": list(workers.values()),
            }
        )
    )


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--count", type=int, default=2000)
    ap.add_argument("--rows", type=int, default=20_000)
    ap.add_argument(
        "--folder", type=Path, default=Path(tempfile.gettempdir()) / "foldwise-audit-bench"
    )
    ap.add_argument("--memory-child", nargs=3, type=Path, help=argparse.SUPPRESS)
    ns = ap.parse_args()
    if ns.memory_child:
        _memory_child(*ns.memory_child)
        return 0
    folder = ns.folder
    manifest, library = _archive(folder, ns.count)
    ok = True

    t1 = _timed_audit(manifest, library, folder, 1)
    t2 = _timed_audit(manifest, library, folder, 2)
    ratio = t1 / t2
    print(
        f"throughput, {ns.count} recordings: one worker {t1:.1f} s "
        f"({ns.count / t1:.1f} rec/s), two workers {t2:.1f} s ({ns.count / t2:.1f} rec/s)"
    )
    print(f"  two/one = {ratio:.2f}x  (bar >= 1.6x) {'PASS' if ratio >= 1.6 else 'FAIL'}")
    ok &= ratio >= 1.6

    if ns.rows <= 0:
        return 0 if ok else 1
    base = pd.read_csv(manifest)
    rows = base.iloc[[i % len(base) for i in range(ns.rows)]].reset_index(drop=True)
    # A band of its own per row: the same file, a different diagnosis, a distinct key.
    rows["band_low_hz"] = 0.0
    rows["band_high_hz"] = 2000.0 + (rows.index // len(base)) * 1.0
    big = folder / f"manifest-{ns.rows}.csv"
    rows.to_csv(big, index=False)
    child = subprocess.run(
        [sys.executable, __file__, "--memory-child", str(big), str(library), str(folder)],
        capture_output=True,
        text=True,
        check=True,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    m = json.loads(child.stdout.strip().splitlines()[-1])
    print(
        f"memory, {m['rows']} rows ({m['computed']} diagnosed, {m['errors']} errors, "
        f"{m['peaks']} peaks) in {m['seconds']:.0f} s:"
    )
    peaks = [("client", m["client"])] + [(f"worker {i}", w) for i, w in enumerate(m["workers"])]
    for name, b in peaks:
        good = b <= GIB
        ok &= good
        print(
            f"  {name:9s} peak RSS {b / 2**20:7.0f} MiB  (bar <= 1024 MiB) "
            f"{'PASS' if good else 'FAIL'}"
        )
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
