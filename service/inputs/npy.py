"""NumPy ``.npy`` time records: 1-D, or 2-D with one column or row per channel."""

from __future__ import annotations

import io

import numpy as np
from numpy.typing import NDArray

from service.core.errors import InputError

from ._common import (
    TimeRecord,
    channel_stats,
    check_channel,
    check_samples,
    plural,
    resolve_rate,
)

__all__ = ["read_npy"]


def _bad(message: str, field_name: str, code: str = "bad_npy") -> InputError:
    return InputError(
        message,
        field=field_name,
        code=code,
        remedy="Save the record with numpy.save as a 1-D or 2-D array of real numbers",
    )


def read_npy(
    data: bytes,
    sample_rate_hz: float | None,
    channel: int,
    max_samples: int,
    field_name: str = "file",
) -> TimeRecord:
    """Read a .npy array; the file carries no rate, so ``sample_rate_hz`` is required."""
    fs, source = resolve_rate(sample_rate_hz, None, "a .npy array", "")
    stream = io.BytesIO(data)
    try:
        version = np.lib.format.read_magic(stream)
        if version == (1, 0):
            shape, _fortran, dtype = np.lib.format.read_array_header_1_0(stream)
        elif version == (2, 0):
            shape, _fortran, dtype = np.lib.format.read_array_header_2_0(stream)
        else:  # newer header versions: read the array, then check
            stream.seek(0)
            probe = np.load(stream, allow_pickle=False)
            shape, dtype = probe.shape, probe.dtype
    except (ValueError, EOFError, OSError) as exc:
        raise _bad(f".npy header cannot be read: {exc}", field_name) from exc
    if dtype.kind not in "iuf":
        raise _bad(
            f".npy array has dtype {dtype}; real integers or floats are needed",
            field_name,
            "unsupported_format",
        )
    if len(shape) not in (1, 2):
        raise _bad(
            f".npy array has shape {shape}; 1-D or 2-D (samples × channels)",
            field_name,
            "unsupported_format",
        )
    n_samples = max(shape) if len(shape) == 2 else shape[0]
    if n_samples > max_samples:
        raise InputError(
            f".npy array has {n_samples} samples per channel; the limit is {max_samples}",
            field=field_name,
            value=n_samples,
            limit=max_samples,
            code="above_limit",
            status=413,
        )
    stream.seek(0)
    try:
        arr = np.load(stream, allow_pickle=False)
    except (ValueError, EOFError, OSError) as exc:
        raise _bad(f".npy data cannot be read: {exc}", field_name) from exc
    # The longer axis is time: (samples, channels) or (channels, samples).
    frames = (
        arr.reshape(-1, 1) if arr.ndim == 1 else (arr if arr.shape[0] >= arr.shape[1] else arr.T)
    )
    n_ch = int(frames.shape[1])
    channel = check_channel(channel, n_ch)
    target = np.float32 if dtype == np.float32 else np.float64
    x: NDArray[np.floating] = np.ascontiguousarray(frames[:, channel], dtype=target)
    check_samples(x, channel, field_name)
    rms, peak = channel_stats(frames)
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=f"NumPy array {dtype} shape {tuple(shape)}, {plural(n_ch, 'channel')}",
        file_rate_hz=None,
        rate_source=source,
        channel_names=tuple(f"channel {i}" for i in range(n_ch)),
        channel_rms=rms,
        channel_peak=peak,
    )
