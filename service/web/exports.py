"""What a result says about its units and reasons, and what an engineer takes away: the
peak table as CSV, the inputs as entered, and why a fold's collisions count (pages and
CLI word them alike).

Amplitudes. For a time record the service computes the averaged spectrum itself, scaled
so that a sine of amplitude A reads A (``sqrt(2·P)`` of the power spectrum, see
:func:`service.core.spectrum.amplitude_spectrum`): peak amplitudes of sines. A pasted or
uploaded spectrum is taken as the analyser wrote it; the form says whether those values
are peak, RMS or peak-to-peak, and in which unit. Every level in dB is ``20·log10`` of
that amplitude, i.e. dB re 1 of the amplitude unit.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Mapping, Sequence
from typing import Any

__all__ = [
    "AMPLITUDE_KINDS",
    "AMPLITUDE_UNITS",
    "collision_rows",
    "in_band",
    "level_words",
    "peaks_csv",
    "request_rows",
]

#: Amplitude units the diagnose form offers ("" = as in the file, or no unit).
AMPLITUDE_UNITS = [
    ("", "as in the file"),
    ("g", "g"),
    ("m/s²", "m/s²"),
    ("mm/s", "mm/s"),
    ("in/s", "in/s"),
    ("V", "V"),
    ("Pa", "Pa"),
]
#: What the amplitudes of a pasted or uploaded spectrum are.
AMPLITUDE_KINDS = [("peak", "peak"), ("rms", "RMS"), ("pp", "peak-to-peak")]
_KIND_WORDS = dict(AMPLITUDE_KINDS)


def _is_time_record(out: Mapping[str, Any]) -> bool:
    summary = out.get("summary") or {}
    return bool(summary.get("averages")) or "time record" in str(summary.get("input", ""))


def level_words(out: Mapping[str, Any], unit: str = "", kind: str = "") -> dict[str, str]:
    """How the result's amplitudes and levels are labelled.

    ``unit`` is the form's choice ("" takes the unit read from the file, when the answer
    carries one); ``kind`` is peak, rms or pp for a given spectrum (a time record's
    spectrum is always peak). Returns ``unit`` (the word), ``kind`` (its words), ``db``
    ("dB re 1 g"), ``level`` (a column heading), ``axis`` (a figure axis title),
    ``csv_amplitude``/``csv_level`` (CSV headings) and ``statement`` (a sentence).
    """
    summary = out.get("summary") or {}
    unit = unit or str(summary.get("amplitude_unit") or "")
    # "" takes what the answer states (the request's amplitude_kind, kept when saved).
    stated = str(summary.get("amplitude_kind") or "")
    kind = kind or {"peak_to_peak": "pp"}.get(stated, stated)
    computed = _is_time_record(out)
    kind = "peak" if computed else (kind if kind in _KIND_WORDS else "peak")
    unit_word = unit or "input unit"
    db = f"dB re 1 {unit_word}"
    kind_word = _KIND_WORDS[kind]
    if computed:
        statement = (
            f"Amplitudes are peak amplitudes of sines in {unit_word} (the averaged spectrum "
            f"is scaled so a sine of amplitude A reads A); levels are {db}."
        )
    else:
        statement = (
            f"Amplitudes are as the spectrum gave them: {kind_word} values in {unit_word}; "
            f"levels are {db}."
        )
    return {
        "unit": unit_word,
        "kind": kind_word,
        "db": db,
        "level": f"Level, {db}",
        "axis": f"level, {db} ({kind_word})",
        "csv_amplitude": f"amplitude ({unit_word}, {kind_word})",
        "csv_level": f"level ({db})",
        "statement": statement,
    }


#: CSV columns after frequency, amplitude and level: (heading, answer field).
_CSV_COLUMNS = [
    ("noise floor", "floor"),
    ("above the floor (dB)", "snr_db"),
    ("verdict", "verdict"),
    ("confidence", "confidence"),
    ("source", "source"),
    ("tone", "tone"),
    ("true frequency (Hz)", "true_hz"),
    ("Nyquist zone", "zone"),
    ("inverted", "inverted"),
    ("in the band of interest", "in_band"),
    ("explanation", "explanation"),
]


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def peaks_csv(out: Mapping[str, Any], words: Mapping[str, str]) -> str:
    """The peaks of a diagnosis as CSV, one row per peak in the answer's order, with the
    answer's own numbers (full precision) under headings that carry their units."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(
        ["frequency (Hz)", words["csv_amplitude"], words["csv_level"]]
        + [h for h, _ in _CSV_COLUMNS]
    )
    for p in out["peaks"]:
        w.writerow(
            [_cell(p["freq_hz"]), _cell(p["amplitude"]), _cell(p["amplitude_db"])]
            + [_cell(p.get(key)) for _, key in _CSV_COLUMNS]
        )
    return buf.getvalue()


def _value(v: Any) -> str:
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return f"{int(v):,}"
    if isinstance(v, int | float) and not isinstance(v, bool):
        return f"{v:,}"
    if isinstance(v, str) and len(v) > 200:
        return f"{len(v.splitlines()):,} lines of text"
    if isinstance(v, list) and len(v) > 4 and all(isinstance(x, int | float) for x in v):
        return f"{len(v):,} values"
    text = json.dumps(v, ensure_ascii=False) if not isinstance(v, str) else v
    return text if len(text) <= 300 else text[:297] + "…"


#: Words for request fields on the inputs list (the form's labels where it has them).
_REQUEST_LABELS = {
    "sample_rate_hz": "Sample rate, S/s",
    "anti_alias": "Anti-alias filter",
    "chain": "Acquisition chain",
    "sources": "Sources",
    "tones": "Tones",
    "band_hz": "Band of interest, Hz",
    "speed_tolerance_pct": "Speed tolerance, %",
    "threshold_db": "Peak threshold, dB above the floor",
    "speed_search_pct": "Speed search, ±%",
    "level_tolerance_db": "Level tolerance, dB",
    "max_peaks": "Most peaks",
    "blind": "Blind search",
    "max_true_hz": "Highest true frequency, Hz",
    "drift_pct": "Speed drift, %",
    "spectrum": "Spectrum",
    "time_record": "Time record",
    "upload": "File read as",
    "spectrum_options": "Spectrum options",
}


def request_rows(request: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The stored request as (words, value) rows for the page and the printed report;
    long arrays are counted, not printed."""
    rows: list[tuple[str, str]] = []
    for key, v in request.items():
        words = _REQUEST_LABELS.get(key, key.replace("_", " ").capitalize())
        if key == "sources" and isinstance(v, Sequence):
            for src in v:
                if isinstance(src, Mapping):
                    label = src.get("label") or src.get("type")
                    rest = {k: x for k, x in src.items() if k not in ("label", "type")}
                    desc = ", ".join(f"{k.replace('_', ' ')} {_value(x)}" for k, x in rest.items())
                    rows.append((f"Source: {label} ({src.get('type')})", desc))
            continue
        if key in ("spectrum", "time_record") and isinstance(v, Mapping):
            parts = []
            for k, x in v.items():
                parts.append(f"{k.replace('_', ' ')}: {_value(x)}")
            rows.append((words, "; ".join(parts)))
            continue
        if isinstance(v, Mapping):
            rows.append(
                (words, ", ".join(f"{k.replace('_', ' ')} {_value(x)}" for k, x in v.items()))
            )
            continue
        rows.append((words, _value(v)))
    return rows


def in_band(out: Mapping[str, Any], hz: float) -> bool:
    """Whether ``hz`` lies in the answer's band of interest (ends included)."""
    lo, hi = out["band_hz"]
    return bool(lo <= hz <= hi)


def collision_rows(out: Mapping[str, Any]) -> list[dict[str, Any]]:
    """Each collision with the reason it counts: the two lines' speed-tolerance intervals
    overlap (their centres may be far apart), or the lines lie within the bins asked."""
    tones, width = out["tones"], float(out["bin_width_hz"])
    rows = []
    for c in out["collisions"]:
        centres_hz = abs(
            tones[c["alias_index"]]["apparent_hz"] - tones[c["other_index"]]["apparent_hz"]
        )
        centres_bins = centres_hz / width if width > 0 else 0.0
        if c["separation_hz"] < centres_hz - 1e-9 * max(1.0, centres_hz):
            why = (
                "speed-tolerance intervals overlap"
                if c["separation_hz"] <= 0
                else f"speed-tolerance intervals {c['separation_bins']:.1f} bins apart"
            )
            why += f" (centres {centres_hz:,.1f} Hz, {centres_bins:.1f} bins apart)"
        else:
            why = f"lines {c['separation_bins']:.1f} bins ({c['separation_hz']:,.2f} Hz) apart"
        rows.append({**c, "why": why, "in_band": in_band(out, c["apparent_hz"])})
    return rows
