"""Multi-rate test: real lines, aliases and their true frequencies from 2-6 captures.

Every capture here is simulated from first principles (nothing from the project's chain,
filter or spectrum code): sines sampled at ``t = k/fs`` with numpy, a stated analog
Butterworth applied through its exact response from ``scipy.signal.freqs``, white noise,
a 4-term Blackman-Harris window, ``numpy.fft.rfft``, peaks from
``scipy.signal.find_peaks`` refined by parabolic interpolation on the dB magnitude.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
import scipy.signal

from service.core.errors import InputError
from service.core.multirate import compare_captures
from service.core.multirate_crt import common_resolution, robust_crt
from service.core.multirate_model import Capture
from service.core.multirate_settle import settle_rate

N_SAMPLES = 16384
FLOOR_DB = -90.0


def _butter_db(order: int, cutoff_hz: float):
    """Reference attenuation (dB) of an analog Butterworth: scipy.signal.freqs."""
    b, a = scipy.signal.butter(order, 2 * np.pi * cutoff_hz, analog=True)

    def att(f):
        f = np.atleast_1d(np.asarray(f, dtype=float))
        _, h = scipy.signal.freqs(b, a, worN=2 * np.pi * np.maximum(f, 1e-9))
        return -20 * np.log10(np.abs(h))

    return att, (b, a)


def simulate(tones, rate, *, drift=0.0, butter=None, noise=1e-4, seed=0):
    """Peaks (Hz, dB re amplitude 1, bin width Hz) of a simulated capture.

    ``tones``: (true Hz, level dB before the chain); ``drift``: the machine's relative
    speed offset in this capture; ``butter``: (order, cutoff Hz) or None.
    """
    rng = np.random.default_rng(seed)
    t = np.arange(N_SAMPLES) / rate
    x = rng.normal(0.0, noise, N_SAMPLES)
    for f, level_db in tones:
        f_act = f * (1.0 + drift)
        amp, phase = 10 ** (level_db / 20), rng.uniform(0, 2 * np.pi)
        if butter is not None:
            _, (b, a) = _butter_db(*butter)
            _, h = scipy.signal.freqs(b, a, worN=[2 * np.pi * f_act])
            amp, phase = amp * abs(h[0]), phase + np.angle(h[0])
        x += amp * np.cos(2 * np.pi * f_act * t + phase)  # true sampling at t = k/fs
    w = scipy.signal.windows.blackmanharris(N_SAMPLES, sym=False)
    mag = 2 * np.abs(np.fft.rfft(x * w)) / w.sum()
    db = 20 * np.log10(np.maximum(mag, 1e-30))
    k, _ = scipy.signal.find_peaks(db, height=FLOOR_DB)
    k = k[(k > 0) & (k < db.size - 1)]
    al, be, ga = db[k - 1], db[k], db[k + 1]
    d = 0.5 * (al - ga) / (al - 2 * be + ga)
    bin_hz = rate / N_SAMPLES
    return (k + d) * bin_hz, be - 0.25 * (al - ga) * d, bin_hz


def capture(tones, rate, *, drift=0.0, butter=None, seed=0):
    f, lev, bin_hz = simulate(tones, rate, drift=drift, butter=butter, seed=seed)
    att = _butter_db(*butter)[0] if butter is not None else None
    return Capture(rate, f, lev, bin_hz, att)


def fft_apparent(f_true, rate):
    """Reference apparent frequency: the FFT peak of a sampled unit sine (numpy)."""
    f, lev, _ = simulate([(f_true, -6.0)], rate, noise=0.0)
    return float(f[np.argmax(lev)])


def group_near(result, k, freq_hz, tol_hz):
    for g in result.groups:
        if abs(g.freq_hz[k] - freq_hz) <= tol_hz:
            return g
    raise AssertionError(f"no group with a peak near {freq_hz} Hz in capture {k}")


def fold_ref(f, fs):
    # Source: Oppenheim & Schafer, DTSP, sec. 4.2: |f - fs*round(f/fs)|;
    # checked against the numpy FFT in TestApparent.
    return np.abs(f - fs * np.rint(f / fs))


class TestApparent:
    def test_fold_matches_fft(self):
        # Reference: numpy FFT of simulated sampling (true sampling at t = k/fs).
        for f, fs in [(10_000, 12_800), (10_000, 16_000), (11_200, 12_800), (11_200, 16_000),
                      (27_200, 12_800), (27_200, 16_000), (31_950.67, 25_600),
                      (31_950.67, 20_480), (74_000, 12_800)]:  # fmt: skip
            assert fft_apparent(f, fs) == pytest.approx(fold_ref(f, fs), abs=fs / N_SAMPLES)


class TestRobustCRT:
    def test_basic(self):
        # Reference: arithmetic. 31,950.67 mod 25,600 = 6,350.67; mod 20,480 = 11,470.67.
        assert robust_crt([6350.67, 11470.67], [25600, 20480]) == pytest.approx(31950.67)
        # 38 mod 7 = 3, 38 mod 11 = 5 (textbook CRT, exact remainders).
        assert robust_crt([3, 5], [7, 11]) == pytest.approx(38)

    @pytest.mark.parametrize(
        ("m", "gammas"), [(20, (3, 4, 5)), (16, (7, 9)), (12, (4, 6, 9)), (8, (5, 6, 7, 11))]
    )
    def test_error_bound_brute_force(self, m, gammas):
        # Source: W. Wang and X.-G. Xia, IEEE Trans. Signal Processing 58(11), 2010:
        # with remainder errors |Δr_i| <= τ < M/4 the reconstruction error is <= τ.
        # Reference: brute-force search of every integer in [0, lcm).
        moduli = [m * g for g in gammas]
        lcm = math.lcm(*moduli)
        tau = (m - 1) // 4  # largest integer below M/4
        rng = np.random.default_rng(m)
        allN = np.arange(lcm)
        for _ in range(40):
            n = int(rng.integers(0, lcm))
            err = rng.integers(-tau, tau + 1, len(moduli))
            r = [(n + int(e)) % mi for e, mi in zip(err, moduli, strict=True)]
            pairs = zip(r, moduli, strict=True)
            dist = np.max(
                [np.minimum((allN - ri) % mi, (ri - allN) % mi) for ri, mi in pairs], axis=0
            )
            consistent = allN[dist <= tau]
            assert n in consistent
            circ = np.minimum((consistent - n) % lcm, (n - consistent) % lcm)
            assert circ.max() <= 2 * tau  # the brute force sees one cluster only
            est = robust_crt(r, moduli)
            assert min((est - n) % lcm, (n - est) % lcm) <= tau + 1e-9

    def test_common_resolution(self):
        # Reference: arithmetic. gcd(12800, 16000) = 3200, lcm = 64000.
        res = common_resolution([12_800, 16_000])
        assert (res.resolution_hz, res.factors, res.lcm_hz) == (3200, (4, 5), 64_000)
        assert res.unambiguous_hz == 32_000 and res.error_bound_hz == 800
        # Rates with a fraction: gcd on a 0.1 Hz grid (integer arithmetic).
        res = common_resolution([12_800, 12_345.6])
        assert res.resolution_hz == pytest.approx(math.gcd(128_000, 123_456) / 10)

    def test_errors(self):
        with pytest.raises(InputError):
            robust_crt([1.0], [7.0])
        with pytest.raises(InputError):
            robust_crt([1.0, 2.0], [7.0, -3.0])


DEMO_FILTER = (2, 5_000.0)  # demo scenario: 2nd-order 5 kHz Butterworth


class TestDemoCarrier:
    """DESIGN sec. 6: the inverter's 10 kHz carrier at 12.8 and 16 kS/s."""

    def _captures(self):
        tones = [(10_000.0, -6.0), (150.0, -30.0), (2_400.0, -26.0)]
        return [
            capture(tones, 12_800, butter=DEMO_FILTER, seed=1),
            capture(tones, 16_000, butter=DEMO_FILTER, drift=0.002, seed=2),
        ]

    def test_inside_stated_range(self):
        caps = self._captures()
        res = compare_captures(caps, max_true_hz=30_000, full_scale_db=0.0)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        assert g.verdict == "alias"
        assert g.top is not None and g.top.true_hz == pytest.approx(10_000, abs=25)
        # Reference: numpy FFT of the simulated sampling gives the apparent frequencies.
        for k, rate in enumerate((12_800, 16_000)):
            assert g.top.apparent_hz[k] == pytest.approx(fft_apparent(10_000, rate), abs=25)
        # Reference: scipy.signal.freqs on the Butterworth at the candidate.
        att = _butter_db(*DEMO_FILTER)[0](g.top.true_hz)[0]
        assert g.top.attenuation_db[0] == pytest.approx(att, abs=1e-6)
        for f in (150.0, 2_400.0):
            assert group_near(res, 0, f, 3).verdict == "real"

    def test_default_range_is_ambiguous_not_74k(self):
        res = compare_captures(self._captures(), full_scale_db=0.0)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        # Reference: lcm(12800, 16000) = 64 kHz; 74 kHz = 64 + 10 kHz folds alike.
        assert g.verdict == "ambiguous" and g.top is None
        assert g.period_hz == 64_000
        assert g.candidates[0].true_hz == pytest.approx(10_000, abs=25)
        assert any(abs(c.true_hz - 74_000) < 100 for c in g.candidates)
        assert not math.isnan(g.settle_rate_hz)

    def test_prior_decides_and_says_so(self):
        res = compare_captures(self._captures(), full_scale_db=0.0, prior_weight=3.0)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        assert g.verdict == "alias" and g.decided_by_prior
        assert g.top is not None and g.top.true_hz == pytest.approx(10_000, abs=25)

    def test_implausible_level(self):
        # An 80 dB filter loss on a peak 20 dB below full scale: implausible.
        # Reference: Butterworth 8th order at 1 kHz: 160·log10(f/1 kHz) dB above it.
        tones = [(10_000.0, 0.0)]
        caps = [capture(tones, r, seed=r) for r in (12_800, 16_000)]
        steep = lambda f: np.where(np.asarray(f) > 20_000, 80.0, 0.0)  # noqa: E731
        caps = [Capture(c.rate_hz, c.freq_hz, c.level_db, c.uncertainty_hz, steep) for c in caps]
        res = compare_captures(caps, full_scale_db=0.0, headroom_db=20.0)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        assert g.verdict == "alias" and g.top is not None
        assert g.top.true_hz == pytest.approx(10_000, abs=25)


class TestLevelEvidence:
    def test_different_filters_pick_the_image(self):
        # Capture A behind a 2nd-order 5 kHz Butterworth, B behind a 6th-order 6 kHz one:
        # the level difference between the captures must match the difference of the
        # two chains' attenuations (reference: scipy.signal.freqs), which only 10 kHz
        # does; 54 and 74 kHz fold alike but would differ by tens of dB.
        tones = [(10_000.0, -6.0)]
        caps = [
            capture(tones, 12_800, butter=(2, 5_000.0), seed=11),
            capture(tones, 16_000, butter=(6, 6_000.0), seed=12),
        ]
        res = compare_captures(caps, full_scale_db=0.0)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        assert g.verdict == "alias" and not g.decided_by_prior
        assert g.top is not None and g.top.true_hz == pytest.approx(10_000, abs=25)
        att_a, att_b = _butter_db(2, 5_000.0)[0], _butter_db(6, 6_000.0)[0]
        c54 = next(c for c in g.candidates if abs(c.true_hz - 54_000) < 300)
        implied = np.array(
            [g.level_db[0] + att_a(c54.true_hz)[0], g.level_db[1] + att_b(c54.true_hz)[0]]
        )
        assert c54.level_error_db == pytest.approx(tuple(implied - implied.mean()), abs=1e-6)
        assert c54.score < g.top.score - 1.0

    def test_too_much_work(self):
        caps = [Capture(r, np.linspace(1, r / 2 - 1, 400), np.zeros(400), 1.0)
                for r in (1_000, 1_300)]  # fmt: skip
        with pytest.raises(InputError, match="pairings"):
            compare_captures(caps, max_true_hz=900_000)


class TestPair11k2:
    def test_basic(self):
        # 11.2 kHz folds to 1.6 kHz at 12.8 kS/s and 4.8 kHz at 16 kS/s (fold formula).
        tones = [(11_200.0, -10.0)]
        caps = [capture(tones, 12_800, seed=3), capture(tones, 16_000, seed=4)]
        res = compare_captures(caps, max_true_hz=32_000)
        g = group_near(res, 0, 1_600, 3)
        assert g.freq_hz[1] == pytest.approx(4_800, abs=3)
        assert g.candidates[0].true_hz == pytest.approx(11_200, abs=5)
        # Reference: numpy FFT shows 27.2 kHz reads 1.6 and 4.8 kHz too (27.2 = 2·12.8
        # + 1.6 = 2·16 − 4.8): honest answer is a tie, not a confident number.
        assert fft_apparent(27_200, 12_800) == pytest.approx(1_600, abs=1)
        assert fft_apparent(27_200, 16_000) == pytest.approx(4_800, abs=1)
        assert g.verdict == "ambiguous" and g.tied == 2
        assert g.candidates[1].true_hz == pytest.approx(27_200, abs=5)
        # The proposed third rate settles it.
        rate = g.settle_rate_hz
        a11, a27 = fft_apparent(11_200, rate), fft_apparent(27_200, rate)
        assert abs(a11 - a27) / (rate / 2.56 / 3200) == pytest.approx(
            g.settle_separation_bins, rel=0.01
        )
        caps3 = [*caps, capture(tones, rate, seed=5)]
        res3 = compare_captures(caps3, max_true_hz=32_000)
        g3 = group_near(res3, 0, 1_600, 3)
        assert g3.verdict == "alias"
        assert g3.top is not None and g3.top.true_hz == pytest.approx(11_200, abs=5)


class TestIssueTone:
    def test_31950(self):
        # Source: issue 13 — 31,950.67 Hz at 25.6 and 20.48 kS/s, no filters.
        # Reference: lcm(25600, 20480) = 102,400; unambiguous range 51.2 kHz.
        tones = [(31_950.67, -12.0)]
        caps = [capture(tones, 25_600, seed=6), capture(tones, 20_480, seed=7)]
        res = compare_captures(caps, max_true_hz=51_200)
        assert res.resolution.unambiguous_hz == 51_200
        g = group_near(res, 0, fft_apparent(31_950.67, 25_600), 3)
        assert g.verdict == "alias"
        assert g.top is not None and g.top.true_hz == pytest.approx(31_950.67, abs=3)
        res = compare_captures(caps)  # default: 10 x the highest rate
        g = group_near(res, 0, fft_apparent(31_950.67, 25_600), 3)
        assert g.verdict == "ambiguous" and g.period_hz == 102_400
        assert g.candidates[0].true_hz == pytest.approx(31_950.67, abs=3)
        assert any(abs(c.true_hz - 70_449.33) < 5 for c in g.candidates)


class TestRealLine:
    def test_not_reused(self):
        # 13.6 kHz folds onto 2.4 kHz at 16 kS/s (16 − 13.6) and to 0.8 kHz at 12.8 kS/s.
        tones = [(2_400.0, -20.0), (13_600.0, -20.0)]
        caps = [capture(tones, 12_800, seed=8), capture(tones, 16_000, seed=9)]
        res = compare_captures(caps, max_true_hz=32_000)
        real = group_near(res, 0, 2_400, 3)
        assert real.verdict == "real"
        j = real.peak[1]
        others = [g for g in res.groups if g is not real]
        assert all(g.peak[1] != j for g in others)
        assert group_near(res, 0, 800, 3).verdict == "unmatched"
        assert not any(g.verdict == "alias" and g.peak[0] == real.peak[0] for g in res.groups)


# --------------------------------------------------------------------------- trials

SERIES = (8_000, 10_240, 12_800, 16_000, 20_480, 25_600, 32_000, 40_960, 51_200)
DRIFT = 0.005


def _unique_inside(f, rates, unc, max_f):
    """Reference (brute force): True when no other true frequency up to ``max_f`` folds
    within tolerance onto ``f``'s apparent frequencies in every capture."""
    a0 = fold_ref(f, rates[0])
    m = np.arange(int(max_f // rates[0]) + 2) * rates[0]
    grid = np.concatenate([m + a0, m - a0])
    grid = grid[(grid >= 0) & (grid <= max_f)]
    tol = 2 * unc + DRIFT * np.maximum(grid, f)
    ok = np.all([np.abs(fold_ref(grid, r) - fold_ref(f, r)) <= tol for r in rates], axis=0)
    return not np.any(ok & (np.abs(grid - f) > tol))


def run_trials(n_trials, seed):
    """Simulated multi-rate tests; returns counts for the issue's bar."""
    rng = np.random.default_rng(seed)
    stats = dict(inside=0, inside_top=0, inside_first=0, outside=0, outside_ok=0,
                 blind=0, blind_ok=0, real=0, real_alias=0, real_in=0, real_in_real=0,
                 real_in_blind=0, real_in_blind_ok=0,
                 comparisons=0, time_peaks_s=0.0, time_compare_s=0.0)  # fmt: skip
    for trial in range(n_trials):
        n_cap = int(rng.integers(2, 5))
        rates = sorted(int(r) for r in rng.choice(SERIES, n_cap, replace=False))
        f_max = 10 * max(rates)
        # Reference: lcm by integer arithmetic; error-bound cap from τ = δ + drift·f/2.
        lcm, m = math.lcm(*rates), math.gcd(*rates)
        unc = max(r / N_SAMPLES for r in rates)
        limit = min(lcm / 2, (m / 4 - unc) / (DRIFT / 2))
        # Every other tone inside the unambiguous range, the rest anywhere up to 10×.
        top = min(limit, f_max) if trial % 2 else f_max
        f_alias = float(rng.uniform(0.55 * min(rates), max(top, 0.6 * min(rates))))
        f_real = float(rng.uniform(0.05, 0.35) * min(rates))
        filt = None if rng.random() < 0.5 else (2, 0.45 * min(rates))
        eps = rng.uniform(-DRIFT / 2, DRIFT / 2, n_cap)
        if any(abs(fold_ref(f_alias * (1 + e), r) - f_real * (1 + e)) < 200
               for r, e in zip(rates, eps, strict=True)):  # fmt: skip
            continue  # the two tones would share a line (a real line is never reused)
        tones = [(f_alias, -10.0), (f_real, -20.0)]
        t0 = time.perf_counter()
        caps = [capture(tones, r, drift=e, butter=filt, seed=1000 * trial + i)
                for i, (r, e) in enumerate(zip(rates, eps, strict=True))]  # fmt: skip
        t1 = time.perf_counter()
        res = compare_captures(caps, drift=DRIFT, full_scale_db=0.0)
        # Times for bench/multirate.py only (never asserted): the comparison against
        # the simulation, FFTs and peak search that produced its input.
        stats["time_peaks_s"] += t1 - t0
        stats["time_compare_s"] += time.perf_counter() - t1
        stats["comparisons"] += 1
        f_true = f_alias * (1 + eps.mean())
        tau = unc + DRIFT * f_alias / 2
        app0 = fold_ref(f_alias * (1 + eps[0]), rates[0])
        seen = all(np.min(np.abs(c.freq_hz - fold_ref(f_alias * (1 + e), c.rate_hz))) < 3 * unc
                   for c, e in zip(caps, eps, strict=True))  # fmt: skip
        g_real = group_near(res, 0, f_real * (1 + eps[0]), 3 * unc)
        stats["real"] += 1
        stats["real_alias"] += g_real.verdict == "alias"
        if not seen:
            continue
        g = group_near(res, 0, app0, 3 * unc)
        if f_alias <= limit and _unique_inside(f_alias, rates, unc, limit):
            stats["inside"] += 1
            stats["inside_first"] += (
                bool(g.candidates) and abs(g.candidates[0].true_hz - f_true) <= tau
            )
            res_in = compare_captures(caps, drift=DRIFT, full_scale_db=0.0, max_true_hz=limit)
            g_in = group_near(res_in, 0, app0, 3 * unc)
            stats["inside_top"] += g_in.top is not None and abs(g_in.top.true_hz - f_true) <= tau
            g_r = group_near(res_in, 0, f_real * (1 + eps[0]), 3 * unc)
            if _unique_inside(f_real, rates, unc, limit):
                stats["real_in"] += 1
                stats["real_in_real"] += g_r.verdict == "real"
            else:  # a mixed-sign image folds alike: real or a tie, never "alias"
                stats["real_in_blind_ok"] += g_r.verdict in ("real", "ambiguous")
                stats["real_in_blind"] += 1
        else:
            # Outside the range, or inside but where another true frequency folds alike
            # within tolerance (near multiples of gcd/2): ambiguous, truth listed.
            listed = any(abs(c.true_hz - f_true) <= tau for c in g.candidates)
            if f_alias > limit:
                stats["outside"] += 1
                stats["outside_ok"] += g.verdict == "ambiguous" and listed
            else:  # the captures' evidence may still single out the truth
                right = g.top is not None and abs(g.top.true_hz - f_true) <= tau
                stats["blind"] += 1
                stats["blind_ok"] += (g.verdict == "ambiguous" and listed) or right
    return stats


class TestTrials:
    def test_bar(self):
        # Source: issue 13's bar. Reference: the simulation above (numpy sampling).
        s = run_trials(120, seed=13)
        assert s["inside"] >= 15 and s["outside"] >= 30, s
        assert s["inside_top"] >= 0.95 * s["inside"], s
        assert s["inside_first"] >= 0.95 * s["inside"], s
        assert s["outside_ok"] == s["outside"], s
        assert s["blind_ok"] == s["blind"], s
        assert s["real_alias"] == 0, s
        assert s["real_in_real"] >= 0.95 * s["real_in"], s
        assert s["real_in_blind_ok"] == s["real_in_blind"], s


class TestManyCaptures:
    def test_six_captures(self):
        # Reference: lcm of 8000, 10240, 12800, 16000, 20480, 25600 by integer arithmetic.
        rates = (8_000, 10_240, 12_800, 16_000, 20_480, 25_600)
        lcm = math.lcm(*rates)
        tones = [(37_123.0, -10.0), (1_234.0, -20.0)]
        caps = [capture(tones, r, seed=20 + i) for i, r in enumerate(rates)]
        res = compare_captures(caps, drift=0.0, max_true_hz=100_000)
        assert res.resolution.lcm_hz == lcm
        g = group_near(res, 0, fold_ref(37_123.0, 8_000), 3)
        assert all(p >= 0 for p in g.peak)
        assert g.verdict == "alias"
        assert g.top is not None and g.top.true_hz == pytest.approx(37_123.0, abs=2)
        assert group_near(res, 0, 1_234.0, 3).verdict == "real"

    def test_missing_in_one_capture(self):
        # A peak lost in one capture leaves a group of the others, judged on their rates.
        tones = [(11_000.0, -10.0)]
        caps = [capture(tones, r, seed=30 + i) for i, r in enumerate((12_800, 16_000))]
        third = capture([], 20_480, seed=40)  # noise only: no peak above the floor
        res = compare_captures([*caps, third], max_true_hz=30_000)
        g = group_near(res, 0, fold_ref(11_000.0, 12_800), 3)
        assert g.peak[2] == -1 and g.period_hz == math.lcm(12_800, 16_000)
        assert g.candidates[0].true_hz == pytest.approx(11_000.0, abs=30)

    def test_with_project_chain(self):
        # The attenuation protocol takes the project's chain as a callable; its value at
        # the candidate is checked against scipy.signal.freqs (reference).
        from service.core.chain import Chain
        from service.core.stages import AnalogLowpass

        flt = AnalogLowpass(family="butterworth", order=2, cutoff_hz=5_000.0)
        tones = [(10_000.0, -6.0)]
        caps = []
        for i, r in enumerate((12_800, 16_000)):
            c = capture(tones, r, butter=DEMO_FILTER, seed=50 + i)
            chain = Chain.shorthand(r, flt)
            att = lambda f, chain=chain: chain.evaluate(f).attenuation_db  # noqa: E731
            caps.append(Capture(c.rate_hz, c.freq_hz, c.level_db, c.uncertainty_hz, att))
        res = compare_captures(caps, max_true_hz=30_000)
        g = group_near(res, 0, fold_ref(10_000, 12_800), 5)
        assert g.verdict == "alias" and g.top is not None
        ref = _butter_db(*DEMO_FILTER)[0](g.top.true_hz)[0]
        assert g.top.attenuation_db == pytest.approx((ref, ref), abs=0.01)


class TestSettleRate:
    def test_basic(self):
        # Reference: numpy folds. 11.2 and 27.2 kHz read alike at 12.8 and 16 kS/s.
        rate, sep = settle_rate([11_200, 27_200], [12_800, 16_000, 20_480, 25_600])
        assert rate in (20_480, 25_600)
        for r in (20_480, 25_600):
            s = abs(fold_ref(11_200, r) - fold_ref(27_200, r)) / (r / 2.56 / 3200)
            assert sep >= s - 1e-9
        rate, sep = settle_rate([11_200, 27_200], [12_800, 16_000])
        assert sep == 0.0

    def test_edges(self):
        assert math.isnan(settle_rate([1_000.0], [8_000])[0])
        assert math.isnan(settle_rate([1_000.0, 2_000.0], [8_000], exclude_hz=[8_000])[0])


class TestErrors:
    def _cap(self, rate=12_800, f=(1_000.0,), lev=(-10.0,), unc=1.0, att=None):
        return Capture(rate, list(f), list(lev), unc, att)

    def test_errors(self):
        with pytest.raises(InputError, match="2 to 6"):
            compare_captures([self._cap()])
        with pytest.raises(InputError, match="equals"):
            compare_captures([self._cap(), self._cap()])
        with pytest.raises(InputError, match="Nyquist") as e:
            compare_captures([self._cap(), self._cap(16_000, f=(9_000.0,))])
        assert e.value.field == "captures[1].freq_hz[0]"
        with pytest.raises(InputError, match="uncertainty_hz"):
            compare_captures([self._cap(unc=0.0), self._cap(16_000)])
        with pytest.raises(InputError, match="one per peak"):
            compare_captures([self._cap(unc=[1.0, 2.0]), self._cap(16_000)])
        with pytest.raises(InputError, match="level_db"):
            compare_captures([self._cap(lev=(1.0, 2.0)), self._cap(16_000)])
        with pytest.raises(InputError, match="non-finite"):
            bad = lambda f: np.full_like(f, np.nan)  # noqa: E731
            compare_captures([self._cap(att=bad), self._cap(16_000)])
        with pytest.raises(InputError, match="max_true_hz"):
            compare_captures([self._cap(), self._cap(16_000)], max_true_hz=1e8)
        with pytest.raises(InputError, match="drift"):
            compare_captures([self._cap(), self._cap(16_000)], drift=-0.1)
        with pytest.raises(InputError, match="band_hz"):
            compare_captures([self._cap(), self._cap(16_000)], band_hz=(5.0, 1.0))

    def test_edges(self):
        # No peaks at all, and one lone peak: nothing to match.
        res = compare_captures(
            [self._cap(f=(), lev=()), self._cap(16_000, f=(3_000.0,), lev=(-5.0,))]
        )
        assert [g.verdict for g in res.groups] == ["unmatched"]
        # A table attenuation is interpolated; band flag.
        tbl = ([0.0, 1e5], [0.0, 0.0])
        res = compare_captures(
            [self._cap(att=tbl), self._cap(16_000, att=tbl)],
            band_hz=(900.0, 1_100.0),
            max_true_hz=30_000,
        )
        assert res.groups[0].verdict == "real" and res.groups[0].in_band


class TestFromTheTwoRateTest:
    """Worked cases kept from the former two-rate module (core/comparison.py)."""

    RA, RB = 10_000.0, 11_500.0

    def test_worked_fold(self):
        # Source: fold formula (Oppenheim & Schafer 2010, sec. 4.2), by hand: at 10 kS/s
        # 13.2 kHz reads 13.2 − 10 = 3.2 kHz (zone 3); at 11.5 kS/s |13.2 − 11.5| =
        # 1.7 kHz (zone 3); 1.2 kHz is below both Nyquist frequencies.
        caps = [
            Capture(self.RA, [1200.0, 3200.0], [-6.0, -10.0], self.RA / 4096),
            Capture(self.RB, [1200.0, 1700.0], [-6.0, -10.0], self.RB / 4096),
        ]
        res = compare_captures(caps, max_true_hz=20_000)
        real = group_near(res, 0, 1200.0, 0.5)
        alias = group_near(res, 0, 3200.0, 0.5)
        assert real.verdict == "real" and real.top.zone == (1, 1)
        assert alias.verdict == "alias" and alias.peak[1] == 1
        assert alias.top.true_hz == pytest.approx(13_200.0, abs=1)
        assert alias.top.zone == (3, 3)

    def test_real_in_one_capture(self):
        # A 5.5 kHz tone is real at 11.5 kS/s (zone 1) but above the 5 kHz Nyquist
        # frequency at 10 kS/s, where it reads 4.5 kHz (zone 2): by hand, as above.
        caps = [
            Capture(self.RA, [4500.0], [-14.0], self.RA / 4096),
            Capture(self.RB, [5500.0], [-14.0], self.RB / 4096),
        ]
        g = compare_captures(caps, max_true_hz=20_000).groups[0]
        assert g.verdict == "alias" and g.top.true_hz == pytest.approx(5500.0, abs=1)
        assert g.top.zone == (2, 1)


def _noisy_capture(rate, tones, seed, *, with_snr, n=8192, threshold_db=10.0):
    """Peaks of white noise plus tones: Hann window, numpy rFFT, median floor,
    ``scipy.signal.find_peaks`` above floor + threshold (the use-case's defaults)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / rate
    x = rng.normal(0.0, 1e-3, n)
    for f, level_db in tones:
        x += 10 ** (level_db / 20) * np.cos(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    w = scipy.signal.windows.hann(n, sym=False)
    db = 20 * np.log10(np.maximum(2 * np.abs(np.fft.rfft(x * w)) / w.sum(), 1e-30))
    floor = float(np.median(db))
    k, _ = scipy.signal.find_peaks(db, height=floor + threshold_db, prominence=6.0)
    snr = db[k] - floor if with_snr else None
    return Capture(rate, k * rate / n, db[k], rate / n, snr_db=snr)


class TestChancePairings:
    """Unrelated noise peaks, one per capture, must not be called a unique alias.

    10 and 12 kS/s with 0.5 % drift and max_true 30 kHz: near 27 kHz the tolerance is
    about ±140 Hz against a common divisor of 2 kHz, so before the chance test about
    two trials in three had such a "unique alias" (299 in 300 seeded trials' groups).
    """

    TONES = ((1000.0, -20.0), (2400.0, -30.0), (3700.0, -25.0))  # all real: no alias

    def _false_aliases(self, trials, *, with_snr):
        bad = 0
        for seed in range(trials):
            caps = [_noisy_capture(r, self.TONES, 10 * seed + i, with_snr=with_snr)
                    for i, r in enumerate((10_000.0, 12_000.0))]  # fmt: skip
            res = compare_captures(caps, max_true_hz=30_000.0)
            # Reference: every tone is below both Nyquist frequencies, so any "alias"
            # is a pairing of noise peaks.
            bad += sum(g.verdict == "alias" for g in res.groups)
        return bad

    def test_basic(self):
        # With the peaks' SNR (as the use-case passes it): none in 60 trials.
        assert self._false_aliases(60, with_snr=True) == 0

    def test_chance_alone(self):
        # Without SNR, the chance test alone (1 % per pairing; the loosest fits pass
        # now and then): at most 3 chance aliases in 60 trials (measured 8 in 300).
        assert self._false_aliases(60, with_snr=False) <= 3

    def test_edges(self):
        # A real alias among the noise is still found: 7.3 kHz folds to 2.7 kHz at
        # 10 kS/s and 4.7 kHz at 12 kS/s (Oppenheim & Schafer sec. 4.2), 60 dB above
        # the floor, its level shared by no other unpaired peak.
        tones = [*self.TONES, (7300.0, -20.0)]
        caps = [_noisy_capture(r, tones, 7 + i, with_snr=True)
                for i, r in enumerate((10_000.0, 12_000.0))]  # fmt: skip
        res = compare_captures(caps, max_true_hz=30_000.0)
        g = group_near(res, 0, 2700.0, 3.0)
        assert g.verdict == "alias" and abs(g.top.true_hz - 7300.0) < 5.0
        assert g.chance_probability < 0.01 and not g.could_be_chance

    def test_settle(self):
        # A weak pair (SNR under 15 dB) that would otherwise be an alias: ambiguous,
        # flagged as possible chance, with a third rate proposed.
        a = Capture(10_000.0, [2700.0], [-60.0], 1.0, snr_db=[12.0])
        b = Capture(12_000.0, [4700.0], [-60.0], 1.0, snr_db=[12.0])
        res = compare_captures([a, b], max_true_hz=30_000.0)
        (g,) = res.groups
        assert g.verdict == "ambiguous" and g.could_be_chance and g.top is None
        assert math.isfinite(g.settle_rate_hz)
        # The same peaks with a clear SNR: the 7.3 kHz alias (fold reference above).
        a2 = Capture(10_000.0, [2700.0], [-60.0], 1.0, snr_db=[40.0])
        b2 = Capture(12_000.0, [4700.0], [-60.0], 1.0, snr_db=[40.0])
        (g2,) = compare_captures([a2, b2], max_true_hz=30_000.0).groups
        assert g2.verdict == "alias" and abs(g2.top.true_hz - 7300.0) < 5.0

    def test_errors(self):
        with pytest.raises(InputError, match="snr_db"):
            compare_captures(
                [Capture(10_000.0, [2700.0, 100.0], [-6.0, -6.0], 1.0, snr_db=[1.0, 2.0, 3.0]),
                 Capture(12_000.0, [4700.0], [-6.0], 1.0)]
            )  # fmt: skip
