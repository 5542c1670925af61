"""Shared pieces of the readers: limits, typed errors, checks, the time-record result."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from service.core.errors import InputError

__all__ = [
    "DEFAULT_MAX_SAMPLES",
    "DEFAULT_MAX_SPECTRUM_LINES",
    "TimeRecord",
]

DEFAULT_MAX_SPECTRUM_LINES = 2_000_000
DEFAULT_MAX_SAMPLES = 50_000_000
ALLOWANCE = 1000  # header, metadata and comment lines allowed beyond the data-line limit

# Relative difference below which two sample rates are the same rate (a text header
# rounds, a time column is written with a few digits).
RATE_RTOL = 1e-6
TIME_COLUMN_RTOL = 1e-3


@dataclass(frozen=True, eq=False)
class TimeRecord:
    """One channel of a time record, and what the file says about all of them.

    Attributes
    ----------
    samples : ndarray
        1-D samples, float32 (16/24-bit PCM, float32 data) or float64. Integer PCM is
        scaled to ±1.0 full scale.
    sample_rate_hz : float
        Sample rate used, Hz.
    channel : int
        Index of the chosen channel (0-based).
    n_channels : int
        Number of channels in the file.
    format_description : str
        What was read, e.g. "WAV, PCM 24-bit, 2 channels, 48000 Hz".
    file_rate_hz : float or None
        The rate the file itself states (WAV header, a sample-rate line of a text header,
        or the step of a time column), Hz; None when the file carries none (.npy).
    rate_source : str
        Where ``sample_rate_hz`` came from: ``"file"`` or ``"request"``.
    channel_names : tuple of str
        A name per channel (text header names, else ``"channel 0"`` ...).
    channel_rms : tuple of float
        RMS of each channel about its mean, in the units of ``samples``; a channel that
        carries only converter noise stands out against the others.
    channel_peak : tuple of float
        Largest absolute sample of each channel.
    full_scale : float or None
        The converter's full scale in the units of ``samples`` (1.0 for integer PCM),
        None when the format does not say (float WAV, .npy, text).
    metadata : dict
        ``key: value`` lines of a text file's header block.
    notes : tuple of str
        Sentences about how the file was read, each once.
    """

    samples: NDArray[np.floating]
    sample_rate_hz: float
    channel: int
    n_channels: int
    format_description: str
    file_rate_hz: float | None = None
    rate_source: str = "file"
    channel_names: tuple[str, ...] = ()
    channel_rms: tuple[float, ...] = ()
    channel_peak: tuple[float, ...] = ()
    full_scale: float | None = None
    metadata: dict[str, str] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def n_samples(self) -> int:
        return int(self.samples.size)


def to_bytes(data: Any, name: str = "data") -> bytes:
    if isinstance(data, str):
        return data.encode("utf-8")
    if isinstance(data, bytes | bytearray | memoryview):
        return bytes(data)
    raise InputError(
        f"{name} must be bytes or text; got {type(data).__name__}", field=name, code="bad_type"
    )


def check_limit(value: int, name: str) -> int:
    if isinstance(value, bool) or int(value) != value or int(value) < 1:
        raise InputError(
            f"{name}={value!r} must be a whole number >= 1",
            field=name,
            value=value,
            limit=1,
            code="below_limit",
        )
    return int(value)


def plural(count: int, word: str) -> str:
    return f"{count} {word}" + ("" if count == 1 else "s")


def check_channel(channel: int, n_channels: int) -> int:
    if isinstance(channel, bool) or int(channel) != channel:
        raise InputError(
            f"channel={channel!r} must be a whole number", field="channel", code="bad_type"
        )
    if not 0 <= int(channel) < n_channels:
        raise InputError(
            f"channel={channel} but the file has {plural(n_channels, 'channel')} "
            f"(valid: 0 to {n_channels - 1})",
            field="channel",
            value=channel,
            limit=n_channels - 1,
            code="channel_out_of_range",
            remedy=f"Choose a channel from 0 to {n_channels - 1}",
        )
    return int(channel)


def check_rate_value(sample_rate_hz: float) -> float:
    rate = float(sample_rate_hz)
    if not math.isfinite(rate) or rate <= 0:
        raise InputError(
            f"sample_rate_hz={sample_rate_hz!r} must be a finite number > 0",
            field="sample_rate_hz",
            value=sample_rate_hz,
            limit=0,
            code="not_positive",
        )
    return rate


def resolve_rate(
    requested: float | None,
    file_rate: float | None,
    kind: str,
    where: str,
    rtol: float = RATE_RTOL,
    rate_conflict: str = "error",
) -> tuple[float, str]:
    """The rate to use and where it came from; a disagreement is an error naming both.

    ``rate_conflict``: ``"error"`` (default), ``"request"`` (the request wins) or
    ``"file"`` (the file wins).
    """
    if rate_conflict not in ("error", "request", "file"):
        raise InputError(
            f"rate_conflict={rate_conflict!r} must be 'error', 'request' or 'file'",
            field="rate_conflict",
            value=rate_conflict,
            code="bad_choice",
        )
    if requested is None:
        if file_rate is None:
            raise InputError(
                f"sample_rate_hz is required for {kind}: the file does not carry it",
                field="sample_rate_hz",
                code="missing_sample_rate",
                remedy="Give sample_rate_hz, the rate the record was sampled at, in Hz",
            )
        return file_rate, "file"
    rate = check_rate_value(requested)
    if file_rate is None or abs(rate - file_rate) <= rtol * file_rate:
        return rate, "request"
    if rate_conflict == "request":
        return rate, "request"
    if rate_conflict == "file":
        return file_rate, "file"
    raise InputError(
        f"sample_rate_hz={rate:g} Hz disagrees with the file's own rate of {file_rate:g} Hz "
        f"({where})",
        field="sample_rate_hz",
        value=rate,
        limit=file_rate,
        code="rate_conflict",
        remedy=(
            f"Leave sample_rate_hz out to use the file's {file_rate:g} Hz, or set it to "
            f"{file_rate:g}; if the file is wrong, correct the file"
        ),
    )


def check_samples(x: NDArray[np.floating], channel: int, field_name: str) -> None:
    bad = ~np.isfinite(x)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise InputError(
            f"sample {i} of channel {channel} is {float(x[i])!r}; samples must be finite",
            field=field_name,
            value=float(x[i]),
            code="non_finite_sample",
        )
    if x.size < 2:
        raise InputError(
            f"channel {channel} has {x.size} samples; at least 2 are needed",
            field=field_name,
            value=int(x.size),
            limit=2,
            code="too_few_samples",
        )
    if np.all(x == x[0]):
        raise InputError(
            f"channel {channel} is constant (every sample = {x[0]:g}); nothing to analyse "
            "(wrong channel?)",
            field=field_name,
            code="constant_channel",
            remedy="Choose another channel with the channel option",
        )


def channel_stats(
    frames: NDArray[np.floating],
) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """RMS about the mean and peak |x| of each column of (samples, channels).

    Blocks of rows keep the temporary memory small on long records.
    """
    n, n_ch = frames.shape
    if n == 0:
        return (), ()
    total = np.zeros(n_ch)
    square = np.zeros(n_ch)
    peak = np.zeros(n_ch)
    for start in range(0, n, _STATS_BLOCK):
        block = np.asarray(frames[start : start + _STATS_BLOCK], dtype=np.float64)
        total += block.sum(axis=0)
        square += np.square(block).sum(axis=0)
        peak = np.maximum(peak, np.abs(block).max(axis=0))
    mean = total / n
    rms = np.sqrt(np.maximum(square / n - mean * mean, 0.0))
    return tuple(float(v) for v in rms), tuple(float(v) for v in peak)


_STATS_BLOCK = 1 << 20
