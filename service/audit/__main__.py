"""``python -m service.audit manifest.csv --library library.json``: an audit from the shell.

A stand-in until ``foldwise audit`` is wired into :mod:`service.cli`; the options map
one to one onto :func:`service.audit.run_audit`.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from .engine import run_audit


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="python -m service.audit",
        description="Diagnose every recording of a manifest (CSV or Parquet) on Dask.",
    )
    p.add_argument("manifest", type=Path)
    p.add_argument("--library", type=Path, help="JSON of named chains, sources, options")
    p.add_argument("--folder", type=Path, help="archive folder (default: the manifest's)")
    p.add_argument("--out", type=Path, default=Path("audit-out"), help="result folder")
    p.add_argument("--scheduler", help="address of a running Dask scheduler")
    p.add_argument("--workers", type=int, help="local workers (default: one per core)")
    p.add_argument("--no-progress", action="store_true")
    return p


def main(argv: list[str] | None = None) -> int:
    ns = build_parser().parse_args(argv)
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
    print(
        f"{s.total} rows: {s.computed} diagnosed, {s.skipped} already done, {s.errors} "
        f"errors; {s.peaks} peaks on {s.workers} workers in {s.elapsed_s:.1f} s\n"
        f"{s.recordings_path}\n{s.peaks_path}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
