"""Spectrum blob: round trips, compactness, and rejection of bad input and corrupt blobs."""

from __future__ import annotations

import re
import struct
import zlib

import numpy as np
import pytest

from service.storage import pack_spectrum, unpack_spectrum
from service.storage.packing import pack_spectra, unpack_spectra

F32_EPS = float(np.finfo(np.float32).eps)


def _amplitudes(n: int, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.lognormal(mean=-6.0, sigma=2.0, size=n)


class TestPackSpectrum:
    def test_basic(self) -> None:
        # Reference: numpy.fft.rfftfreq, a one-sided FFT axis of an 8192-point record at
        # 12.8 kS/s (the rate of the invented demo converter).
        freq = np.fft.rfftfreq(8192, d=1 / 12_800)
        amp = _amplitudes(freq.size)
        f_out, a_out = unpack_spectrum(pack_spectrum(freq, amp))
        # Reference: numpy's float32 cast is the precision the format promises.
        np.testing.assert_array_equal(a_out, amp.astype(np.float32).astype(np.float64))
        np.testing.assert_allclose(a_out, amp, rtol=F32_EPS, atol=0)
        # A uniform axis is kept as float64 start/step: better than float32 values.
        np.testing.assert_allclose(f_out, freq, rtol=0, atol=0.5 * F32_EPS * freq.max())
        assert f_out.dtype == np.float64
        assert a_out.dtype == np.float64

    def test_non_uniform_axis(self) -> None:
        # E.g. a measured response table on a log axis.
        freq = np.geomspace(1.0, 20_000.0, 500)
        amp = 20 * np.log10(_amplitudes(freq.size, seed=2))
        f_out, a_out = unpack_spectrum(pack_spectrum(freq, amp))
        # Reference: numpy float32 cast of both arrays.
        np.testing.assert_array_equal(f_out, freq.astype(np.float32).astype(np.float64))
        np.testing.assert_array_equal(a_out, amp.astype(np.float32).astype(np.float64))
        np.testing.assert_allclose(f_out, freq, rtol=F32_EPS, atol=0)

    def test_compact(self) -> None:
        freq = np.fft.rfftfreq(8192, d=1 / 12_800)
        amp = _amplitudes(freq.size)
        blob = pack_spectrum(freq, amp)
        # The uniform axis costs 16 bytes; random amplitudes barely compress, so the blob
        # is at most float32 amplitudes plus header and axis.
        assert len(blob) <= 4 * freq.size + 12 + 16 + 64
        # A flat noise floor compresses well.
        flat = pack_spectrum(freq, np.full(freq.size, 1e-4))
        assert len(flat) < 200

    def test_edges(self) -> None:
        # One point: stored as a uniform axis with step 0.
        f_out, a_out = unpack_spectrum(pack_spectrum([50.0], [0.25]))
        np.testing.assert_array_equal(f_out, [50.0])
        np.testing.assert_array_equal(a_out, [0.25])
        # dB of an exact zero and missing values survive.
        amp = np.array([-np.inf, np.nan, 3.0, np.inf])
        _, a_out = unpack_spectrum(pack_spectrum([0.0, 1.0, 2.0, 3.0], amp))
        np.testing.assert_array_equal(a_out, amp)
        # np.linspace is uniform to float64 rounding, so it takes the compact path:
        # the blob is the same size as for an exact arange axis.
        lin = np.linspace(0.0, 6400.0, 4097)
        exact = np.arange(4097) * (6400.0 / 4096)
        amp = np.ones(4097)
        assert len(pack_spectrum(lin, amp)) == len(pack_spectrum(exact, amp))
        # A nearly uniform axis with one shifted line must keep that line.
        bent = exact.copy()
        bent[100] += 0.4
        f_out, _ = unpack_spectrum(pack_spectrum(bent, amp))
        np.testing.assert_allclose(f_out, bent, rtol=F32_EPS, atol=0)
        # Lists, ints and float32 inputs are accepted.
        f_out, a_out = unpack_spectrum(
            pack_spectrum([0, 10, 20], np.array([1, 2, 3], dtype=np.float32))
        )
        np.testing.assert_array_equal(f_out, [0.0, 10.0, 20.0])
        np.testing.assert_array_equal(a_out, [1.0, 2.0, 3.0])

    @pytest.mark.parametrize(
        ("freq", "amp", "message"),
        [
            ([1.0, 2.0], [1.0], "amplitude has 1 points; it must match freq_hz with 2"),
            ([], [], "freq_hz is empty"),
            ([[1.0, 2.0]], [[1.0, 2.0]], "freq_hz has shape (1, 2)"),
            ([1.0, np.nan], [1.0, 2.0], "freq_hz contains nan"),
            ([1.0, np.inf], [1.0, 2.0], "freq_hz contains inf"),
            ([1.0, 2.0], [1.0, 1e39], "amplitude holds 1e+39"),
            ([1.0, 1e39], [1.0, 2.0], "freq_hz holds 1e+39"),
        ],
    )
    def test_errors(self, freq: list[float], amp: list[float], message: str) -> None:
        with pytest.raises(ValueError, match=re.escape(message)):
            pack_spectrum(freq, amp)


class TestUnpackSpectrum:
    def test_basic(self) -> None:
        # Layout written by hand from the documented format, not by pack_spectrum.
        n = 3
        amp = np.array([1.0, 2.0, 4.0], dtype="<f4")
        shuffled = amp.view(np.uint8).reshape(-1, 4).T.tobytes()
        payload = struct.pack("<dd", 100.0, 0.5) + shuffled
        blob = struct.pack("<4sBBHI", b"FWSP", 1, 1, 0, n) + zlib.compress(payload)
        f_out, a_out = unpack_spectrum(blob)
        np.testing.assert_array_equal(f_out, [100.0, 100.5, 101.0])
        np.testing.assert_array_equal(a_out, [1.0, 2.0, 4.0])

    def test_edges(self) -> None:
        blob = pack_spectrum([1.0, 2.0, 3.0], [1.0, 1.0, 1.0])
        # memoryview (as some drivers return for binary columns) works too.
        f_out, _ = unpack_spectrum(memoryview(blob))  # type: ignore[arg-type]
        np.testing.assert_array_equal(f_out, [1.0, 2.0, 3.0])

    def test_errors(self) -> None:
        good = pack_spectrum([1.0, 2.0, 4.0], [1.0, 2.0, 3.0])
        header = struct.Struct("<4sBBHI")
        with pytest.raises(ValueError, match="has 5 bytes; the header alone is 12"):
            unpack_spectrum(good[:5])
        with pytest.raises(ValueError, match="starts with b'XXXX'"):
            unpack_spectrum(b"XXXX" + good[4:])
        with pytest.raises(ValueError, match="format version=9 is not supported"):
            unpack_spectrum(header.pack(b"FWSP", 9, 0, 0, 3) + good[12:])
        with pytest.raises(ValueError, match="flags=0x80 hold unknown bits"):
            unpack_spectrum(header.pack(b"FWSP", 1, 0x80, 0, 3) + good[12:])
        with pytest.raises(ValueError, match="holds 0 points"):
            unpack_spectrum(header.pack(b"FWSP", 1, 0, 0, 0) + good[12:])
        with pytest.raises(ValueError, match="payload is corrupt"):
            unpack_spectrum(good[:12] + b"not zlib at all")
        # Count in the header disagrees with the payload, either way.
        with pytest.raises(ValueError, match="exactly 32 bytes for 4 points"):
            unpack_spectrum(header.pack(b"FWSP", 1, 0, 0, 4) + good[12:])
        with pytest.raises(ValueError, match="exactly 16 bytes for 2 points"):
            unpack_spectrum(header.pack(b"FWSP", 1, 0, 0, 2) + good[12:])
        # Truncated stream.
        with pytest.raises(ValueError, match="exactly 24 bytes for 3 points"):
            unpack_spectrum(good[:-6])
        # A blob that would inflate to far more than the header announces stops early.
        bomb = header.pack(b"FWSP", 1, 0, 0, 1) + zlib.compress(bytes(50_000_000))
        with pytest.raises(ValueError, match="exactly 8 bytes for 1 points"):
            unpack_spectrum(bomb)


class TestSeveralSpectra:
    def test_basic(self) -> None:
        # Reference: numpy's own float32 rounding of the arrays packed, one per capture.
        rng = np.random.default_rng(13)
        pairs = [
            (np.arange(4097) * 1.5625, rng.random(4097)),
            (np.sort(rng.random(300)) * 8000, rng.random(300)),
        ]
        blob = pack_spectra(pairs)
        got = unpack_spectra(blob)
        assert len(got) == 2
        for (f, a), (gf, ga) in zip(pairs, got, strict=True):
            assert np.allclose(gf, f.astype(np.float32), rtol=0, atol=1e-3)
            assert np.array_equal(ga, a.astype(np.float32).astype(np.float64))
        # One spectrum packed either way is the same bytes, read by either reader.
        one = pack_spectrum(*pairs[0])
        assert pack_spectra(pairs[:1]) == one
        assert np.array_equal(unpack_spectrum(blob)[1], got[0][1])

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="at least one"):
            pack_spectra([])
        blob = pack_spectra([(np.arange(10.0), np.ones(10))] * 2)
        with pytest.raises(ValueError):
            unpack_spectra(blob[:-3])
