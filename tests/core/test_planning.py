"""Tests for the plan modules: planner (plan_search), record arithmetic and resolution rule
(analysis_lines), filter options (filter_catalogue), run-ups (runup).

Main computations are checked against independent references: the folding formula of
service.core.folding applied point by point, scipy.signal analog designs with
scipy.signal.freqs for the attenuation, numpy FFTs of sampled sines for the window
rule, and published main-lobe widths.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import scipy.signal as sig

from service.core import (
    analysis_lines,
    filter_catalogue,
    plan_common,
    plan_model,
    plan_search,
    runup,
)
from service.core.chain import Chain
from service.core.folding import fold
from service.core.stages import AnalogLowpass
from service.core.tones import ToneSet

NOMINAL_RPM = 12_000.0
SHAFT_HZ = NOMINAL_RPM / 60.0
F1_HZ = 4 * SHAFT_HZ  # 4 pole pairs
SPEEDS = (0.2, 1.0)
BAND = (0.0, 2000.0)
RATES = (5120.0, 6400.0, 10240.0, 12800.0, 25600.0)
FILTERS = (
    *(filter_catalogue.FilterOption("butterworth", n) for n in (2, 4, 6, 8)),
    filter_catalogue.FilterOption("chebyshev1", 8, ripple_db=0.5),
)


def drive_unit_tones() -> ToneSet:
    """Invented electric drive unit (service/demo.py): motor orders, first mesh, inverter."""
    return ToneSet(
        label=[
            "1×",
            "2×",
            "3×",
            "17×",
            "34×",
            "carrier 1×",
            "carrier 1× − 2·f1",
            "carrier 1× + 2·f1",
        ],
        source=["motor shaft"] * 3 + ["first mesh"] * 2 + ["inverter"] * 3,
        kind=["shaft"] * 5 + ["pwm"] * 3,
        fixed_hz=[0, 0, 0, 0, 0, 1e4, 1e4, 1e4],
        speed_hz=[
            SHAFT_HZ,
            2 * SHAFT_HZ,
            3 * SHAFT_HZ,
            17 * SHAFT_HZ,
            34 * SHAFT_HZ,
            0,
            -2 * F1_HZ,
            2 * F1_HZ,
        ],
        amplitude=[1.0, 0.3, 0.2, 2.0, 0.5, 0.8, 0.3, 0.3],
    )


def request(**kw: object) -> plan_model.PlanRequest:
    base: dict[str, object] = dict(
        tones=drive_unit_tones(),
        band_hz=BAND,
        rejection_db=60.0,
        speed_range=SPEEDS,
        nominal_rpm=NOMINAL_RPM,
        rates_hz=RATES,
        filters=FILTERS,
    )
    base.update(kw)
    return plan_model.PlanRequest(**base)  # type: ignore[arg-type]


def scipy_attenuation_db(
    f: np.ndarray, opt: filter_catalogue.FilterOption, cutoff: float
) -> np.ndarray:
    """Reference: scipy.signal analog design (ba form) + scipy.signal.freqs."""
    wc = 2 * np.pi * cutoff
    if opt.family == "butterworth":
        b, a = sig.butter(opt.order, wc, analog=True)
    elif opt.family == "chebyshev1":
        b, a = sig.cheby1(opt.order, opt.ripple_db, wc, analog=True)
    else:
        raise AssertionError(opt.family)
    _, h = sig.freqs(b, a, worN=2 * np.pi * f)
    return -20 * np.log10(np.abs(h))


def brute_force_worst(
    tones: ToneSet,
    fs: float,
    opt: filter_catalogue.FilterOption,
    cutoff: float,
    band: tuple[float, float],
    speeds: np.ndarray,
) -> tuple[float, int, float]:
    """Independent scan of every (speed, tone): worst in-band alias level, tone, speed."""
    amp_db = 20 * np.log10(tones.amplitude)
    f = np.abs(tones.fixed_hz[None, :] + speeds[:, None] * tones.speed_hz[None, :])
    app = fold(f, fs)
    hit = (f > fs / 2) & (app >= band[0]) & (app <= band[1])
    lev = np.full(f.shape, -np.inf)
    lev[hit] = (amp_db[None, :] + 0 * f)[hit] - scipy_attenuation_db(f[hit], opt, cutoff)
    i, j = np.unravel_index(int(np.argmax(lev)), lev.shape)
    return float(lev[i, j]), int(j), float(speeds[i])


class TestPlan:
    def test_basic(self) -> None:
        p = plan_search.plan(request())
        tones = drive_unit_tones()
        speeds = np.linspace(*SPEEDS, 2000)
        # Reference level: strongest tone inside the band at some speed (17× at 2.0).
        limit = 20 * np.log10(2.0) - 60.0
        assert p.limit_db == pytest.approx(limit)
        # Reference: fold + scipy.signal.freqs on a 2000-speed grid; the plan passes.
        worst, _, _ = brute_force_worst(
            tones, p.sample_rate_hz, p.filter, p.cutoff_hz, BAND, speeds
        )
        assert worst <= limit + 1e-9
        assert worst <= limit - p.worst_margin_db + 1e-6
        # The next cheaper option fails, at the tone and speed the planner names.
        cheaper = p.rejected[-1]
        assert cheaper.failure == "alias"
        worst_c, tone_c, speed_c = brute_force_worst(
            tones, cheaper.sample_rate_hz, cheaper.filter, cheaper.cutoff_hz, BAND, speeds
        )
        assert worst_c > limit
        assert tone_c == cheaper.tone_index
        step = (SPEEDS[1] - SPEEDS[0]) / 1999
        assert abs(speed_c - cheaper.speed_factor) <= 1.01 * step
        # The planner evaluates the alias exactly at the band edge, so its excess bounds
        # the grid's from above and is within the grid's resolution of it.
        assert cheaper.excess_db >= worst_c - limit - 1e-9
        assert cheaper.excess_db - (worst_c - limit) < 0.2
        tone_text = f"{tones.label[tone_c]} ({tones.source[tone_c]})"
        assert tone_text in cheaper.reason
        assert "rpm" in cheaper.reason

    def test_every_rejected_option_fails_by_brute_force(self) -> None:
        p = plan_search.plan(request())
        tones = drive_unit_tones()
        speeds = np.linspace(*SPEEDS, 2000)
        limit = p.limit_db
        for rej in p.rejected:
            assert rej.failure == "alias"
            worst, _, _ = brute_force_worst(
                tones, rej.sample_rate_hz, rej.filter, rej.cutoff_hz, BAND, speeds
            )
            # Reference: fold + scipy.signal.freqs; a rejected option does fail.
            assert worst > limit
        # Cost order: no cheaper rate and no cheaper filter at the chosen rate passes.
        assert all(r.sample_rate_hz <= p.sample_rate_hz for r in p.rejected)

    def test_tone_reports(self) -> None:
        p = plan_search.plan(request())
        tones = drive_unit_tones()
        for t in p.tones:
            if not t.aliases_into_band:
                assert np.isnan(t.level_db)
                continue
            # Reference: fold and scipy.signal.freqs at the reported true frequency.
            assert fold(t.true_hz, p.sample_rate_hz) == pytest.approx(t.apparent_hz)
            att = scipy_attenuation_db(np.array([t.true_hz]), p.filter, p.cutoff_hz)[0]
            assert t.level_db == pytest.approx(
                20 * np.log10(tones.amplitude[t.index]) - att, abs=1e-6
            )
            assert t.margin_db == pytest.approx(p.limit_db - t.level_db)
            if tones.speed_hz[t.index] != 0:
                f = abs(tones.fixed_hz[t.index] + t.speed_factor * tones.speed_hz[t.index])
                assert f == pytest.approx(t.true_hz)
                assert t.rpm == pytest.approx(t.speed_factor * NOMINAL_RPM)

    def test_record_and_resolution(self) -> None:
        # The 1× and 2× of the motor are at least 40 Hz apart (0.2 × 200 Hz); with a
        # Hann window (4-bin main lobe) the bins must be <= 10 Hz.
        p = plan_search.plan(
            request(resolve=("1×", "2×"), window="hann", averages=10, overlap_pct=50.0)
        )
        assert p.required_bin_hz == pytest.approx(40.0 / 4)
        assert p.record.bin_width_hz <= 10.0
        # Smallest standard count: fs/(2.56 · lines) <= 10 Hz.
        assert p.record.lines == min(
            n for n in analysis_lines.STANDARD_LINES if p.sample_rate_hz / (2.56 * n) <= 10.0
        )

    def test_edges(self) -> None:
        # Common practice: a test up to 20 kHz needs more than 40 kS/s (span fs/2.56).
        tones = ToneSet.explicit([1000.0, 15000.0], ["a", "b"], amplitude=[1.0, 1.0])
        p = plan_search.plan(
            plan_model.PlanRequest(
                tones=tones, band_hz=(0, 20000), rejection_db=40, rates_hz=(40960.0, 51200.0)
            )
        )
        assert p.sample_rate_hz == 51200.0
        assert p.rejected[0].failure == "span"
        # The named code behind the API word: 40 960 / 2.56 = 16 000 Hz < 20 000 Hz.
        assert p.rejected[0].code == "span_too_short"
        assert p.record.span_hz == pytest.approx(20000.0)
        # No alias anywhere: the cheapest filter is no filter at all.
        assert p.filter.family == "none"
        assert p.worst_margin_db == np.inf

    def test_fixed_tone_exactly_at_band_edge(self) -> None:
        # 7.3 kHz at 10 kS/s folds to 10 − 7.3 = 2.7 kHz (Oppenheim & Schafer 2010, sec. 4.2); band
        # edge 2.7 kHz exactly.
        tones = ToneSet.explicit([1000.0, 7300.0], ["direct", "alias"], amplitude=[1, 1])
        opt = filter_catalogue.FilterOption("butterworth", 4)
        with pytest.raises(plan_common.PlanImpossible):
            plan_search.plan(
                plan_model.PlanRequest(
                    tones=tones,
                    band_hz=(0, 2700),
                    rejection_db=60,
                    rates_hz=(10000.0,),
                    filters=(opt,),
                )
            )
        p = plan_search.plan(
            plan_model.PlanRequest(
                tones=tones, band_hz=(0, 2700), rejection_db=30, rates_hz=(10000.0,), filters=(opt,)
            )
        )
        # Reference: Butterworth |H|² = 1/(1+(f/fc)^(2N)).
        expected = 10 * np.log10(1 + (7300 / 2700) ** 8)
        assert p.tones[1].level_db == pytest.approx(-expected, abs=1e-9)
        assert p.tones[1].apparent_hz == pytest.approx(2700.0)

    def test_unknown_amplitude_assumed_at_strongest(self) -> None:
        tones = ToneSet.explicit([1000.0, 7300.0], ["direct", "alias"], amplitude=[0.5, np.nan])
        p = plan_search.plan(
            plan_model.PlanRequest(
                tones=tones, band_hz=(0, 2000), rejection_db=20, rates_hz=(10000.0,)
            )
        )
        assert p.tones[1].amplitude_assumed
        assert any("assumed" in note for note in p.residual_risk)

    def test_unknown_amplitude_cautious_for_each_role(self) -> None:
        # The in-band mesh (the only tone in 0-2 kHz; the 0.01 order at 3 kHz is out of
        # the band, unaliased) sets the allowed alias level. Without an amplitude, taken as strong
        # as the strongest known tone (the 1.0 carrier), the limit was 0 - 60 = -60 dB; the
        # mesh may be as weak as the weakest known tone (0.01, -40 dB), which needs
        # -40 - 60 = -100 dB. Unknown must never plan more leniently than that.
        # Reference: 20·log10(0.01) = -40 dB by hand.
        def tones(mesh: float) -> ToneSet:
            return ToneSet.explicit(
                [3000.0, 1700.0, 10_000.0], ["3×", "mesh", "carrier"], amplitude=[0.01, mesh, 1.0]
            )

        def make(mesh: float) -> plan_model.Plan:
            return plan_search.plan(
                plan_model.PlanRequest(tones=tones(mesh), band_hz=(0, 2000), rejection_db=60,
                              rates_hz=(12_800.0,), filters=FILTERS)
            )  # fmt: skip

        unknown, weakest = make(np.nan), make(0.01)
        assert weakest.limit_db == pytest.approx(-100.0)
        assert unknown.limit_db <= weakest.limit_db + 1e-9
        assert FILTERS.index(unknown.filter) >= FILTERS.index(weakest.filter)
        assert unknown.amplitude_basis == "unknown_reference_as_weakest"
        assert "mesh" in unknown.amplitude_basis_text
        assert weakest.amplitude_basis == "known"
        # The aliased role stays cautious too: an unknown carrier is as strong as the
        # strongest known tone, and its alias (12.8 - 11.5 = 1.3 kHz, in band) binds.
        carrier_unknown = ToneSet.explicit(
            [300.0, 11_500.0], ["1×", "carrier"], amplitude=[1.0, np.nan]
        )
        alias_unknown = plan_search.plan(
            plan_model.PlanRequest(
                tones=carrier_unknown,
                band_hz=(0, 2000), rejection_db=60, rates_hz=(12_800.0,), filters=FILTERS,
            )
        )  # fmt: skip
        assert alias_unknown.amplitude_basis == "unknown_alias_as_strongest"

    def test_impossible_suggestions(self) -> None:
        with pytest.raises(plan_common.PlanImpossible) as err:
            plan_search.plan(
                request(
                    rejection_db=125.0,
                    rates_hz=(5120.0, 6400.0, 10240.0),
                    filters=(
                        filter_catalogue.FilterOption("butterworth", 4),
                        filter_catalogue.FilterOption("butterworth", 8),
                    ),
                )
            )
        e = err.value
        assert isinstance(e, ValueError)
        assert "no listed option reaches 125 dB rejection" in str(e)
        assert "10.24 kS/s with 8th-order Butterworth" in str(e)
        text = " | ".join(e.suggestions)
        m = re.search(r"offer ([\d.]+) kS/s", text)
        assert m is not None
        offered = float(m.group(1)) * 1000
        order = re.search(r"a (\d+)th-order Butterworth", text)
        assert order is not None
        assert re.search(r"accept \d+ dB rejection", text)
        # Each suggestion works, checked with fold + scipy.signal.freqs on 2000 speeds.
        tones = drive_unit_tones()
        speeds = np.linspace(*SPEEDS, 2000)
        limit = 20 * np.log10(2.0) - 125.0
        worst, _, _ = brute_force_worst(
            tones, offered, filter_catalogue.FilterOption("butterworth", 8), 2000.0, BAND, speeds
        )
        assert worst <= limit
        worst, _, _ = brute_force_worst(
            tones,
            10240.0,
            filter_catalogue.FilterOption("butterworth", int(order.group(1))),
            2000.0,
            BAND,
            speeds,
        )
        assert worst <= limit
        worst, _, _ = brute_force_worst(
            tones,
            10240.0,
            filter_catalogue.FilterOption("butterworth", int(order.group(1)) - 1),
            2000.0,
            BAND,
            speeds,
        )
        assert worst > limit

    def test_impossible_span_and_resolution(self) -> None:
        with pytest.raises(plan_common.PlanImpossible) as err:
            plan_search.plan(request(rates_hz=(2560.0, 5000.0)))
        assert "5.12 kS/s" in err.value.suggestions[0]
        with pytest.raises(plan_common.PlanImpossible) as err:
            plan_search.plan(request(bin_width_hz=0.001, lines_options=(100, 200)))
        assert "resolution" in str(err.value)
        assert any("analysis lines" in s for s in err.value.suggestions)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="rates_hz is empty"):
            plan_search.plan(request(rates_hz=()))
        with pytest.raises(ValueError, match=r"band_hz\[0\]=-5"):
            plan_search.plan(request(band_hz=(-5, 100)))
        with pytest.raises(ValueError, match=r"band_hz\[1\]"):
            plan_search.plan(request(band_hz=(500, 100)))
        with pytest.raises(ValueError, match=r"speed_range\[1\]=0.5 is below"):
            plan_search.plan(request(speed_range=(1.0, 0.5)))
        with pytest.raises(ValueError, match="exactly one of rejection_db"):
            plan_search.plan(request(floor=0.01))
        with pytest.raises(ValueError, match="rates_hz\\[1\\]=-1"):
            plan_search.plan(request(rates_hz=(1000.0, -1.0)))
        with pytest.raises(ValueError, match="matches no tone"):
            plan_search.plan(request(resolve=("1×", "99×")))
        with pytest.raises(ValueError, match="window="):
            plan_search.plan(request(window="triangle"))
        with pytest.raises(ValueError, match="filters is empty"):
            plan_search.plan(request(filters=()))
        with pytest.raises(ValueError, match="order=0"):
            filter_catalogue.FilterOption("butterworth", 0)
        with pytest.raises(ValueError, match=r"cutoff_fraction=0\.7"):
            filter_catalogue.FilterOption("butterworth", 4, cutoff_fraction=0.7)
        no_amp = ToneSet.explicit([100.0], ["a"])
        with pytest.raises(ValueError, match="floor needs tone amplitudes"):
            plan_search.plan(plan_model.PlanRequest(tones=no_amp, band_hz=(0, 200), floor=0.1))


class TestFilterOption:
    def test_basic(self) -> None:
        # Cost order: poles first, then Butterworth before Chebyshev before elliptic.
        opts = [
            filter_catalogue.FilterOption("elliptic", 4, ripple_db=0.1, stop_atten_db=80),
            filter_catalogue.FilterOption("chebyshev1", 4, ripple_db=0.5),
            filter_catalogue.FilterOption("butterworth", 6),
            filter_catalogue.FilterOption("butterworth", 4),
            filter_catalogue.FilterOption("none"),
        ]
        ranked = sorted(opts, key=lambda o: o.cost())
        assert [(o.family, o.order) for o in ranked] == [
            ("none", 0),
            ("butterworth", 4),
            ("chebyshev1", 4),
            ("elliptic", 4),
            ("butterworth", 6),
        ]

    def test_edges(self) -> None:
        # Chebyshev II "at the band edge": its -3 dB point sits on the edge.
        opt = filter_catalogue.FilterOption("chebyshev2", 6, stop_atten_db=60)
        cut = opt.cutoff_for(10000.0, (0.0, 1000.0))
        assert cut is not None
        # Reference: scipy.signal.cheby2 + freqs.
        b, a = sig.cheby2(6, 60, 2 * np.pi * cut, analog=True)
        _, h = sig.freqs(b, a, worN=[2 * np.pi * 1000.0])
        assert -20 * np.log10(abs(h[0])) == pytest.approx(3.0103, abs=1e-6)
        frac = filter_catalogue.FilterOption("butterworth", 4, cutoff_fraction=0.25)
        assert frac.cutoff_for(51200.0, (0.0, 1.0)) == pytest.approx(12800.0)

    def test_cutoff_following_rate(self) -> None:
        # A Butterworth at fs/4 taking 3 dB at fs/4: band 0-2 kHz passes only where
        # fs/4 >= 2 kHz... and the band loss check rejects lower rates.
        tones = ToneSet.explicit([1000.0, 30000.0], ["a", "b"], amplitude=[1.0, 1.0])
        opt = filter_catalogue.FilterOption("butterworth", 8, cutoff_fraction=0.25)
        p = plan_search.plan(
            plan_model.PlanRequest(
                tones=tones,
                band_hz=(0, 2000),
                rejection_db=40,
                rates_hz=(5120.0, 6400.0, 8192.0),
                filters=(opt,),
            )
        )
        assert p.sample_rate_hz == 8192.0
        assert [r.failure for r in p.rejected] == ["band_loss", "band_loss"]
        assert {r.code for r in p.rejected} == {"band_loss_too_high"}
        # Reference: Butterworth |H|² = 1/(1+(f/fc)^(2N)) at the band edge.
        assert p.band_loss_db == pytest.approx(10 * np.log10(1 + (2000 / 2048) ** 16), abs=1e-9)


class TestResolutionBins:
    def test_basic(self) -> None:
        # Source: J. O. Smith, Spectral Audio Signal Processing, "Resolving sinusoids";
        # Harris, Proc. IEEE 66(1) 1978: main lobe of an L-term cosine window = 2L bins.
        assert analysis_lines.resolution_bins("rectangular") == 2
        assert analysis_lines.resolution_bins("hann") == 4
        assert analysis_lines.resolution_bins("hamming") == 4
        assert analysis_lines.resolution_bins("blackmanharris") == 8

    @pytest.mark.parametrize(
        "name,scipy_name",
        [
            ("rectangular", "boxcar"),
            ("hann", "hann"),
            ("hamming", "hamming"),
            ("blackmanharris", "blackmanharris"),
            ("flattop", "flattop"),
        ],
    )
    def test_numeric_null_to_null(self, name: str, scipy_name: str) -> None:
        # Reference: first null of the zero-padded DFT of scipy.signal.get_window.
        n, pad = 256, 64
        w = sig.get_window(scipy_name, n, fftbins=True)
        mag = np.abs(np.fft.rfft(w, n * pad))
        d = np.diff(mag)
        first_min = int(np.flatnonzero((d[:-1] < 0) & (d[1:] >= 0))[0]) + 1
        assert 2 * first_min / pad == pytest.approx(
            analysis_lines.resolution_bins(name), abs=1 / pad
        )

    def test_hann_two_tones(self) -> None:
        # Reference: numpy FFT of two sampled sines through a Hann window, 32× padded.
        n, pad = 1024, 32
        w = sig.get_window("hann", n, fftbins=True)
        t = np.arange(n) - n / 2  # phases referred to the window centre

        def peaks(sep_bins: float, phase: float) -> np.ndarray:
            f1 = 100.25
            x = np.cos(2 * np.pi * f1 * t / n) + np.cos(2 * np.pi * (f1 + sep_bins) * t / n + phase)
            mag = np.abs(np.fft.rfft(x * w, n * pad))
            lo, hi = int((f1 - 3) * pad), int((f1 + sep_bins + 3) * pad)
            seg = mag[lo:hi]
            pk, _ = sig.find_peaks(seg, height=0.1 * seg.max())
            return (pk + lo) / pad - f1

        width = analysis_lines.resolution_bins("hann")
        # At the main-lobe width and beyond: two peaks for every relative phase, each
        # within one interpolation step of its tone.
        for sep in (width, width + 0.5):
            for phase in np.linspace(0, np.pi, 7):
                found = peaks(sep, phase)
                assert found.size == 2
                assert np.allclose(found, [0.0, sep], atol=1 / pad + 1e-9)
        # Well inside it, tones in phase merge into one peak.
        for sep in (1.0, 1.5):
            assert peaks(sep, 0.0).size == 1

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="window='kaiser'"):
            analysis_lines.resolution_bins("kaiser")


class TestRecordLength:
    def test_basic(self) -> None:
        # Common practice: span = fs/2.56, bin width = span/lines, N = 2.56·lines.
        r = analysis_lines.record_length(51200.0, 3200)
        assert r.span_hz == pytest.approx(20000.0)
        assert r.bin_width_hz == pytest.approx(20000.0 / 3200)
        assert r.samples == 8192
        assert r.record_s == pytest.approx(3200 / 20000.0)  # T = lines / span = 1 / bin
        # Welch averaging: 10 records overlapped 50 % need N + 9·N/2 samples.
        r = analysis_lines.record_length(51200.0, 3200, averages=10, overlap_pct=50.0)
        assert r.total_s == pytest.approx((8192 + 9 * 4096) / 51200.0)

    def test_edges(self) -> None:
        r = analysis_lines.record_length(1000.0, 1, averages=1, overlap_pct=99.9)
        assert r.samples == 3 and r.total_s == pytest.approx(3 / 1000.0)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="overlap_pct=100"):
            analysis_lines.record_length(1000.0, 100, overlap_pct=100)
        with pytest.raises(ValueError, match="lines=0"):
            analysis_lines.record_length(1000.0, 0)
        with pytest.raises(ValueError, match="sample_rate_hz=0"):
            analysis_lines.record_length(0.0, 100)


class TestSpeedRange:
    def test_basic(self) -> None:
        assert plan_common.speed_range_from_tolerance(5) == pytest.approx((0.95, 1.05))

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="tolerance_pct=-1"):
            plan_common.speed_range_from_tolerance(-1)


def brute_crossings(
    f_alias: np.ndarray, f_direct: np.ndarray, fs: float, speeds: np.ndarray
) -> np.ndarray:
    """Reference: scan the fold of both lines on a dense grid for sign changes."""
    a = fold(f_alias, fs)
    d = fold(f_direct, fs)
    ok = (f_alias > fs / 2) & (f_direct <= fs / 2)
    diff = a - d
    d0, d1 = diff[:-1], diff[1:]
    change = (d0 == 0) | ((d0 < 0) & (d1 > 0)) | ((d0 > 0) & (d1 < 0))
    i = np.flatnonzero(ok[:-1] & ok[1:] & change)
    return speeds[i] + diff[i] / (diff[i] - diff[i + 1]) * (speeds[i + 1] - speeds[i])


class TestRunUp:
    def test_basic(self) -> None:
        tones = drive_unit_tones()
        chain = Chain.shorthand(5120.0, AnalogLowpass("butterworth", 2, 2000.0))
        grid = np.linspace(0.05, 1.0, 400)
        ru = runup.run_up(
            tones, chain, grid, nominal_rpm=NOMINAL_RPM, orders_of_interest=["1×", "2×", "3×", 4.5]
        )
        assert ru.apparent_hz.shape == (400, 9)
        assert ru.label[-1] == "order 4.5"
        fine = np.linspace(0.05, 1.0, 200_001)
        for alias in range(len(tones)):
            for crossed, order in ((0, 1.0), (1, 2.0), (2, 3.0), (8, 4.5)):
                fa = np.abs(tones.fixed_hz[alias] + fine * tones.speed_hz[alias])
                expect = brute_crossings(fa, order * SHAFT_HZ * fine, 5120.0, fine)
                expect = expect[
                    fold(np.abs(tones.fixed_hz[alias] + expect * tones.speed_hz[alias]), 5120.0)
                    <= 2000.0
                ]
                sel = (
                    (ru.crossings.alias_index == alias)
                    & (ru.crossings.crossed_index == crossed)
                    & ~ru.crossings.touching
                )
                got = ru.crossings.speed_factor[sel]
                assert got.size == expect.size, (alias, crossed)
                assert np.allclose(np.sort(got), np.sort(expect), atol=1e-4)
        assert ru.crossings.total > 0
        assert ru.crossings.rpm is not None

    def test_fold_lines(self) -> None:
        tones = ToneSet(
            label=["34×"],
            source=["first mesh"],
            kind=["shaft"],
            fixed_hz=[0.0],
            speed_hz=[34 * SHAFT_HZ],
            amplitude=[1.0],
        )
        chain = Chain.shorthand(12800.0)
        ru = runup.run_up(tones, chain, rpm=np.linspace(600, 12000, 50), nominal_rpm=NOMINAL_RPM)
        # Reference: 34 × rpm/60 = k × 6400 Hz → rpm = k × 6400 × 60 / 34.
        k = np.arange(1, 4)
        rpm = k * 6400 * 60 / 34
        rpm = rpm[(rpm > 600) & (rpm < 12000)]
        assert ru.fold_lines.rpm is not None
        assert np.allclose(ru.fold_lines.rpm, rpm)
        assert list(ru.fold_lines.multiple) == list(k[: rpm.size])
        # Reference: the zone from fold's definition changes exactly there.
        z = np.ceil(34 * np.linspace(600, 12000, 50) / 60 / 6400)
        assert int(np.count_nonzero(np.diff(z))) == rpm.size

    def test_touching_within_tolerance(self) -> None:
        # Two fixed tones whose folds sit 1 Hz apart: no sign change, but within a bin.
        tones = ToneSet.explicit([2000.0, 10801.0], ["direct", "alias"], amplitude=[1, 1])
        chain = Chain.shorthand(12800.0)
        ru = runup.run_up(tones, chain, [0.5, 1.0, 1.5], lines=3200)
        assert ru.tolerance_hz == pytest.approx(12800 / 8192)
        assert ru.crossings.total >= 1
        assert ru.crossings.touching.all()
        assert ru.crossings.alias_index[0] == 1 and ru.crossings.crossed_index[0] == 0

    def test_errors(self) -> None:
        tones = drive_unit_tones()
        chain = Chain.shorthand(12800.0)
        with pytest.raises(ValueError, match="exactly one of speed_factors and rpm"):
            runup.run_up(tones, chain)
        with pytest.raises(ValueError, match="needs nominal_rpm"):
            runup.run_up(tones, chain, rpm=[1000, 2000])
        with pytest.raises(ValueError, match="must increase"):
            runup.run_up(tones, chain, [1.0, 0.5])
        with pytest.raises(ValueError, match="numeric order; it needs nominal_rpm"):
            runup.run_up(tones, chain, [0.5, 1.0], orders_of_interest=[2.0])
        with pytest.raises(ValueError, match="matches no tone"):
            runup.run_up(tones, chain, [0.5, 1.0], orders_of_interest=["nope"])
