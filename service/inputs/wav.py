"""RIFF/WAVE time records: PCM 8/16/24/32-bit, IEEE float 32/64-bit, EXTENSIBLE."""

from __future__ import annotations

import struct

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

__all__ = ["read_wav"]

_WAVE_PCM = 1
_WAVE_FLOAT = 3
_WAVE_EXTENSIBLE = 0xFFFE


def _bad(message: str, field_name: str, code: str = "bad_wav_header") -> InputError:
    return InputError(
        message,
        field=field_name,
        code=code,
        remedy="Export the record again as a PCM or float WAV file",
    )


def read_wav(
    data: bytes,
    sample_rate_hz: float | None,
    channel: int,
    max_samples: int,
    field_name: str = "file",
    rate_conflict: str = "error",
) -> TimeRecord:
    """Minimal RIFF/WAVE reader: fmt and data chunks, other chunks skipped."""
    if len(data) < 12:
        raise _bad(
            f"WAV header is truncated: {len(data)} bytes, the RIFF header needs 12", field_name
        )
    if data[:4] != b"RIFF" or data[8:12] != b"WAVE":
        kind = data[:4].decode("latin-1")
        raise _bad(
            f"not a RIFF/WAVE file (starts with {kind!r}); RF64/RIFX are not read", field_name
        )
    pos = 12
    fmt: tuple[int, int, int, int, int] | None = None
    fmt_name = ""
    while True:
        if pos + 8 > len(data):
            if fmt is None:
                raise _bad("WAV header is truncated: no complete 'fmt ' chunk", field_name)
            raise _bad("WAV file has no 'data' chunk", field_name)
        chunk_id = data[pos : pos + 4]
        (size,) = struct.unpack_from("<I", data, pos + 4)
        body_start = pos + 8
        remaining = len(data) - body_start
        if chunk_id == b"fmt ":
            if size < 16 or remaining < 16:
                raise _bad(
                    f"WAV header is truncated: 'fmt ' chunk has {min(size, remaining)} "
                    "bytes, at least 16 are needed",
                    field_name,
                )
            tag, n_ch, rate, _byte_rate, block_align, bits = struct.unpack_from(
                "<HHIIHH", data, body_start
            )
            if tag == _WAVE_EXTENSIBLE:
                if size < 40 or remaining < 40:
                    raise _bad(
                        "WAV header is truncated: WAVE_FORMAT_EXTENSIBLE 'fmt ' chunk needs "
                        f"40 bytes, has {min(size, remaining)}",
                        field_name,
                    )
                (tag,) = struct.unpack_from("<H", data, body_start + 24)
                fmt_name = "extensible "
            fmt = (tag, n_ch, rate, block_align, bits)
        elif chunk_id == b"data":
            if fmt is None:
                raise _bad("WAV 'data' chunk comes before the 'fmt ' chunk", field_name)
            if size > remaining:
                raise _bad(
                    f"WAV data chunk says {size} bytes but only {remaining} follow "
                    "(truncated file or wrong header)",
                    field_name,
                )
            payload = memoryview(data)[body_start : body_start + size]
            break
        pos = body_start + size + (size & 1)

    tag, n_ch, rate, block_align, bits = fmt
    if tag == _WAVE_PCM and bits in (8, 16, 24, 32):
        kind = f"PCM {bits}-bit"
    elif tag == _WAVE_FLOAT and bits in (32, 64):
        kind = f"float {bits}-bit"
    else:
        raise InputError(
            f"WAV format tag {tag} with {bits} bits per sample is not supported; "
            "use PCM 8/16/24/32-bit or IEEE float 32/64-bit",
            field=field_name,
            value=tag,
            code="unsupported_format",
            remedy="Export the record as PCM or IEEE float WAV",
        )
    width = bits // 8
    if n_ch < 1 or block_align != n_ch * width:
        raise _bad(
            f"WAV header is inconsistent: {n_ch} channels of {bits} bits need block "
            f"align {n_ch * width}, header says {block_align}",
            field_name,
        )
    channel = check_channel(channel, n_ch)
    n_frames = len(payload) // block_align
    if n_frames > max_samples:
        raise InputError(
            f"WAV has {n_frames} samples per channel; the limit is {max_samples}",
            field=field_name,
            value=n_frames,
            limit=max_samples,
            code="above_limit",
            status=413,
        )
    if n_frames < 2:
        raise InputError(
            f"WAV has {n_frames} samples per channel; at least 2 are needed",
            field=field_name,
            value=n_frames,
            limit=2,
            code="too_few_samples",
        )
    file_rate = float(rate) if rate > 0 else None
    if file_rate is None and sample_rate_hz is None:
        raise InputError(
            "WAV header gives a sample rate of 0 Hz; pass sample_rate_hz",
            field="sample_rate_hz",
            code="missing_sample_rate",
            remedy="Give sample_rate_hz, the rate the record was sampled at, in Hz",
        )
    fs, source = resolve_rate(
        sample_rate_hz, file_rate, "WAV", "WAV header", rate_conflict=rate_conflict
    )
    if source == "request" and file_rate is not None and fs != file_rate:
        rate_note = f", sample rate {fs:g} Hz given (header says {rate} Hz)"
    else:
        rate_note = f", {fs:g} Hz"
    frames = _decode(payload, n_frames, n_ch, width, bits, kind.startswith("float"))
    x = np.ascontiguousarray(frames[:, channel])
    check_samples(x, channel, field_name)
    rms, peak = channel_stats(frames)
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=f"WAV, {fmt_name}{kind}, {plural(n_ch, 'channel')}{rate_note}",
        file_rate_hz=file_rate,
        rate_source=source,
        channel_names=tuple(f"channel {i}" for i in range(n_ch)),
        channel_rms=rms,
        channel_peak=peak,
        full_scale=None if kind.startswith("float") else 1.0,
    )


def _decode(
    payload: memoryview, n_frames: int, n_ch: int, width: int, bits: int, is_float: bool
) -> NDArray[np.floating]:
    """All channels as (frames, channels); integer PCM scaled to ±1.0 full scale."""
    raw = np.frombuffer(payload, dtype=np.uint8, count=n_frames * n_ch * width)
    if is_float:
        x = raw.view(f"<f{width}").reshape(n_frames, n_ch)
        return x.astype(np.float32 if width == 4 else np.float64)
    if bits == 8:
        return (raw.reshape(n_frames, n_ch).astype(np.float32) - 128.0) / 128.0
    if bits == 16:
        x16 = raw.view("<i2").reshape(n_frames, n_ch).astype(np.float32)
        x16 *= np.float32(1.0 / 32768.0)
        return x16
    if bits == 24:
        b = raw.reshape(n_frames, n_ch, 3)
        value = (
            b[..., 0].astype(np.int32)
            | (b[..., 1].astype(np.int32) << 8)
            | (b[..., 2].astype(np.int32) << 16)
        )
        value = (value << 8) >> 8  # sign-extend from 24 bits
        return value.astype(np.float32) * np.float32(1.0 / 8388608.0)
    return raw.view("<i4").reshape(n_frames, n_ch) / 2147483648.0
