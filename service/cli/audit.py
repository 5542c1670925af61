"""``foldwise audit`` and ``foldwise audit-demo``: the options are the audit's own
(:mod:`service.audit.__main__`), registered here so there is one parser, not two."""

from __future__ import annotations

import argparse
from typing import Any

__all__ = ["register"]


def _cmd_audit(ns: argparse.Namespace) -> int:
    from ..audit.__main__ import run

    return run(ns)


def _cmd_demo(ns: argparse.Namespace) -> int:
    from ..audit.__main__ import run_demo

    return run_demo(ns)


def register(subparsers: Any) -> None:
    """Add ``audit`` and ``audit-demo`` to ``foldwise``'s sub-parsers."""
    from ..audit.__main__ import add_arguments, add_demo_arguments

    p = subparsers.add_parser(
        "audit",
        help="diagnose every recording of an archive (a manifest) on Dask",
        description="Diagnose every recording of a manifest on a local Dask cluster, or on "
        "a running one (--scheduler). Results: OUT/peaks.parquet and OUT/recordings.parquet; "
        "a re-run skips the recordings already done.",
    )
    add_arguments(p).set_defaults(func=_cmd_audit)
    d = subparsers.add_parser(
        "audit-demo", help="write a demo archive of the invented drive-unit bench"
    )
    add_demo_arguments(d).set_defaults(func=_cmd_demo)
