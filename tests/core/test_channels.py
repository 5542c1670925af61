"""Signal-or-noise decision per channel, against simulated converter noise and tones."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from service.core.channels import (
    ChannelActivity,
    channel_activity,
    channels_sentence,
    classify_channels,
)
from service.core.errors import InputError

FS = 25_600.0
N = 2**16
FULL_SCALE, BITS = 10.0, 16
Q = 2 * FULL_SCALE / 2**BITS  # one code, V


def _converter_noise(seed: int, codes_rms: float = 1.0) -> np.ndarray:
    """White Gaussian noise of ``codes_rms`` codes, quantised to the converter's codes."""
    rng = np.random.default_rng(seed)
    return np.round(rng.normal(0.0, codes_rms * Q, N) / Q) * Q


def _tone(freq: float, amp: float) -> np.ndarray:
    return amp * np.cos(2 * np.pi * freq * np.arange(N) / FS + 0.4)


class TestChannelActivity:
    def test_basic(self) -> None:
        noise = channel_activity(_converter_noise(1), FS, FULL_SCALE, BITS)
        assert isinstance(noise, ChannelActivity)
        assert noise.verdict == "noise"
        sig = channel_activity(_converter_noise(2) + _tone(1000.0, 0.01), FS, FULL_SCALE, BITS)
        assert sig.verdict == "signal"
        assert sig.max_peak_db > 40.0

    def test_flatness_against_welch(self) -> None:
        # Reference: spectral flatness computed from scipy.signal.welch (Hann, 50 %
        # overlap) over the same bins: geometric over arithmetic mean of the power.
        x = _converter_noise(3, codes_rms=4.0)
        got = channel_activity(x, FS)
        nfft = 2**13  # default lines for 2**16 samples: 3200 lines, nfft 8192
        f, p = scipy.signal.welch(
            x - x.mean(), FS, window="hann", nperseg=nfft, noverlap=nfft // 2,
            detrend=False, scaling="spectrum",
        )  # fmt: skip
        top = int(np.searchsorted(f, FS / 2.56, side="right"))
        ref = float(np.exp(np.mean(np.log(p[2:top]))) / np.mean(p[2:top]))
        assert got.flatness == pytest.approx(ref, abs=0.01)
        # From memory: the flatness of white noise tends to 1 (Jayant & Noll, ch. 2); with
        # 15 averages the log-mean bias keeps it a few percent below.
        assert 0.9 < got.flatness < 1.0

    def test_quantisation_reference(self) -> None:
        # Reference: the RMS error of rounding a busy signal to codes of q, computed with
        # numpy, is q/√12 (Widrow & Kollár, Quantization Noise).
        busy = np.random.default_rng(4).normal(0.0, 1.0, N)
        err = np.round(busy / Q) * Q - busy
        got = channel_activity(_converter_noise(5), FS, FULL_SCALE, BITS)
        assert got.expected_noise_rms == pytest.approx(float(np.std(err)), rel=0.02)

    def test_edges(self) -> None:
        # Broadband but shaped (a resonance excited by noise): signal without any tone.
        rng = np.random.default_rng(6)
        b, a = scipy.signal.butter(2, [200 / (FS / 2), 400 / (FS / 2)], "band")
        shaped = scipy.signal.lfilter(b, a, rng.normal(0, 1, N))
        got = channel_activity(shaped, FS)
        assert got.verdict == "signal" and got.flatness < 0.5
        # Loud white noise: flat and tone-free, but 20 dB above the converter's noise.
        loud = channel_activity(rng.normal(0, 100 * Q, N), FS, FULL_SCALE, BITS)
        assert loud.verdict == "signal"
        # Without a level reference the same loud white noise reads as noise.
        assert channel_activity(rng.normal(0, 100 * Q, N), FS).verdict == "noise"
        # A dead input.
        assert channel_activity(np.full(1024, 0.25), FS).verdict == "constant"
        # A stated noise level replaces full scale and bits.
        quiet = channel_activity(_converter_noise(7), FS, noise_rms=Q)
        assert quiet.expected_noise_rms == Q and quiet.verdict == "noise"

    def test_errors(self) -> None:
        with pytest.raises(InputError, match="at least 256"):
            channel_activity(np.zeros(100), FS)
        with pytest.raises(InputError, match="both full_scale and bits"):
            channel_activity(np.zeros(1024), FS, full_scale=1.0)
        with pytest.raises(InputError, match="bits"):
            channel_activity(np.zeros(1024), FS, full_scale=1.0, bits=2)
        with pytest.raises(InputError, match="sample_rate_hz"):
            channel_activity(np.zeros(1024), 0.0)
        with pytest.raises(InputError, match="NaN"):
            channel_activity(np.r_[np.zeros(1023), np.nan], FS)


class TestClassifyChannels:
    def test_basic(self) -> None:
        records = np.stack([
            _converter_noise(10),
            _converter_noise(11) + _tone(1000.0, 0.02),
            _converter_noise(12) + _tone(3150.0, 0.005) + _tone(60.0, 0.01),
        ])  # fmt: skip
        got = classify_channels(records, FS, FULL_SCALE, BITS)
        assert [a.verdict for a in got] == ["noise", "signal", "signal"]
        assert channels_sentence(got, chosen=0) == (
            "channel 0, the one analysed, holds only noise; channels 1, 2 carry signal"
        )
        assert channels_sentence(got) == "channel 0 holds only noise; channels 1, 2 carry signal"

    def test_edges(self) -> None:
        got = classify_channels(_converter_noise(13), FS)
        assert len(got) == 1
        assert channels_sentence(got) == "channel 0 holds only noise; no channel carries a signal"

    def test_errors(self) -> None:
        with pytest.raises(InputError) as info:
            classify_channels(np.zeros((2, 100)), FS)
        assert info.value.field == "channels[0].samples"
