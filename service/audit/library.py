"""Manifest and library reading: one plain task per manifest row, keyed by its settings.

A manifest (CSV or Parquet) has one row per recording and channel. The library (JSON)
names acquisition chains and source sets in the same shapes the diagnose request takes::

    {
      "chains": {
        "eol-12k8": {"sample_rate_hz": 12800, "anti_alias": {"family": "butterworth",
                                                             "order": 2, "cutoff_hz": 5000}},
        "eol-sliced": {"chain": [{"stage": "sample", "rate_hz": 12800},
                                 {"stage": "decimate", "factor": 2, "filter": "none"}]}
      },
      "sources": {
        "drive-unit": [{"type": "shaft", "label": "motor", "speed_rpm": 9000}, ...],
        "scaled": {"reference_rpm": 9000, "sources": [...]}
      },
      "options": {"speed_tolerance_pct": 1.0, "threshold_db": 10}
    }

A row's speed (rpm) sets the machine speed of its source set: for a plain list every
speed field is replaced by the row's speed (all shafts turn at it); for the
``{"reference_rpm", "sources"}`` form every speed field is scaled by
speed / reference_rpm, which keeps the ratios of a multi-shaft machine (a gearbox).

Nothing here reads a recording: the client ships these tasks (paths and settings) to
the workers, which read the files themselves.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from .. import COMPUTATION_VERSION

__all__ = [
    "MANIFEST_COLUMNS",
    "AuditTask",
    "Library",
    "build_request",
    "read_library",
    "read_manifest",
    "settings_key",
]

#: Columns a manifest may have; only ``path`` is required.
MANIFEST_COLUMNS = (
    "path",
    "channel",
    "sample_rate_hz",
    "chain_id",
    "chain",
    "sources_id",
    "speed_rpm",
    "band_low_hz",
    "band_high_hz",
    "kind",
)
_SPEED_FIELDS = ("speed_hz", "speed_rpm", "speed_cpm", "mating_speed_hz", "mating_speed_rpm")
#: Request options a library may set for every row (the diagnose request's own fields).
_OPTION_FIELDS = (
    "spectrum_options",
    "speed_tolerance_pct",
    "threshold_db",
    "level_tolerance_db",
    "blind",
    "max_peaks",
)


@dataclass(frozen=True)
class Library:
    """Named chains, named source sets and options shared by every row."""

    chains: dict[str, dict[str, Any]] = field(default_factory=dict)
    sources: dict[str, Any] = field(default_factory=dict)
    options: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class AuditTask:
    """One manifest row ready to ship: where the file is and how to diagnose it.

    ``request`` is the diagnose request without its data (None when the row itself is
    wrong, ``error`` then says why); ``settings_key`` hashes that request with the
    computation version, and the worker adds the file's content hash to make the key.
    """

    row: int
    recording: str
    channel: int
    path: str
    setup: str
    sources_id: str | None
    speed_rpm: float | None
    request: dict[str, Any] | None
    settings_key: str
    error: str | None = None


def read_library(path: str | Path | None) -> Library:
    """Read the library JSON (chains, sources, options); None gives an empty library."""
    if path is None:
        return Library()
    doc = json.loads(Path(path).read_text(encoding="utf-8"))
    if not isinstance(doc, dict):
        raise ValueError(f"library {path}: the top level must be an object")
    unknown = set(doc) - {"chains", "sources", "options"}
    if unknown:
        raise ValueError(f"library {path}: unknown keys {sorted(unknown)}")
    chains, sources, options = (doc.get(k) or {} for k in ("chains", "sources", "options"))
    for name, value in (("chains", chains), ("sources", sources), ("options", options)):
        if not isinstance(value, dict):
            raise ValueError(f"library {path}: {name} must be an object of named entries")
    bad = set(options) - set(_OPTION_FIELDS)
    if bad:
        raise ValueError(f"library {path}: options {sorted(bad)} are not diagnose options")
    return Library(chains, sources, options)


def _read_table(path: Path) -> pd.DataFrame:
    if path.suffix.lower() in (".parquet", ".pq"):
        return pd.read_parquet(path)
    return pd.read_csv(path, dtype={"path": str, "chain_id": str, "sources_id": str})


def _cell(row: Mapping[str, Any], name: str) -> Any:
    v = row.get(name)
    if v is None or (isinstance(v, float) and math.isnan(v)) or v is pd.NA:
        return None
    if isinstance(v, str) and not v.strip():
        return None
    return v


def _scaled_sources(entry: Any, speed_rpm: float | None, sid: str) -> list[dict[str, Any]]:
    if isinstance(entry, dict):
        ref = entry.get("reference_rpm")
        items = entry.get("sources")
        if not isinstance(items, list) or not (isinstance(ref, int | float) and ref > 0):
            raise ValueError(
                f"source set {sid!r}: give a list of sources or "
                '{"reference_rpm": > 0, "sources": [...]}'
            )
    elif isinstance(entry, list):
        ref, items = None, entry
    else:
        raise ValueError(f"source set {sid!r} must be a list of sources")
    out = []
    for s in items:
        s = dict(s)
        if speed_rpm is not None:
            for f in _SPEED_FIELDS:
                if s.get(f) is None:
                    continue
                if ref is not None:
                    s[f] = s[f] * speed_rpm / ref
                elif f.endswith("_hz"):
                    s[f] = speed_rpm / 60.0
                else:  # rpm and cpm are the same number
                    s[f] = speed_rpm
            if ref is not None and s.get("type") == "tones" and s.get("scales_with_speed"):
                s["freq_hz"] = [f * speed_rpm / ref for f in s["freq_hz"]]
        out.append(s)
    return out


def build_request(row: Mapping[str, Any], lib: Library) -> tuple[dict[str, Any], str]:
    """The diagnose request (without the data) for one manifest row, and its setup name.

    Raises ValueError naming the column and value when the row cannot be resolved.
    """
    req: dict[str, Any] = {k: v for k, v in lib.options.items()}
    chain_id, inline = _cell(row, "chain_id"), _cell(row, "chain")
    rate = _cell(row, "sample_rate_hz")
    if chain_id is not None and inline is not None:
        raise ValueError("give chain_id or chain, not both")
    if chain_id is not None:
        if str(chain_id) not in lib.chains:
            raise ValueError(f"chain_id={chain_id!r} is not in the library's chains")
        spec = lib.chains[str(chain_id)]
        setup = str(chain_id)
    elif inline is not None:
        try:
            spec = json.loads(inline) if isinstance(inline, str) else inline
        except json.JSONDecodeError as exc:
            raise ValueError(f"chain={str(inline)[:80]!r} is not JSON: {exc.msg}") from None
        if isinstance(spec, list):
            spec = {"chain": spec}
        setup = "inline:" + hashlib.sha256(_canon(spec).encode()).hexdigest()[:8]
    elif rate is not None:
        spec = {"sample_rate_hz": float(rate)}
        setup = f"{float(rate):g} S/s, no filter"
    else:
        raise ValueError("the row has no chain_id, chain or sample_rate_hz")
    if not isinstance(spec, dict) or not ({"chain", "sample_rate_hz"} & set(spec)):
        raise ValueError(f"chain for setup {setup!r} needs 'chain' or 'sample_rate_hz'")
    req.update(spec)
    upload: dict[str, Any] = {"channel": int(_cell(row, "channel") or 0)}
    if rate is not None:
        upload["sample_rate_hz"] = float(rate)
    if _cell(row, "kind") is not None:
        upload["kind"] = str(_cell(row, "kind"))
    req["upload"] = upload
    sid = _cell(row, "sources_id")
    speed = _cell(row, "speed_rpm")
    if sid is not None:
        if str(sid) not in lib.sources:
            raise ValueError(f"sources_id={sid!r} is not in the library's sources")
        req["sources"] = _scaled_sources(
            lib.sources[str(sid)], None if speed is None else float(speed), str(sid)
        )
    lo, hi = _cell(row, "band_low_hz"), _cell(row, "band_high_hz")
    if (lo is None) != (hi is None):
        raise ValueError("give both band_low_hz and band_high_hz, or neither")
    if lo is not None:
        req["band_hz"] = [float(lo), float(hi)]
    return req, setup


def _canon(obj: Any) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=str)


def settings_key(request: dict[str, Any] | None) -> str:
    """Hash of everything besides the file that decides the answer."""
    text = _canon({"request": request, "computation_version": COMPUTATION_VERSION})
    return hashlib.sha256(text.encode()).hexdigest()


def read_manifest(manifest: str | Path, library: Library, folder: str | Path) -> list[AuditTask]:
    """One task per manifest row; a row that cannot be resolved carries its error."""
    mpath = Path(manifest)
    table = _read_table(mpath)
    if "path" not in table.columns:
        raise ValueError(f"manifest {mpath} has no 'path' column (columns: {list(table.columns)})")
    if "speed" in table.columns and "speed_rpm" not in table.columns:
        table = table.rename(columns={"speed": "speed_rpm"})
    base = Path(folder)
    tasks = []
    for i, row in enumerate(table.to_dict("records")):
        s = row
        rec = str(_cell(s, "path") or "")
        try:
            channel = int(_cell(s, "channel") or 0)
        except (TypeError, ValueError):
            channel = -1
        speed = _cell(s, "speed_rpm")
        sid = _cell(s, "sources_id")
        common: dict[str, Any] = {
            "row": i,
            "recording": rec,
            "channel": channel,
            "path": str(base / rec),
            "sources_id": None if sid is None else str(sid),
        }
        try:
            if not rec:
                raise ValueError("path is empty")
            if channel < 0:
                raise ValueError(f"channel={row.get('channel')!r} must be a whole number >= 0")
            speed_f = None if speed is None else float(speed)
            req, setup = build_request(s, library)
        except (ValueError, TypeError) as exc:
            tasks.append(
                AuditTask(
                    **common,
                    setup="(invalid row)",
                    speed_rpm=None,
                    request=None,
                    settings_key="",
                    error=f"manifest row {i}: {exc}",
                )
            )
            continue
        tasks.append(
            AuditTask(
                **common,
                setup=setup,
                speed_rpm=speed_f,
                request=req,
                settings_key=settings_key(req),
            )
        )
    return tasks
