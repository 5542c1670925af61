"""Compact binary form of an amplitude spectrum for the saved-diagnosis table.

Layout, version 1 (all little-endian):

=======  ======  =====================================================================
offset   size    field
=======  ======  =====================================================================
0        4       magic ``b"FWSP"``
4        1       format version (1)
5        1       flags: bit 0 set = uniform frequency axis
6        2       reserved, 0
8        4       number of points ``n`` (uint32)
12       ...     zlib stream of the payload
=======  ======  =====================================================================

Payload when the axis is uniform: float64 start (Hz), float64 step (Hz), then ``n``
float32 amplitudes. Otherwise: ``n`` float32 frequencies (Hz), then ``n`` float32
amplitudes. Each float32 array is byte-shuffled (all first bytes, then all second bytes...)
before compression because neighbouring values share their high bytes, which zlib then
finds as runs.

A uniform axis keeps start and step in float64: 16 bytes instead of 8 buys an axis that is
exact to float64 precision rather than float32.
"""

from __future__ import annotations

import struct
import zlib

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["FORMAT_VERSION", "pack_spectra", "pack_spectrum", "unpack_spectra", "unpack_spectrum"]

FORMAT_VERSION = 1
_MAGIC = b"FWSP"
_HEADER = struct.Struct("<4sBBHI")
_UNIFORM = struct.Struct("<dd")
_FLAG_UNIFORM = 0x01
_MAX_POINTS = 2**32 - 1
_F32_MAX = float(np.finfo(np.float32).max)
_F32_EPS = float(np.finfo(np.float32).eps)


def _check_axis(values: ArrayLike, name: str) -> NDArray[np.float64]:
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim != 1:
        raise ValueError(f"{name} has shape {arr.shape}; it must be one-dimensional")
    if arr.size == 0:
        raise ValueError(f"{name} is empty; a spectrum needs at least 1 point")
    if arr.size > _MAX_POINTS:
        raise ValueError(f"{name} has {arr.size} points; the limit is {_MAX_POINTS}")
    finite = arr[np.isfinite(arr)]
    largest = float(np.max(np.abs(finite))) if finite.size else 0.0
    if largest > _F32_MAX:
        raise ValueError(f"{name} holds {largest!r} in magnitude; the limit is {_F32_MAX!r}")
    return arr


def _uniform_axis(freq: NDArray[np.float64]) -> tuple[float, float] | None:
    """Start and step when ``freq`` is uniform to within float32 rounding, else None."""
    start = float(freq[0])
    if freq.size == 1:
        return start, 0.0
    step = (float(freq[-1]) - start) / (freq.size - 1)
    rebuilt = start + step * np.arange(freq.size, dtype=np.float64)
    # Storing the axis as start/step is no worse than storing it as float32 values when
    # the deviation stays within half a float32 unit of the largest frequency.
    tolerance = 0.5 * _F32_EPS * float(np.max(np.abs(freq)))
    if float(np.max(np.abs(freq - rebuilt))) <= tolerance:
        return start, step
    return None


def _shuffle(arr32: NDArray[np.float32]) -> bytes:
    return arr32.astype("<f4").view(np.uint8).reshape(-1, 4).T.tobytes()


def _unshuffle(raw: bytes, n: int) -> NDArray[np.float32]:
    planes = np.frombuffer(raw, dtype=np.uint8).reshape(4, n)
    return np.ascontiguousarray(planes.T).view("<f4").reshape(n).astype(np.float32)


def pack_spectrum(freq_hz: ArrayLike, amplitude: ArrayLike) -> bytes:
    """Pack a spectrum into a small versioned, zlib-compressed blob.

    Parameters
    ----------
    freq_hz : array_like
        Frequency of each line, Hz, finite, one-dimensional.
    amplitude : array_like
        Amplitude of each line, in whatever unit the caller uses (linear or dB); same
        length as ``freq_hz``. NaN and ±inf are kept (e.g. dB of an exact zero).

    Returns
    -------
    bytes
        The blob; see the module docstring for the layout.

    Raises
    ------
    ValueError
        When the arrays are not one-dimensional, differ in length, are empty, hold a
        non-finite frequency or a value beyond the float32 range.
    """
    freq = _check_axis(freq_hz, "freq_hz")
    amp = _check_axis(amplitude, "amplitude")
    if freq.size != amp.size:
        raise ValueError(
            f"amplitude has {amp.size} points; it must match freq_hz with {freq.size} points"
        )
    if not np.all(np.isfinite(freq)):
        bad = float(freq[~np.isfinite(freq)][0])
        raise ValueError(f"freq_hz contains {bad!r}; every frequency must be finite")

    uniform = _uniform_axis(freq)
    amp_bytes = _shuffle(amp.astype(np.float32))
    if uniform is not None:
        flags = _FLAG_UNIFORM
        payload = _UNIFORM.pack(*uniform) + amp_bytes
    else:
        flags = 0
        payload = _shuffle(freq.astype(np.float32)) + amp_bytes
    header = _HEADER.pack(_MAGIC, FORMAT_VERSION, flags, 0, freq.size)
    return header + zlib.compress(payload, 6)


def pack_spectra(pairs: list[tuple[ArrayLike, ArrayLike]]) -> bytes:
    """Several spectra (a multi-rate comparison's captures) as their blobs back to back.

    Each blob is exactly :func:`pack_spectrum`'s, so one spectrum packed either way is
    the same bytes and :func:`unpack_spectrum` reads the first of several.
    """
    if not pairs:
        raise ValueError("spectra is empty; give at least one (freq_hz, amplitude) pair")
    return b"".join(pack_spectrum(f, a) for f, a in pairs)


def unpack_spectra(blob: bytes) -> list[tuple[NDArray[np.float64], NDArray[np.float64]]]:
    """Every spectrum of a blob made by :func:`pack_spectra` (or :func:`pack_spectrum`)."""
    out = []
    rest = bytes(blob)
    while rest:
        freq, amp, rest = _unpack_one(rest)
        out.append((freq, amp))
    return out


def unpack_spectrum(blob: bytes) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Unpack a blob made by :func:`pack_spectrum`.

    Parameters
    ----------
    blob : bytes
        The packed spectrum.

    Returns
    -------
    freq_hz : ndarray of float64
        Frequencies, Hz. A uniform axis is rebuilt as ``start + step * k`` in float64.
    amplitude : ndarray of float64
        Amplitudes (float32 precision), same unit as when packed.

    Raises
    ------
    ValueError
        When the blob is truncated, corrupt, or of an unknown format version.
    """
    freq, amp, _rest = _unpack_one(bytes(blob))
    return freq, amp


def _unpack_one(
    blob: bytes,
) -> tuple[NDArray[np.float64], NDArray[np.float64], bytes]:
    blob = bytes(blob)
    if len(blob) < _HEADER.size:
        raise ValueError(f"spectrum blob has {len(blob)} bytes; the header alone is {_HEADER.size}")
    magic, version, flags, _reserved, n = _HEADER.unpack_from(blob)
    if magic != _MAGIC:
        raise ValueError(f"spectrum blob starts with {magic!r}; expected {_MAGIC!r}")
    if version != FORMAT_VERSION:
        raise ValueError(
            f"spectrum blob format version={version} is not supported (known: {FORMAT_VERSION})"
        )
    if flags & ~_FLAG_UNIFORM:
        raise ValueError(f"spectrum blob flags={flags:#04x} hold unknown bits")
    if n == 0:
        raise ValueError("spectrum blob holds 0 points; at least 1 is required")
    uniform = bool(flags & _FLAG_UNIFORM)
    expected = (_UNIFORM.size + 4 * n) if uniform else 8 * n

    # Bound the output so a corrupt or hostile blob cannot expand without limit.
    inflater = zlib.decompressobj()
    try:
        payload = inflater.decompress(blob[_HEADER.size :], expected + 1)
    except zlib.error as exc:
        raise ValueError(f"spectrum blob payload is corrupt: {exc}") from exc
    if len(payload) != expected or not inflater.eof:
        raise ValueError(
            f"spectrum blob payload does not inflate to exactly {expected} bytes for {n} points"
        )

    if uniform:
        start, step = _UNIFORM.unpack_from(payload)
        freq = start + step * np.arange(n, dtype=np.float64)
        amp32 = _unshuffle(payload[_UNIFORM.size :], n)
    else:
        freq = _unshuffle(payload[: 4 * n], n).astype(np.float64)
        amp32 = _unshuffle(payload[4 * n :], n)
    return freq, amp32.astype(np.float64), inflater.unused_data
