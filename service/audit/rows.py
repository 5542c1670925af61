"""Flattening one diagnosis answer into the audit's peak rows and recording summary."""

from __future__ import annotations

import json
from typing import Any

import pyarrow as pa

from .diagnose_one import is_aliased  # the answer's own rule, not a second copy

__all__ = [
    "PEAK_SCHEMA",
    "SUMMARY_SCHEMA",
    "VERDICTS",
    "error_summary",
    "is_aliased",
    "peak_rows",
    "summary_row",
]

VERDICTS = ("alias", "direct", "family", "mirror", "unexplained")

PEAK_SCHEMA = pa.schema(
    [
        ("key", pa.string()),
        ("recording", pa.string()),
        ("channel", pa.int64()),
        ("freq_hz", pa.float64()),
        ("amplitude", pa.float64()),
        ("amplitude_db", pa.float64()),
        ("verdict", pa.string()),
        ("aliased", pa.bool_()),
        ("source", pa.string()),
        ("tone", pa.string()),
        ("true_hz", pa.float64()),
        ("zone", pa.int64()),
        ("confidence", pa.float64()),
        ("in_band", pa.bool_()),
    ]
)

SUMMARY_SCHEMA = pa.schema(
    [
        ("row", pa.int64()),
        ("recording", pa.string()),
        ("channel", pa.int64()),
        ("setup", pa.string()),
        ("sources_id", pa.string()),
        ("speed_rpm", pa.float64()),
        ("key", pa.string()),
        ("content_sha256", pa.string()),
        ("status", pa.string()),  # "ok" or "error"
        ("error", pa.string()),
        ("error_field", pa.string()),
        ("n_peaks", pa.int64()),
        *[(f"n_{v}", pa.int64()) for v in VERDICTS],
        ("n_aliased", pa.int64()),
        ("n_aliased_in_band", pa.int64()),
        ("counts_json", pa.string()),
        ("strongest_alias_hz", pa.float64()),
        ("strongest_alias_db", pa.float64()),
        ("strongest_alias_source", pa.string()),
        ("strongest_alias_true_hz", pa.float64()),
        ("band_low_hz", pa.float64()),
        ("band_high_hz", pa.float64()),
        ("nyquist_hz", pa.float64()),
        ("computation_version", pa.string()),
    ]
)


def peak_rows(key: str, recording: str, channel: int, payload: dict[str, Any]) -> dict[str, list]:
    """Column lists of the peak table for one answer."""
    cols: dict[str, list] = {name: [] for name in PEAK_SCHEMA.names}
    for p in payload["peaks"]:
        cols["key"].append(key)
        cols["recording"].append(recording)
        cols["channel"].append(channel)
        for name in ("freq_hz", "amplitude", "amplitude_db", "verdict", "source", "tone"):
            cols[name].append(p[name])
        cols["aliased"].append(is_aliased(p))
        cols["true_hz"].append(p["true_hz"])
        cols["zone"].append(p["zone"])
        cols["confidence"].append(p["confidence"])
        cols["in_band"].append(p["in_band"])
    return cols


def _base(task: Any, key: str, sha: str | None) -> dict[str, Any]:
    row = dict.fromkeys(SUMMARY_SCHEMA.names)
    row.update(
        row=task.row,
        recording=task.recording,
        channel=task.channel,
        setup=task.setup,
        sources_id=task.sources_id,
        speed_rpm=task.speed_rpm,
        key=key,
        content_sha256=sha,
    )
    return row


def summary_row(task: Any, key: str, sha: str, payload: dict[str, Any]) -> dict[str, Any]:
    """The recording's summary: counts by verdict, strongest in-band alias, the band."""
    row = _base(task, key, sha)
    peaks = payload["peaks"]
    counts = {v: 0 for v in VERDICTS}
    for p in peaks:
        counts[p["verdict"]] = counts.get(p["verdict"], 0) + 1
    aliased = [p for p in peaks if is_aliased(p)]
    in_band = [p for p in aliased if p["in_band"]]
    strongest = max(in_band, key=lambda p: p["amplitude_db"], default=None)
    row.update(
        status="ok",
        n_peaks=len(peaks),
        **{f"n_{v}": counts[v] for v in VERDICTS},
        n_aliased=len(aliased),
        n_aliased_in_band=len(in_band),
        counts_json=json.dumps(counts, sort_keys=True),
        band_low_hz=float(payload["band_hz"][0]),
        band_high_hz=float(payload["band_hz"][1]),
        nyquist_hz=float(payload["nyquist_hz"]),
        computation_version=payload["computation_version"],
    )
    if strongest is not None:
        row.update(
            strongest_alias_hz=strongest["freq_hz"],
            strongest_alias_db=strongest["amplitude_db"],
            strongest_alias_source=strongest["source"],
            strongest_alias_true_hz=strongest["true_hz"],
        )
    return row


def error_summary(
    task: Any, message: str, field: str | None = None, key: str = "", sha: str | None = None
) -> dict[str, Any]:
    """The summary row of a recording that could not be diagnosed."""
    row = _base(task, key, sha)
    row.update(status="error", error=message, error_field=field)
    return row
