"""``foldwise audit`` and ``foldwise audit-demo``: diagnose every recording of an archive.

The options map one to one onto :func:`service.audit.run_audit`. Dask, pyarrow and the
diagnosis are imported only when an audit runs, so ``foldwise --help`` stays quick.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import sys
from pathlib import Path
from typing import Any

__all__ = ["add_arguments", "add_demo_arguments", "register", "run", "run_demo"]


def add_arguments(p: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """The audit's options, on ``p``."""
    p.add_argument("manifest", type=Path, help="manifest (CSV or Parquet), one row per recording")
    p.add_argument("--library", type=Path, help="JSON of named chains, sources, options")
    p.add_argument("--folder", type=Path, help="archive folder (default: the manifest's)")
    p.add_argument("--out", type=Path, default=Path("audit-out"), help="result folder")
    p.add_argument("--scheduler", help="address of a running Dask scheduler (tcp://host:8786)")
    p.add_argument("--workers", type=int, help="local workers (default: one per core)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    return p


def add_demo_arguments(p: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """The demo archive's options, on ``p``."""
    p.add_argument("folder", type=Path, help="folder to write the archive into")
    p.add_argument("--count", type=int, default=300, help="recordings (default 300)")
    p.add_argument("--json", action="store_true", help="print the two paths as JSON")
    return p


def run(ns: argparse.Namespace) -> int:
    """Run the audit the options describe; print its summary. 2 on bad input."""
    if ns.workers is not None and ns.workers < 1:
        print(f"audit: --workers={ns.workers} must be at least 1", file=sys.stderr)
        return 2
    from ..audit.engine import run_audit  # Dask and pyarrow: only when an audit runs

    try:
        s = run_audit(
            ns.manifest,
            ns.library,
            ns.folder or ns.manifest.parent,
            ns.out,
            scheduler=ns.scheduler,
            workers=ns.workers,
            progress=not ns.no_progress,
        )
    except (OSError, ValueError) as exc:
        print(f"audit: {exc}", file=sys.stderr)
        return 2
    if ns.json:
        doc = {k: str(v) if isinstance(v, Path) else v for k, v in dataclasses.asdict(s).items()}
        print(json.dumps(doc, indent=2))
        return 0
    print(
        f"{s.total} rows: {s.computed} diagnosed, {s.skipped} already done, {s.errors} "
        f"errors; {s.peaks} peaks on {s.workers} workers in {s.elapsed_s:.1f} s\n"
        f"{s.recordings_path}\n{s.peaks_path}"
    )
    return 0


def run_demo(ns: argparse.Namespace) -> int:
    """Write the demo archive; print where its manifest and library are."""
    if not 1 <= ns.count <= 100_000:
        print(f"audit-demo: --count={ns.count} must be from 1 to 100000", file=sys.stderr)
        return 2
    from ..audit.demo import make_demo_archive

    manifest, library = make_demo_archive(ns.folder, count=ns.count)
    if ns.json:
        print(json.dumps({"manifest": str(manifest), "library": str(library)}, indent=2))
        return 0
    print(f"{manifest}\n{library}")
    return 0


def register(subparsers: Any) -> None:
    """Add ``audit`` and ``audit-demo`` to ``foldwise``'s sub-parsers."""
    p = subparsers.add_parser(
        "audit",
        help="diagnose every recording of an archive (a manifest) on Dask",
        description="Diagnose every recording of a manifest on a local Dask cluster, or on "
        "a running one (--scheduler). Results: OUT/peaks.parquet and OUT/recordings.parquet; "
        "a re-run skips the recordings already done.",
    )
    add_arguments(p).set_defaults(func=run)
    d = subparsers.add_parser(
        "audit-demo", help="write a demo archive of the invented drive-unit bench"
    )
    add_demo_arguments(d).set_defaults(func=run_demo)
