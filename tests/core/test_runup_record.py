"""Run-up records: tacho speed, the map's lines and their folding verdicts, order tracking.

The records come from ``tests/core/runup_reference.py``, a first-principles simulator
that shares no code with the project (numerical phase integration, true sampling
instants, the analog filter's exact response from scipy.signal.freqs).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.errors import InputError
from service.core.order_tracking import apparent_order, order_spectrum
from service.core.runup_lines import KnownLine, known_lines_from_tones
from service.core.runup_map import display_map, runup_map
from service.core.runup_record import analyse_run_up
from service.core.runup_sim import drive_lines, simulate_run_up
from service.core.tacho import speed_from_tacho, speed_from_trace
from service.core.tones import ToneSet, strings
from tests.core.runup_reference import Line, drive_unit, simulate, zone


@pytest.fixture(scope="module")
def sweep():
    # 0 -> 6000 rpm in 10 s, 1 pulse per revolution, 12.8 kS/s.
    return simulate([Line("order 3", 3, 0.0, 1.0)], duration_s=10.0, rpm1=6000.0)


def _pulse_starts(tacho):
    high = tacho > 2.0
    up = np.flatnonzero(high[1:] & ~high[:-1]) + 1
    down = np.flatnonzero(~high[1:] & high[:-1]) + 1
    return up, down


class TestSpeedFromTacho:
    def test_basic(self, sweep):
        s = speed_from_tacho(sweep.tacho, sweep.rate_hz, 1)
        truth = sweep.rpm_at(s.time_s)
        # Reference: the simulated sweep's speed law. Pulses are timed to about a sample;
        # measured over >= 1000 samples the error stays under 0.2 % of the speed, and a
        # few rpm where the first revolutions are long.
        late = s.time_s > 1.0
        assert np.all(np.abs(s.rpm[late] - truth[late]) <= 0.002 * truth[late] + 2.0)
        assert s.missing_repaired == 0 and s.extra_repaired == 0
        # Revolutions turned: the integral of the speed law, 0 -> 6000 rpm in 10 s, is
        # 500 revolutions (closed form). The record starts inside the pulse of
        # revolution 0, so rising edges mark revolutions 1 to 499: 498 between them.
        assert s.angle_rev[-1] == 498

    def test_missing_and_extra_pulses_repaired(self, sweep):
        x = sweep.tacho.copy()
        up, down = _pulse_starts(x)
        for i in (120, 300):  # wipe two pulses
            x[up[i] : down[down > up[i]][0]] = 0.5
        j = 200  # and add a short pulse halfway between two
        mid = (down[down > up[j]][0] + up[j + 1]) // 2
        x[mid : mid + 3] = 4.0
        s = speed_from_tacho(x, sweep.rate_hz, 1)
        assert (s.missing_repaired, s.extra_repaired) == (2, 1)
        assert s.angle_rev[-1] == 498
        truth = sweep.rpm_at(s.time_s)
        late = s.time_s > 1.0
        assert np.all(np.abs(s.rpm[late] - truth[late]) <= 0.002 * truth[late] + 2.0)

    def test_pulses_per_rev(self):
        rec = simulate([Line("o", 2, 0.0, 1.0)], duration_s=5.0, rpm0=600.0, rpm1=3000.0,
                       pulses_per_rev=4)  # fmt: skip
        s = speed_from_tacho(rec.tacho, rec.rate_hz, 4)
        truth = rec.rpm_at(s.time_s)
        assert np.all(np.abs(s.rpm - truth) <= 0.002 * truth + 2.0)

    def test_errors(self, sweep):
        with pytest.raises(InputError) as e:
            speed_from_tacho(sweep.vibration, sweep.rate_hz)
        assert e.value.code == "not_a_tacho" and e.value.field == "tacho"
        with pytest.raises(InputError) as e:
            speed_from_tacho(np.zeros(10_000), sweep.rate_hz)
        assert e.value.code == "no_pulses"
        steady = simulate([Line("o", 1, 0.0, 1.0)], duration_s=2.0, rpm0=3000.0, rpm1=3000.0)
        with pytest.raises(InputError) as e:
            speed_from_tacho(steady.tacho, steady.rate_hz)
        assert e.value.code == "constant_speed"
        assert speed_from_tacho(steady.tacho, steady.rate_hz, require_sweep=False).rpm.size
        with pytest.raises(InputError) as e:
            speed_from_tacho(sweep.tacho[:6000], sweep.rate_hz)  # 0.47 s: ~1 revolution
        assert e.value.code in {"too_short", "no_pulses"}
        with pytest.raises(InputError) as e:
            speed_from_tacho(sweep.tacho, sweep.rate_hz, pulses_per_rev=0)
        assert e.value.field == "pulses_per_rev"


class TestSpeedFromTrace:
    def test_basic(self):
        t = np.linspace(0, 10, 11)
        s = speed_from_trace(t, 600 * t)
        # From memory: angle of a linear sweep = a·t²/2; 600 rpm/s = 10 rev/s² -> 500 rev.
        assert s.angle_rev[-1] == pytest.approx(500.0)
        assert s.rpm_at(2.5) == pytest.approx(1500.0)

    def test_errors(self):
        with pytest.raises(InputError) as e:
            speed_from_trace([0, 1, 1], [0, 10, 20])
        assert e.value.code == "not_increasing" and e.value.field == "speed_trace.time_s[2]"
        with pytest.raises(InputError) as e:
            speed_from_trace([0, 1], [3000, 3000])
        assert e.value.code == "constant_speed"
        with pytest.raises(InputError) as e:
            speed_from_trace([0, 1], [10, -1])
        assert e.value.code == "negative"


class TestApparentFrequency:
    def test_rising_tone_against_numpy_fft(self):
        # Order 40 from 0 to 12,000 rpm at 12.8 kS/s, no filter: true 0 -> 8 kHz, so it
        # folds at 6.4 kHz (9,600 rpm) and falls again.
        rec = simulate([Line("o40", 40, 0.0, 1.0)], analog=None, duration_s=20.0)
        res = analyse_run_up(rec.vibration, rec.rate_hz, tacho=rec.tacho)
        line = max(res.lines, key=lambda ln: ln.rpm.size)
        n = 2048
        for t0 in (6.0, 14.0, 18.0):
            a = round(t0 * rec.rate_hz) - n // 2
            seg = rec.vibration[a : a + n] * np.hanning(n)
            spec = np.abs(np.fft.rfft(seg, 16 * n))
            # Reference: numpy's FFT of the simulated samples (zero-padded 16x).
            f_numpy = np.argmax(spec) * rec.rate_hz / (16 * n)
            rpm = rec.rpm_at(t0)
            f_line = np.interp(rpm, line.rpm[np.argsort(line.rpm)],
                               line.freq_hz[np.argsort(line.rpm)])  # fmt: skip
            bin_hz = res.map.bin_hz
            assert abs(f_line - f_numpy) <= 1.5 * bin_hz
        assert line.kind == "folded_order"
        assert line.order == pytest.approx(40.0, abs=0.05)
        # Source: Lyons sec. 2.3 — zone 2 starts where 40·rpm/60 = fs/2, i.e. 9600 rpm.
        z2 = next(z for z in line.zones if z.zone == 2)
        assert z2.inverted
        assert z2.rpm_from == pytest.approx(9600, abs=60)


def _found(res, ln: Line, fs: float):
    """The result line for simulated line ``ln``, by order (and carrier, when known)."""
    for got in res.lines:
        if got.kind == "unexplained":
            continue
        if got.known:
            if abs(got.order - ln.order) < 0.05 and abs(got.fixed_hz - ln.fixed_hz) < 1:
                return got
        elif ln.fixed_hz == 0 and got.fixed_hz == 0 and abs(got.order - ln.order) < 0.05:
            return got
    return None


def _zones_right(got, ln: Line, fs: float) -> bool:
    """Whether the zones a line reports match the truth at >= 95 % of its points."""
    true_hz = np.abs(ln.fixed_hz + ln.order * got.rpm / 60.0)
    expected = zone(true_hz, fs)
    reported = np.zeros(got.rpm.size, dtype=int)
    for z in got.zones:
        reported[(got.rpm >= z.rpm_from) & (got.rpm <= z.rpm_to)] = z.zone
    known = reported > 0
    return bool(known.mean() >= 0.8 and np.mean(reported[known] == expected[known]) >= 0.95)


def _scenarios():
    units = drive_unit()
    return {
        # The demo: 12.8 kS/s behind the weak 2nd-order Butterworth at 5 kHz.
        "demo": (units, dict(rate_hz=12_800.0, analog=("butter", 2, 5_000.0)), 1024),
        # A channel decimated by an unfiltered slice: 25.6 kS/s behind a 4th-order
        # Butterworth at 10 kHz, then [::4] -> 6.4 kS/s.
        "slice": (
            units,
            dict(rate_hz=25_600.0, analog=("butter", 4, 10_000.0), decimate=4),
            512,
        ),
        # Clean: 51.2 kS/s behind an 8th-order Butterworth at 16 kHz; every line below
        # 18 kHz (Nyquist 25.6 kHz).
        "clean": (units, dict(rate_hz=51_200.0, analog=("butter", 8, 16_000.0)), 4096),
    }


@pytest.fixture(scope="module")
def runs():
    out = {}
    for name, (units, kw, nper) in _scenarios().items():
        rec = simulate(units, **kw)
        known = [KnownLine(u.label, u.order, u.fixed_hz) for u in units]
        blind = analyse_run_up(rec.vibration, rec.rate_hz, tacho=rec.tacho, nperseg=nper)
        with_known = analyse_run_up(rec.vibration, rec.rate_hz, tacho=rec.tacho,
                                    nperseg=nper, known=known)  # fmt: skip
        out[name] = (rec, units, blind, with_known)
    return out


class TestRunUpLines:
    def test_aliased_lines_right_order_and_zone(self, runs):
        total = right = 0
        for _name, (rec, units, blind, with_known) in runs.items():
            fs = rec.rate_hz
            for res, pool in ((with_known, units), (blind, [u for u in units if u.fixed_hz == 0])):
                for ln in pool:
                    # Reference: the line's true frequency over the sweep and the zone
                    # definition (Lyons sec. 2.3), not the code under test.
                    top = abs(ln.fixed_hz) + abs(ln.order) * rec.rpm1 / 60.0
                    if zone(top, fs) == 1 and zone(ln.fixed_hz, fs) == 1:
                        continue
                    total += 1
                    got = _found(res, ln, fs)
                    ok = got is not None and got.aliased and _zones_right(got, ln, fs)
                    right += ok
        assert total >= 20
        assert right / total >= 0.95, f"{right} of {total}"

    def test_no_real_order_called_folded(self, runs):
        for name, (rec, units, blind, with_known) in runs.items():
            fs = rec.rate_hz
            real = [
                u for u in units if u.fixed_hz == 0 and zone(abs(u.order) * rec.rpm1 / 60, fs) == 1
            ]
            for res in (blind, with_known):
                for u in real:
                    got = _found(res, u, fs)
                    assert got is not None, (name, u.label)
                    assert got.kind == "order" and not got.aliased, (name, u.label)

    def test_clean_case_reports_no_alias(self, runs):
        _rec, _units, blind, with_known = runs["clean"]
        assert blind.aliased == () and with_known.aliased == ()
        assert all(ln.kind != "unexplained" for ln in blind.lines)

    def test_carrier_alias_with_known_sources(self, runs):
        _rec, _units, blind, with_known = runs["demo"]
        carrier = [ln for ln in with_known.lines if ln.kind == "fixed_alias"]
        # Source: DESIGN.md §5 fold example — 10 kHz sampled at 12.8 kS/s reads 2.8 kHz,
        # zone 2 (arithmetic: 12.8 − 10 = 2.8 kHz).
        assert len(carrier) == 1
        assert carrier[0].fixed_hz == 10_000.0
        assert np.median(carrier[0].freq_hz) == pytest.approx(2800, abs=with_known.map.bin_hz)
        assert carrier[0].zones[0].zone == 2
        sb = [ln for ln in with_known.lines if ln.kind == "sideband"]
        assert sorted(round(ln.order) for ln in sb) == [-8, 8]
        # Without sources the fixed line is not called an alias.
        fixed = [ln for ln in blind.lines if ln.order == 0 and ln.kind != "unexplained"]
        assert fixed and all(not ln.aliased for ln in fixed)

    def test_resonance_and_fixed_line(self):
        # A fixed 3 kHz line whose level rises 30 dB towards 6000 rpm and falls again
        # (a resonance), and a steady fixed line at 1.5 kHz, beside order 5.
        rec = simulate(
            [Line("resonance", 0, 3000.0, 1.0, peak_rpm=6000.0, width_rpm=1200.0),
             Line("steady", 0, 1500.0, 0.5), Line("o5", 5, 0.0, 0.5)],
            duration_s=20.0,
        )  # fmt: skip
        res = analyse_run_up(rec.vibration, rec.rate_hz, tacho=rec.tacho)
        kinds = {round(float(np.median(ln.freq_hz))): ln.kind for ln in res.lines}
        assert kinds[3000] == "resonance"
        assert kinds[1500] == "fixed"
        assert res.aliased == ()

    def test_speed_trace_instead_of_tacho(self, runs):
        rec, _units, blind, _ = runs["demo"]
        t = np.linspace(0, rec.duration_s, 50)
        res = analyse_run_up(rec.vibration, rec.rate_hz, speed_time_s=t, speed_rpm=rec.rpm_at(t),
                             nperseg=1024)  # fmt: skip
        orders = sorted(round(ln.order, 1) for ln in res.lines if ln.fixed_hz == 0)
        expected = sorted(round(ln.order, 1) for ln in blind.lines if ln.fixed_hz == 0)
        # Reference: the simulated orders (1, 2, 8, 17, 34, 51, 68 of the e-drive).
        assert orders == expected == [1.0, 2.0, 8.0, 17.0, 34.0, 51.0, 68.0]

    def test_known_lines_from_tones(self):
        tones = ToneSet(label=strings(["mesh"]), source=strings(["gear"]),
                        kind=strings(["gear_mesh"]), fixed_hz=[0.0], speed_hz=[17 * 50.0],
                        amplitude=[1.0])  # fmt: skip
        (kl,) = known_lines_from_tones(tones, 3000.0)
        # From memory: order = mesh frequency / shaft frequency = 850 Hz / 50 Hz = 17.
        assert kl.order == pytest.approx(17.0)
        with pytest.raises(InputError):
            known_lines_from_tones(tones, 0.0)

    def test_progress(self, sweep):
        seen: list[float] = []
        s = speed_from_tacho(sweep.tacho, sweep.rate_hz)
        m = runup_map(sweep.vibration, sweep.rate_hz, s, nperseg=256, progress=seen.append)
        # 128,000 samples, hop 64: about 2000 frames, so several blocks of 512.
        assert len(seen) >= 3 and seen == sorted(seen) and seen[-1] == 1.0
        assert m.frames > 3 * 512

    def test_errors(self, sweep):
        with pytest.raises(InputError) as e:
            analyse_run_up(sweep.vibration, sweep.rate_hz)
        assert e.value.code == "no_speed"
        with pytest.raises(InputError) as e:
            analyse_run_up(sweep.vibration, sweep.rate_hz, tacho=sweep.tacho[:-5])
        assert e.value.code == "length_mismatch"
        with pytest.raises(InputError) as e:  # channels swapped
            analyse_run_up(sweep.tacho, sweep.rate_hz, tacho=sweep.vibration)
        assert e.value.code == "not_a_tacho"
        with pytest.raises(InputError) as e:  # the tacho given twice
            analyse_run_up(sweep.tacho, sweep.rate_hz, tacho=sweep.tacho)
        assert e.value.code == "not_a_vibration"
        s = speed_from_tacho(sweep.tacho, sweep.rate_hz)
        with pytest.raises(InputError) as e:
            runup_map(sweep.vibration[:20_000], sweep.rate_hz, s, nperseg=8192)
        assert e.value.code == "too_short" and e.value.limit > 20_000 / sweep.rate_hz


class TestDisplayMap:
    def test_bounded_and_keeps_peaks(self, runs):
        _rec, _units, blind, _ = runs["clean"]
        _speeds, _freqs, db = display_map(blind.map, max_speeds=200, max_freqs=600)
        assert db.shape[0] <= 200 and db.shape[1] <= 600
        # 200 × 600 float32 values are 480 kB raw: under the 1.5 MB display budget.
        assert db.nbytes <= 1.5e6
        # Reference: the loudest cell of the full map, by numpy directly.
        top = 20 * np.log10(np.nanmax(blind.map.speed_level))
        assert np.nanmax(db) == pytest.approx(top, abs=1e-3)


class TestOrderSpectrum:
    def test_constant_order_chirp(self):
        # Source: Fyfe & Munck, MSSP 11(2), 1997 — after resampling at constant angle
        # steps a constant-order component is a fixed line in the order spectrum.
        k = 12.5
        rec = simulate([Line("o", k, 0.0, 1.0)], analog=None, duration_s=10.0,
                       rpm0=600.0, rpm1=6000.0)  # fmt: skip
        s = speed_from_tacho(rec.tacho, rec.rate_hz)
        spec = order_spectrum(rec.vibration, rec.rate_hz, s, max_order=32, revs_per_segment=16)
        resolution = 1 / 16
        assert abs(spec.order[np.argmax(spec.amplitude)] - k) <= resolution
        assert spec.amplitude.max() == pytest.approx(1.0, abs=0.1)

    def test_folded_order_lands_where_predicted(self):
        # Order 40 between 10,500 and 12,000 rpm at 12.8 kS/s: true 7-8 kHz, zone 2,
        # so it reads fs − 40·r and appears at order fs/r − 40 (Lyons sec. 2.3),
        # i.e. from 24.0 (12,000 rpm) to 33.1 (10,500 rpm): not at 40.
        rec = simulate([Line("o", 40, 0.0, 1.0)], analog=None, duration_s=10.0,
                       rpm0=9000.0, rpm1=12_000.0)  # fmt: skip
        s = speed_from_tacho(rec.tacho, rec.rate_hz)
        spec = order_spectrum(rec.vibration, rec.rate_hz, s, max_order=64,
                              revs_per_segment=16, rpm_range=(10_500, 12_000))  # fmt: skip
        lo, hi = 12_800 / (12_000 / 60) - 40, 12_800 / (10_500 / 60) - 40
        peak = spec.order[np.argmax(spec.amplitude)]
        assert lo - 1 / 16 <= peak <= hi + 1 / 16
        near_40 = np.abs(spec.order - 40) <= 0.5
        assert spec.amplitude[near_40].max() < 0.1 * spec.amplitude.max()
        pred = apparent_order(40, [12_000, 10_500], 12_800)
        assert pred == pytest.approx([lo, hi])


class TestDemoSimulator:
    def test_matches_reference_simulator(self):
        # The demo generator (closed-form phase, polynomial filter response) against the
        # reference (numerical phase integration, scipy.signal.freqs).
        lines = drive_lines()
        demo = simulate_run_up(lines, duration_s=2.0, rpm_end=2000.0, noise_rms=0.0)
        ref = simulate([Line(ln.label, ln.order, ln.fixed_hz, ln.amplitude) for ln in lines],
                       duration_s=2.0, rpm1=2000.0, noise_rms=0.0)  # fmt: skip
        assert np.max(np.abs(demo.vibration - ref.vibration)) < 1e-3
