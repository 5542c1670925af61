"""Time records from uploaded files: dispatch by content and name, text records."""

from __future__ import annotations

import re

import numpy as np

from service.core.errors import InputError

from ._common import (
    ALLOWANCE,
    DEFAULT_MAX_SAMPLES,
    TIME_COLUMN_RTOL,
    TimeRecord,
    channel_stats,
    check_channel,
    check_limit,
    check_samples,
    plural,
    resolve_rate,
    to_bytes,
)
from .npy import read_npy
from .spectrum import FREQ_NAME  # the one definition of a frequency column name
from .text import read_table, sniff_table
from .wav import read_wav

__all__ = ["guess_text_kind", "parse_time_record"]

TEXT_EXTENSIONS = (".csv", ".txt", ".tsv", ".dat", ".asc")
_ACCEPTED_TYPES = (
    "WAV (.wav), NumPy array (.npy) or text/CSV with one column of samples per channel "
    "(.csv, .txt, .tsv, .dat, .asc)"
)
_TIME_NAME = re.compile(
    r"^\s*(?:time|zeit|temps|tiempo|t)\s*(?:[(\[/_ ]\s*([a-zµμ]+)\s*[)\]]?)?\s*$", re.IGNORECASE
)
_TIME_UNITS = {None: 1.0, "s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6}


def _read_text_samples(
    data: bytes,
    sample_rate_hz: float | None,
    channel: int,
    max_samples: int,
    field_name: str,
    rate_conflict: str,
) -> TimeRecord:
    table = read_table(
        data,
        max_lines=max_samples + ALLOWANCE,
        limit_text=f"{max_samples} samples (plus {ALLOWANCE} other lines)",
        what="one column of samples per channel",
        field_name=field_name,
    )
    values, names = table.values, table.names
    notes = list(table.notes)
    if values.shape[0] > max_samples:
        raise InputError(
            f"the text has {values.shape[0]} samples; the limit is {max_samples}",
            field=field_name,
            value=values.shape[0],
            limit=max_samples,
            code="above_limit",
            status=413,
        )
    columns = list(range(values.shape[1]))
    file_rate, where, rtol = table.sample_rate_hz, "a sample-rate line of the header", 1e-6
    time_col = _time_column(names)
    if time_col is not None and len(columns) > 1:
        columns.remove(time_col)
        unit = _TIME_NAME.match(names[time_col]).group(1)  # type: ignore[union-attr]
        t = values[:, time_col] * _TIME_UNITS.get(unit.lower() if unit else None, 1.0)
        steps = np.diff(t[np.isfinite(t)])
        if steps.size and np.all(steps > 0):
            step = float(np.median(steps))
            if file_rate is None:
                file_rate, where, rtol = 1.0 / step, "the step of the time column", TIME_COLUMN_RTOL
        notes.append(f"Column {names[time_col]!r} is time; the other columns are channels.")
    fs, source = resolve_rate(
        sample_rate_hz, file_rate, "text samples", where, rtol=rtol, rate_conflict=rate_conflict
    )
    n_ch = len(columns)
    channel = check_channel(channel, n_ch)
    frames = values[:, columns]
    x = np.ascontiguousarray(frames[:, channel])
    bad = ~np.isfinite(x)
    if np.any(bad):
        first = int(table.lines[np.argmax(bad)])
        gaps = plural(int(bad.sum()), "missing or non-finite sample")
        raise InputError(
            f"line {first}: channel {channel} has {gaps}; a time record needs every sample",
            field=field_name,
            value=int(bad.sum()),
            code="non_finite_sample",
            remedy="Fill or cut the gap in the record; samples cannot be left out of a time record",
        )
    check_samples(x, channel, field_name)
    rms, peak = channel_stats(np.where(np.isfinite(frames), frames, np.nan))
    channel_names = tuple(
        (names[c] if names and names[c] else f"channel {i}") for i, c in enumerate(columns)
    )
    named = f", column {names[columns[channel]]!r}" if names else ""
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=(
            f"text, {plural(n_ch, 'column' if time_col is None else 'channel')}{named}"
        ),
        file_rate_hz=file_rate,
        rate_source=source,
        channel_names=channel_names,
        channel_rms=rms,
        channel_peak=peak,
        metadata=table.metadata,
        notes=tuple(dict.fromkeys(notes)),
    )


def _time_column(names: tuple[str, ...]) -> int | None:
    found = [i for i, n in enumerate(names) if n and _TIME_NAME.match(n)]
    return found[0] if len(found) == 1 else None


def parse_time_record(
    data: bytes,
    filename: str,
    sample_rate_hz: float | None = None,
    channel: int = 0,
    max_samples: int = DEFAULT_MAX_SAMPLES,
    *,
    field: str = "file",
    rate_conflict: str = "error",
) -> TimeRecord:
    """Read one channel of a time record from an uploaded file.

    Parameters
    ----------
    data : bytes
        File contents.
    filename : str
        Original file name; its extension decides the type unless the content starts
        with a RIFF/WAVE or NumPy signature.
    sample_rate_hz : float, optional
        Sample rate, Hz. Required for .npy, and for text without a sample-rate header
        line or time column; when the file states its own rate the two must agree.
    channel : int
        Channel to return, 0-based (a text time column does not count).
    max_samples : int
        Largest accepted number of samples per channel, checked from the header before
        the samples are decoded.
    field : str
        The request field the file came in, named in errors.
    rate_conflict : {"error", "request", "file"}
        What a disagreement between ``sample_rate_hz`` and the file's own rate does:
        an error naming both (code ``rate_conflict``), or let one side win.

    Returns
    -------
    TimeRecord
        With ``file_rate_hz``, ``rate_source`` and per-channel RMS and peak.

    Raises
    ------
    InputError
        Unknown type (naming the accepted ones), broken or lying header, missing or
        conflicting sample rate, channel out of range, non-finite or constant samples,
        size over the limit.

    Notes
    -----
    Integer PCM is scaled to ±1.0 full scale (÷ 2**(bits-1); 8-bit is offset binary).
    16/24-bit PCM and float32 data come back as float32, 32-bit PCM and float64 as
    float64. A 2-D .npy array is read as (samples, channels) when it has at least as
    many rows as columns, else as (channels, samples).
    """
    raw = to_bytes(data, field)
    max_samples = check_limit(max_samples, "max_samples")
    name = (filename or "").lower()
    if raw[:4] in (b"RIFF", b"RIFX", b"RF64") or name.endswith((".wav", ".wave")):
        return read_wav(raw, sample_rate_hz, channel, max_samples, field, rate_conflict)
    if raw[:6] == b"\x93NUMPY" or name.endswith(".npy"):
        return read_npy(raw, sample_rate_hz, channel, max_samples, field)
    if name.endswith(TEXT_EXTENSIONS):
        return _read_text_samples(raw, sample_rate_hz, channel, max_samples, field, rate_conflict)
    raise InputError(
        f"file {filename!r} is of an unknown type; accepted: {_ACCEPTED_TYPES}",
        field=field,
        value=filename,
        code="unknown_type",
        status=415,
        remedy="Upload WAV, .npy or a text table; the file name's extension says which",
    )


def guess_text_kind(data: bytes) -> str:
    """``"spectrum"`` or ``"time_record"`` for an uploaded text table, from its shape.

    A column named like time (``Time (s)``, ``t [ms]``) makes a time record; one named
    like frequency (``Frequency (Hz)``, ``kHz``, ``CPM``) a spectrum; otherwise one
    column is a time record and more a spectrum. Header blocks, encodings and decimal
    commas are handled as the readers handle them. Content that is not a table is
    called a spectrum, so the spectrum reader words the error.
    """
    shape = sniff_table(data)
    if shape is None:
        return "spectrum"
    columns, names = shape
    if _time_column(names) is not None:
        return "time_record"
    if any(n and FREQ_NAME.search(n) for n in names):
        return "spectrum"
    return "time_record" if columns == 1 else "spectrum"
