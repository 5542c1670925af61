"""Tests for service.core.sources: machine descriptions expanded into labelled tones."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core.bearing_sources import Bearing, bearing_multiples
from service.core.electrical_sources import LineHarmonics, PwmCarrier, fundamental_from_shaft
from service.core.fixed_sources import ExplicitTones, Resonance
from service.core.rotating_sources import BladePass, GearMesh, Shaft
from service.core.source_base import speed_to_hz
from service.core.sources import SOURCE_TYPES, expand_sources, source_from_dict, source_to_dict
from service.core.tones import ToneSet

# Drive-end bearing geometry of the Case Western Reserve University bearing data set
# (deep-groove ball bearing). From memory: 9 balls, ball diameter 0.3126 in, pitch
# diameter 1.537 in, 0° contact angle.
CWRU_N, CWRU_D_BALL, CWRU_D_PITCH = 9, 0.3126, 1.537


def _by_label(tones: ToneSet) -> dict[str, float]:
    return dict(zip(tones.label.tolist(), tones.freq_hz.tolist(), strict=True))


def _bsf_reference(d: float, big_d: float, angle_deg: float) -> float:
    # Reference: Randall & Antoni, MSSP 25 (2011) 485–520, eq. for the ball spin
    # frequency, written out independently here: BSF/fr = D/(2d)·(1 − (d/D·cosφ)²).
    c = math.cos(math.radians(angle_deg))
    return big_d / (2 * d) * (1 - (d / big_d * c) ** 2)


class TestSpeedToHz:
    def test_basic(self) -> None:
        # Common practice: 1 Hz = 60 rpm; cpm of a shaft = rpm.
        assert speed_to_hz(6000, "rpm") == pytest.approx(100.0)
        assert speed_to_hz(3000, "cpm") == pytest.approx(50.0)
        assert speed_to_hz(12.5, "hz") == 12.5
        assert speed_to_hz(1800, "RPM") == pytest.approx(30.0)

    def test_edges(self) -> None:
        assert speed_to_hz(0, "rpm") == 0.0
        assert speed_to_hz(np.float32(120), "rpm") == pytest.approx(2.0)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"unit='rad/s' must be one of"):
            speed_to_hz(10, "rad/s")
        with pytest.raises(ValueError, match=r"value=-5 must be a finite number >= 0"):
            speed_to_hz(-5, "rpm")
        with pytest.raises(ValueError, match="value=nan"):
            speed_to_hz(float("nan"), "hz")
        with pytest.raises(ValueError, match="must be a number"):
            speed_to_hz("100", "hz")  # type: ignore[arg-type]


class TestFundamentalFromShaft:
    def test_basic(self) -> None:
        # Common practice: f1 = pole pairs × shaft speed; 4 pole pairs at 6000 rpm → 400 Hz.
        assert fundamental_from_shaft(100.0, 4) == pytest.approx(400.0)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"pole_pairs=0 must be an integer between 1"):
            fundamental_from_shaft(100.0, 0)
        with pytest.raises(ValueError, match=r"pole_pairs=1.5"):
            fundamental_from_shaft(100.0, 1.5)  # type: ignore[arg-type]
        with pytest.raises(ValueError, match=r"speed_hz=0 must be a finite number > 0"):
            fundamental_from_shaft(0, 4)


class TestShaft:
    def test_basic(self) -> None:
        # Hand-computed: 3000 rpm = 50 Hz; order k lies at k × 50 Hz.
        s = Shaft("motor shaft", 50.0, orders=(0.5, 1, 1.5, 2, 3))
        t = s.expand()
        assert t.label.tolist() == ["0.5×", "1×", "1.5×", "2×", "3×"]
        np.testing.assert_allclose(t.freq_hz, [25.0, 50.0, 75.0, 100.0, 150.0])
        assert set(t.source.tolist()) == {"motor shaft"}
        assert set(t.kind.tolist()) == {"shaft"}
        assert set(t.family.tolist()) == {"orders of 'motor shaft'"}
        np.testing.assert_array_equal(t.harmonic, [0.5, 1, 1.5, 2, 3])

    def test_speed_split(self) -> None:
        t = Shaft("motor shaft", 50.0).expand()
        np.testing.assert_array_equal(t.fixed_hz, 0.0)
        # Hand-computed: double speed → 100, 200, 300 Hz.
        np.testing.assert_allclose(t.at_speed(2.0), [100.0, 200.0, 300.0])

    def test_amplitudes(self) -> None:
        t = Shaft("m", 50.0, orders=(0.5, 1, 2), amplitude=3.0).expand()
        np.testing.assert_array_equal(t.amplitude, [np.nan, 3.0, np.nan])
        t = Shaft("m", 50.0, orders=(2, 3), amplitude=3.0).expand()
        np.testing.assert_array_equal(t.amplitude, [3.0, np.nan])
        t = Shaft("m", 50.0, orders=(1, 2, 3), harmonic_amplitudes=(1.0, 0.5)).expand()
        np.testing.assert_array_equal(t.amplitude, [1.0, 0.5, np.nan])
        t = Shaft("m", 50.0).expand()
        assert np.isnan(t.amplitude).all()

    def test_edges(self) -> None:
        s = Shaft("m", 50.0, orders=[1, 2])  # type: ignore[arg-type]
        assert s.orders == (1.0, 2.0)
        assert len(Shaft("m", 1.0, orders=tuple(range(1, 201))).expand()) == 200
        t = Shaft("m", 60.0, orders=(1 / 3,)).expand()
        assert t.label[0] == "0.333333×"
        assert t.freq_hz[0] == pytest.approx(20.0)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"speed_hz=0 must be a finite number > 0"):
            Shaft("m", 0)
        with pytest.raises(ValueError, match=r"speed_hz=-1"):
            Shaft("m", -1)
        with pytest.raises(ValueError, match=r"orders\[0\]=0 must be a finite number > 0"):
            Shaft("m", 50.0, orders=(0, 1))
        with pytest.raises(ValueError, match=r"orders has 0 entries; must have between 1 and 200"):
            Shaft("m", 50.0, orders=())
        with pytest.raises(ValueError, match=r"orders has 201 entries"):
            Shaft("m", 50.0, orders=tuple(range(1, 202)))
        with pytest.raises(ValueError, match=r"orders lists 2 more than once"):
            Shaft("m", 50.0, orders=(1, 2, 2))
        with pytest.raises(ValueError, match=r"orders\[0\]=5000 must be at most 1000"):
            Shaft("m", 50.0, orders=(5000,))
        with pytest.raises(ValueError, match="not both"):
            Shaft("m", 50.0, amplitude=1.0, harmonic_amplitudes=(1.0,))
        with pytest.raises(ValueError, match=r"has 4 entries; must be at most 3"):
            Shaft("m", 50.0, harmonic_amplitudes=(1.0, 1.0, 1.0, 1.0))
        with pytest.raises(ValueError, match=r"harmonic_amplitudes\[1\]=-1.0 must be"):
            Shaft("m", 50.0, harmonic_amplitudes=(1.0, -1.0))
        with pytest.raises(ValueError, match=r"amplitude=-2 must be a finite number >= 0"):
            Shaft("m", 50.0, amplitude=-2)
        with pytest.raises(ValueError, match=r"label='' must be a non-empty string"):
            Shaft("", 50.0)
        with pytest.raises(ValueError, match=r"label has 201 characters"):
            Shaft("x" * 201, 50.0)


class TestGearMesh:
    def test_basic(self) -> None:
        # Common practice: GMF = teeth × shaft speed. Hand-computed: 17 teeth at 100 Hz →
        # GMF 1700 Hz, harmonics 3400 and 5100 Hz, sidebands ± 100 and ± 200 Hz.
        t = GearMesh("first stage 17/53", 100.0, 17, harmonics=3, sidebands=2).expand()
        f = _by_label(t)
        assert f["GMF 1×"] == pytest.approx(1700.0)
        assert f["GMF 2×"] == pytest.approx(3400.0)
        assert f["GMF 3×"] == pytest.approx(5100.0)
        assert f["GMF 1× + 1×shaft"] == pytest.approx(1800.0)
        assert f["GMF 1× − 2×shaft"] == pytest.approx(1500.0)
        assert f["GMF 3× + 2×shaft"] == pytest.approx(5300.0)
        np.testing.assert_allclose(
            np.sort(t.freq_hz),
            np.concatenate(
                [
                    [1500, 1600, 1700, 1800, 1900],
                    [3200, 3300, 3400, 3500, 3600],
                    [4900, 5000, 5100, 5200, 5300],
                ]
            ),
        )
        main = t.family == "gear mesh of 'first stage 17/53'"
        assert main.sum() == 3
        np.testing.assert_array_equal(t.harmonic[main], [1, 2, 3])
        assert np.isnan(t.harmonic[~main]).all()
        assert set(t.kind.tolist()) == {"gear_mesh"}

    def test_mating_shaft(self) -> None:
        # Hand-computed: mating gear of 53 teeth turns at 100·17/53 = 32.0755 Hz.
        fm = 100.0 * 17 / 53
        t = GearMesh("g", 100.0, 17, harmonics=1, sidebands=1, mating_speed_hz=fm).expand()
        f = _by_label(t)
        assert len(t) == 5
        assert f["GMF 1× + 1×mating shaft"] == pytest.approx(1732.0755, abs=1e-4)
        assert f["GMF 1× − 1×mating shaft"] == pytest.approx(1667.9245, abs=1e-4)

    def test_speed_split(self) -> None:
        t = GearMesh("g", 100.0, 17, harmonics=2, sidebands=1).expand()
        np.testing.assert_array_equal(t.fixed_hz, 0.0)
        np.testing.assert_allclose(t.at_speed(2.0), 2 * t.freq_hz)

    def test_amplitudes(self) -> None:
        t = GearMesh("g", 100.0, 17, harmonics=2, sidebands=1, amplitude=4.0).expand()
        f = dict(zip(t.label.tolist(), t.amplitude.tolist(), strict=True))
        assert f["GMF 1×"] == 4.0
        assert np.isnan(f["GMF 2×"]) and np.isnan(f["GMF 1× + 1×shaft"])
        t = GearMesh("g", 100.0, 17, harmonics=2, sidebands=0, harmonic_amplitudes=(4, 2)).expand()
        np.testing.assert_array_equal(t.amplitude, [4.0, 2.0])

    def test_edges(self) -> None:
        t = GearMesh("g", 100.0, 17, harmonics=2, sidebands=0).expand()
        assert t.label.tolist() == ["GMF 1×", "GMF 2×"]
        # One tooth: GMF 1× − 1×shaft = 0 Hz and − 2×shaft < 0 are dropped.
        t = GearMesh("g", 10.0, 1, harmonics=1, sidebands=2).expand()
        np.testing.assert_allclose(np.sort(t.freq_hz), [10.0, 20.0, 30.0])
        g = GearMesh("g", 10.0, 17.0, harmonics=3.0)  # type: ignore[arg-type]
        assert g.teeth == 17 and isinstance(g.teeth, int)
        assert g.mesh_hz == pytest.approx(170.0)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"teeth=0 must be an integer between 1 and 10000"):
            GearMesh("g", 100.0, 0)
        with pytest.raises(ValueError, match=r"teeth=17.5"):
            GearMesh("g", 100.0, 17.5)  # type: ignore[arg-type]
        with pytest.raises(ValueError, match=r"teeth=True"):
            GearMesh("g", 100.0, True)
        with pytest.raises(ValueError, match=r"harmonics=0 must be an integer between 1 and 100"):
            GearMesh("g", 100.0, 17, harmonics=0)
        with pytest.raises(ValueError, match=r"harmonics=101"):
            GearMesh("g", 100.0, 17, harmonics=101)
        with pytest.raises(ValueError, match=r"sidebands=51 must be an integer between 0 and 50"):
            GearMesh("g", 100.0, 17, sidebands=51)
        with pytest.raises(ValueError, match=r"sidebands=-1"):
            GearMesh("g", 100.0, 17, sidebands=-1)
        with pytest.raises(ValueError, match=r"mating_speed_hz=0 must be"):
            GearMesh("g", 100.0, 17, mating_speed_hz=0)


class TestBearingMultiples:
    def test_basic(self) -> None:
        m = bearing_multiples(CWRU_N, CWRU_D_BALL, CWRU_D_PITCH, 0.0)
        # Source: defect-frequency multiples published with the Case Western Reserve
        # University bearing data set, drive-end bearing (× shaft speed).
        assert m["BPFI"] == pytest.approx(5.4152, abs=5e-5)
        assert m["BPFO"] == pytest.approx(3.5848, abs=5e-5)
        assert m["FTF"] == pytest.approx(0.3983, abs=5e-5)
        # From memory: the same table lists BSF 4.7135, i.e. twice the spin frequency
        # (a ball defect strikes both races).
        assert 2 * m["BSF"] == pytest.approx(4.7135, abs=5e-4)
        assert m["BSF"] == pytest.approx(_bsf_reference(CWRU_D_BALL, CWRU_D_PITCH, 0.0))

    def test_identities(self) -> None:
        # Source: follow from the formulas in Randall & Antoni, MSSP 25 (2011), sec. 2.1:
        # BPFO + BPFI = n·fr and BPFO = n·FTF.
        m = bearing_multiples(CWRU_N, CWRU_D_BALL, CWRU_D_PITCH)
        assert m["BPFO"] + m["BPFI"] == pytest.approx(CWRU_N)
        assert m["BPFO"] == pytest.approx(CWRU_N * m["FTF"])

    @settings(max_examples=60, deadline=None)
    @given(
        n=st.integers(3, 1000),
        d=st.floats(0.1, 100.0),
        ratio=st.floats(0.01, 0.95),
        angle=st.floats(0.0, 89.9),
    )
    def test_identities_any_geometry(self, n: int, d: float, ratio: float, angle: float) -> None:
        # Source: Randall & Antoni, MSSP 25 (2011), sec. 2.1 (identities of the formulas);
        # BSF checked against the formula written out independently in this file.
        big_d = d / ratio
        m = bearing_multiples(n, d, big_d, angle)
        assert m["BPFO"] + m["BPFI"] == pytest.approx(n, rel=1e-12)
        assert m["BPFO"] == pytest.approx(n * m["FTF"], rel=1e-12)
        assert m["BSF"] == pytest.approx(_bsf_reference(d, big_d, angle), rel=1e-12)
        assert 0 < m["FTF"] < 0.5  # the cage turns slower than half the shaft speed

    def test_edges(self) -> None:
        # A contact angle lowers d/D·cosφ; at 60° cos φ = 0.5 exactly.
        m = bearing_multiples(10, 1.0, 5.0, 60.0)
        # Hand-computed: d/D·cosφ = 0.1 → FTF 0.45, BPFO 4.5, BPFI 5.5, BSF 2.5·0.99.
        assert m["FTF"] == pytest.approx(0.45)
        assert m["BPFO"] == pytest.approx(4.5)
        assert m["BPFI"] == pytest.approx(5.5)
        assert m["BSF"] == pytest.approx(2.475)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"element_diameter=2.0 must be less than"):
            bearing_multiples(9, 2.0, 1.5)
        with pytest.raises(ValueError, match=r"element_diameter=1.5 must be less than"):
            bearing_multiples(9, 1.5, 1.5)
        with pytest.raises(ValueError, match=r"n_elements=2 must be an integer between 3"):
            bearing_multiples(2, 0.3, 1.5)
        with pytest.raises(ValueError, match=r"contact_angle_deg=90 must be >= 0 and < 90"):
            bearing_multiples(9, 0.3, 1.5, 90)
        with pytest.raises(ValueError, match=r"contact_angle_deg=-1"):
            bearing_multiples(9, 0.3, 1.5, -1)
        with pytest.raises(ValueError, match=r"element_diameter=0 must be a finite number > 0"):
            bearing_multiples(9, 0, 1.5)


class TestBearing:
    def test_basic(self) -> None:
        fr = 29.95  # Hz, about 1797 rpm
        t = Bearing("input shaft bearing", fr, CWRU_N, CWRU_D_BALL, CWRU_D_PITCH).expand()
        assert len(t) == 12
        f = _by_label(t)
        # Source: CWRU drive-end multiples (see TestBearingMultiples) × shaft speed.
        assert f["BPFI 1×"] == pytest.approx(5.4152 * fr, rel=2e-5)
        assert f["BPFI 3×"] == pytest.approx(3 * 5.4152 * fr, rel=2e-5)
        assert f["BPFO 2×"] == pytest.approx(2 * 3.5848 * fr, rel=2e-5)
        assert f["FTF 1×"] == pytest.approx(0.3983 * fr, rel=2e-4)
        # Reference: independent BSF formula; "BSF 2×" is the ball-defect rate.
        bsf = _bsf_reference(CWRU_D_BALL, CWRU_D_PITCH, 0.0) * fr
        assert f["BSF 1×"] == pytest.approx(bsf)
        assert f["BSF 2×"] == pytest.approx(2 * bsf)
        i = t.label.tolist().index("BPFI 3×")
        assert t.family[i] == "BPFI of 'input shaft bearing'"
        assert t.harmonic[i] == 3
        assert t.source[i] == "input shaft bearing" and t.kind[i] == "bearing"

    def test_speed_split(self) -> None:
        t = Bearing("b", 30.0, 9, 0.3126, 1.537).expand()
        np.testing.assert_array_equal(t.fixed_hz, 0.0)
        np.testing.assert_allclose(t.at_speed(2.0), 2 * t.freq_hz)

    def test_defects_and_amplitudes(self) -> None:
        t = Bearing(
            "b", 30.0, 9, 0.3126, 1.537, harmonics=2, defects=("bpfi", "BPFO"), amplitude=1.0
        ).expand()
        # Output follows FTF, BPFO, BPFI, BSF whatever the given sequence.
        assert t.label.tolist() == ["BPFO 1×", "BPFO 2×", "BPFI 1×", "BPFI 2×"]
        np.testing.assert_array_equal(t.amplitude, [1.0, np.nan, 1.0, np.nan])
        t = Bearing("b", 30.0, 9, 0.3126, 1.537, harmonics=2, harmonic_amplitudes=(2, 1)).expand()
        np.testing.assert_array_equal(t.amplitude, [2.0, 1.0] * 4)

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"element_diameter=1.6 must be less than"):
            Bearing("b", 30.0, 9, 1.6, 1.537)
        with pytest.raises(ValueError, match=r"harmonics=0"):
            Bearing("b", 30.0, 9, 0.3126, 1.537, harmonics=0)
        with pytest.raises(ValueError, match=r"defects\[0\]='cage' must be one of"):
            Bearing("b", 30.0, 9, 0.3126, 1.537, defects=("cage",))
        with pytest.raises(ValueError, match=r"at most once, and at least one"):
            Bearing("b", 30.0, 9, 0.3126, 1.537, defects=("BPFO", "bpfo"))
        with pytest.raises(ValueError, match=r"at least one"):
            Bearing("b", 30.0, 9, 0.3126, 1.537, defects=())
        with pytest.raises(ValueError, match=r"speed_hz=-30"):
            Bearing("b", -30, 9, 0.3126, 1.537)


class TestBladePass:
    def test_basic(self) -> None:
        # Common practice: BPF = blades × rotor speed. Hand-computed: 7 blades at 3000 rpm.
        t = BladePass("cooling fan", speed_to_hz(3000, "rpm"), 7).expand()
        assert t.label.tolist() == ["BPF 1×", "BPF 2×", "BPF 3×"]
        np.testing.assert_allclose(t.freq_hz, [350.0, 700.0, 1050.0])
        assert set(t.family.tolist()) == {"blade pass of 'cooling fan'"}
        np.testing.assert_array_equal(t.fixed_hz, 0.0)
        np.testing.assert_allclose(t.at_speed(2.0), [700.0, 1400.0, 2100.0])

    def test_edges(self) -> None:
        t = BladePass("f", 50.0, 1, harmonics=1, amplitude=0.0).expand()
        assert t.amplitude.tolist() == [0.0]
        assert len(BladePass("f", 50.0, 7, harmonics=100).expand()) == 100

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"blades=0 must be an integer between 1 and 1000"):
            BladePass("f", 50.0, 0)
        with pytest.raises(ValueError, match=r"harmonics=0"):
            BladePass("f", 50.0, 7, harmonics=0)


class TestLineHarmonics:
    def test_basic(self) -> None:
        # Hand-computed: 50 Hz supply, harmonics 1, 2, 3, 5, 7.
        t = LineHarmonics("mains").expand()
        assert t.label.tolist() == ["line 1×", "line 2×", "line 3×", "line 5×", "line 7×"]
        np.testing.assert_allclose(t.freq_hz, [50.0, 100.0, 150.0, 250.0, 350.0])
        np.testing.assert_array_equal(t.harmonic, [1, 2, 3, 5, 7])
        assert set(t.family.tolist()) == {"harmonics of 'mains'"}
        assert set(t.kind.tolist()) == {"line"}

    def test_speed_split(self) -> None:
        t = LineHarmonics("mains", 60.0, harmonics=3).expand()
        np.testing.assert_array_equal(t.speed_hz, 0.0)
        np.testing.assert_allclose(t.at_speed(2.0), [60.0, 120.0, 180.0])

    def test_edges(self) -> None:
        s = LineHarmonics("mains", 60.0, harmonics=4)
        assert s.harmonics == (1, 2, 3, 4)
        t = LineHarmonics("m", 50.0, harmonics=(1, 3), harmonic_amplitudes=(1.0,)).expand()
        np.testing.assert_array_equal(t.amplitude, [1.0, np.nan])

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"harmonics=0 must be an integer between 1 and 100"):
            LineHarmonics("m", harmonics=0)
        with pytest.raises(ValueError, match=r"harmonics\[1\]=0"):
            LineHarmonics("m", harmonics=(1, 0))
        with pytest.raises(ValueError, match=r"harmonics lists 3 more than once"):
            LineHarmonics("m", harmonics=(3, 3))
        with pytest.raises(ValueError, match=r"line_hz=0 must be a finite number > 0"):
            LineHarmonics("m", line_hz=0)


def _pwm_legs(
    f1: float, fc: float, depth: float, phases: tuple[float, ...], n: int = 2**21
) -> list[np.ndarray]:
    """Naturally sampled sine-triangle phase legs (±1) over one fundamental period."""
    t = np.arange(n) / (n * f1)
    x = (fc * t) % 1.0
    carrier = 4.0 * np.abs(x - 0.5) - 1.0  # triangle between −1 and 1
    return [np.where(depth * np.sin(2 * np.pi * f1 * t - p) > carrier, 1.0, -1.0) for p in phases]


def _strong_lines(
    wave: np.ndarray, f1: float, fc: float, m_max: int, n_max: int, threshold_db: float
) -> set[tuple[int, int]]:
    """(m, signed n) of lines within ± n_max·f1 of each carrier multiple above threshold."""
    amp = 2.0 * np.abs(np.fft.rfft(wave)) / wave.size  # bin k = k·f1 (one period)
    ref = amp[1]  # the fundamental
    out = set()
    for m in range(1, m_max + 1):
        k0 = round(m * fc / f1)
        for n in range(-n_max, n_max + 1):
            if 20 * np.log10(amp[k0 + n] / ref) > threshold_db:
                out.add((m, n))
    return out


def _predicted(src: PwmCarrier) -> set[tuple[int, int]]:
    t = src.expand()
    m = np.rint(t.fixed_hz / src.carrier_hz).astype(int)
    n = np.rint(t.speed_hz / src.fundamental_hz).astype(int)
    return set(zip(m.tolist(), n.tolist(), strict=True))


class TestPwmCarrier:
    def test_basic(self) -> None:
        # Source: Holmes & Lipo 2003 — lines at m·fc ± n·f1 only where m + n is odd.
        t = PwmCarrier("inverter", 10_000.0, 50.0, carrier_multiples=2, sidebands=4).expand()
        f = _by_label(t)
        assert f["carrier 1×"] == pytest.approx(10_000.0)
        assert f["carrier 1× + 2·f1"] == pytest.approx(10_100.0)
        assert f["carrier 1× − 4·f1"] == pytest.approx(9_800.0)
        assert f["carrier 2× + 1·f1"] == pytest.approx(20_050.0)
        assert f["carrier 2× − 3·f1"] == pytest.approx(19_850.0)
        n1 = np.rint(t.speed_hz[t.fixed_hz == 10_000.0] / 50.0).astype(int)
        n2 = np.rint(t.speed_hz[t.fixed_hz == 20_000.0] / 50.0).astype(int)
        assert sorted(n1.tolist()) == [-4, -2, 0, 2, 4]  # m = 1: only even n
        assert sorted(n2.tolist()) == [-3, -1, 1, 3]  # m = 2: only odd n
        assert len(t) == 9
        carrier = t.family == "carrier multiples of 'inverter'"
        assert t.label[carrier].tolist() == ["carrier 1×"]
        assert t.harmonic[carrier].tolist() == [1.0]
        assert set(t.kind.tolist()) == {"pwm"}

    def test_phase_leg_simulation(self) -> None:
        # Reference: numpy simulation of a naturally sampled sine-triangle phase leg
        # (fc = 10 kHz, f1 = 50 Hz, modulation depth 0.8, one fundamental period so every
        # line falls on a bin), FFT; lines above −60 dB re the fundamental within
        # ± 4·f1 of each carrier multiple must be exactly the predicted ones.
        f1, fc = 50.0, 10_000.0
        (leg,) = _pwm_legs(f1, fc, 0.8, (0.0,))
        src = PwmCarrier("inv", fc, f1, carrier_multiples=3, sidebands=4)
        strong = _strong_lines(leg, f1, fc, 3, 4, -60.0)
        assert strong == _predicted(src)
        assert (1, 1) not in strong and (2, 0) not in strong  # m + n even: absent

    def test_line_to_line_simulation(self) -> None:
        # Reference: the same simulation for legs a and b (sines 120° apart); their
        # difference is the line-to-line voltage, where triplen sidebands cancel
        # (Holmes & Lipo 2003).
        f1, fc = 50.0, 10_000.0
        a, b = _pwm_legs(f1, fc, 0.8, (0.0, 2 * np.pi / 3))
        src = PwmCarrier("inv", fc, f1, carrier_multiples=3, sidebands=5, line_to_line=True)
        strong = _strong_lines(a - b, f1, fc, 3, 5, -60.0)
        assert strong == _predicted(src)
        assert (1, 0) not in strong and (2, 3) not in strong

    def test_speed_split(self) -> None:
        t = PwmCarrier("inv", 10_000.0, 50.0, carrier_multiples=1, sidebands=2).expand()
        assert t.label.tolist() == ["carrier 1× − 2·f1", "carrier 1×", "carrier 1× + 2·f1"]
        np.testing.assert_array_equal(t.fixed_hz, 10_000.0)
        np.testing.assert_allclose(t.speed_hz, [-100.0, 0.0, 100.0])
        # Hand-computed: at double speed f1 = 100 Hz → 9800, 10000, 10200 Hz.
        np.testing.assert_allclose(t.at_speed(2.0), [9_800.0, 10_000.0, 10_200.0])

    def test_edges(self) -> None:
        # Lower sidebands at or below 0 Hz are dropped: fc = 100 Hz, f1 = 50 Hz.
        t = PwmCarrier("inv", 100.0, 50.0, carrier_multiples=1, sidebands=4).expand()
        np.testing.assert_allclose(np.sort(t.freq_hz), [100.0, 200.0, 300.0])
        t = PwmCarrier("inv", 10_000.0, 50.0, carrier_multiples=2, sidebands=0).expand()
        assert t.label.tolist() == ["carrier 1×"]
        t = PwmCarrier("inv", 10_000.0, 50.0, sidebands=2, amplitude=5.0).expand()
        assert t.amplitude[t.label == "carrier 1×"].tolist() == [5.0]
        assert np.isnan(t.amplitude[t.label != "carrier 1×"]).all()
        t = PwmCarrier("inv", 10_000.0, 50.0, line_to_line=True, amplitude=5.0).expand()
        main = t.amplitude == 5.0
        assert sorted(t.label[main].tolist()) == ["carrier 1× + 2·f1", "carrier 1× − 2·f1"]

    def test_from_shaft(self) -> None:
        # Demo scenario: 4 pole pairs at 6000 rpm → f1 = 400 Hz.
        s = PwmCarrier.from_shaft("inverter", 10_000.0, speed_to_hz(6000, "rpm"), 4, sidebands=1)
        assert s.fundamental_hz == pytest.approx(400.0)
        assert s.sidebands == 1

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"carrier_hz=0 must be a finite number > 0"):
            PwmCarrier("inv", 0, 50.0)
        with pytest.raises(ValueError, match=r"fundamental_hz=-50"):
            PwmCarrier("inv", 10_000.0, -50)
        with pytest.raises(ValueError, match=r"carrier_multiples=0 must be an integer"):
            PwmCarrier("inv", 10_000.0, 50.0, carrier_multiples=0)
        with pytest.raises(ValueError, match=r"sidebands=51"):
            PwmCarrier("inv", 10_000.0, 50.0, sidebands=51)
        with pytest.raises(ValueError, match=r"line_to_line='yes' must be true or false"):
            PwmCarrier("inv", 10_000.0, 50.0, line_to_line="yes")  # type: ignore[arg-type]


class TestResonance:
    def test_basic(self) -> None:
        t = Resonance("accelerometer mount", 25_000.0, amplitude=0.2).expand()
        assert t.label.tolist() == ["resonance"]
        assert t.fixed_hz.tolist() == [25_000.0] and t.speed_hz.tolist() == [0.0]
        assert t.amplitude.tolist() == [0.2]
        assert t.kind.tolist() == ["resonance"]
        assert t.at_speed(2.0).tolist() == [25_000.0]

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"freq_hz=inf must be a finite number > 0"):
            Resonance("r", float("inf"))


class TestExplicitTones:
    def test_basic(self) -> None:
        t = ExplicitTones("known lines", (120.0, 2_500.5), tone_labels=("pump", "hum")).expand()
        assert t.label.tolist() == ["pump", "hum"]
        assert t.fixed_hz.tolist() == [120.0, 2_500.5]
        assert set(t.kind.tolist()) == {"tone"}
        assert np.isnan(t.amplitude).all()
        t = ExplicitTones("x", [1.0, 2.5]).expand()  # type: ignore[arg-type]
        assert t.label.tolist() == ["1 Hz", "2.5 Hz"]

    def test_speed_split(self) -> None:
        fixed = ExplicitTones("x", (100.0, 200.0)).expand()
        np.testing.assert_allclose(fixed.at_speed(2.0), [100.0, 200.0])
        moving = ExplicitTones("x", (100.0, 200.0), scales_with_speed=True).expand()
        np.testing.assert_allclose(moving.at_speed(2.0), [200.0, 400.0])

    def test_edges(self) -> None:
        t = ExplicitTones("x", np.linspace(1.0, 1e5, 100_000)).expand()  # type: ignore[arg-type]
        assert len(t) == 100_000
        t = ExplicitTones("x", (1.0, 2.0), amplitudes=(1.0, float("nan"))).expand()
        np.testing.assert_array_equal(t.amplitude, [1.0, np.nan])
        t = ExplicitTones("x", (1.0, 2.0), amplitude=3.0).expand()
        np.testing.assert_array_equal(t.amplitude, [3.0, 3.0])

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"freq_hz has 0 entries"):
            ExplicitTones("x", ())
        with pytest.raises(ValueError, match=r"freq_hz has 100001 entries"):
            ExplicitTones("x", tuple(np.ones(100_001).tolist()))
        with pytest.raises(ValueError, match=r"freq_hz\[1\]=-3.0 must be a finite number > 0"):
            ExplicitTones("x", (1.0, -3.0))
        with pytest.raises(ValueError, match=r"tone_labels has 1 entries; expected 2"):
            ExplicitTones("x", (1.0, 2.0), tone_labels=("a",))
        with pytest.raises(ValueError, match=r"amplitudes has 3 entries; expected 2"):
            ExplicitTones("x", (1.0, 2.0), amplitudes=(1.0, 1.0, 1.0))
        with pytest.raises(ValueError, match=r"not both"):
            ExplicitTones("x", (1.0,), amplitudes=(1.0,), amplitude=1.0)
        with pytest.raises(ValueError, match=r"freq_hz=5.0 must be a list"):
            ExplicitTones("x", 5.0)  # type: ignore[arg-type]


def _demo_sources() -> list:
    """Invented demo scenario (service/demo.py): drive unit on an end-of-line bench, 6000 rpm."""
    motor = speed_to_hz(6000, "rpm")
    return [
        Shaft("motor shaft", motor, orders=(0.5, 1, 2), amplitude=0.3),
        GearMesh("first stage 17/53", motor, 17, mating_speed_hz=motor * 17 / 53),
        Bearing("input shaft bearing", motor, 9, 7.9, 39.0),
        BladePass("cooling fan", motor, 7),
        LineHarmonics("mains"),
        PwmCarrier.from_shaft("inverter", 10_000.0, motor, 4),
        Resonance("accelerometer mount", 28_000.0),
        ExplicitTones("bench lines", (1_234.0,)),
    ]


class TestExpandSources:
    def test_basic(self) -> None:
        sources = _demo_sources()
        t = expand_sources(sources)
        parts = [s.expand() for s in sources]
        assert len(t) == sum(len(p) for p in parts)
        np.testing.assert_array_equal(t.freq_hz, np.concatenate([p.freq_hz for p in parts]))
        assert set(t.source.tolist()) == {s.label for s in sources}
        assert set(t.kind.tolist()) == {
            "shaft", "gear_mesh", "bearing", "blade_pass", "line", "pwm", "resonance", "tone"
        }  # fmt: skip

    def test_edges(self) -> None:
        assert len(expand_sources([])) == 0

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"sources\[1\] is a dict; expected one of"):
            expand_sources([Shaft("m", 50.0), {"type": "shaft"}])  # type: ignore[list-item]


class TestSourceFromDict:
    def test_basic(self) -> None:
        a = source_from_dict({"type": "shaft", "label": "m", "speed_rpm": 6000})
        b = source_from_dict({"type": "shaft", "label": "m", "speed_cpm": 6000})
        c = source_from_dict({"type": "shaft", "label": "m", "speed_hz": 100})
        assert a == b == c == Shaft("m", 100.0)
        g = source_from_dict(
            {
                "type": "gear_mesh",
                "label": "g",
                "speed_rpm": 6000,
                "teeth": 17,
                "mating_speed_rpm": 6000 * 17 / 53,
                "sidebands": 1,
            }
        )
        assert isinstance(g, GearMesh)
        assert g.mating_speed_hz == pytest.approx(100.0 * 17 / 53)
        bearing = source_from_dict(
            {
                "type": "bearing",
                "label": "b",
                "speed_hz": 30,
                "n_elements": 9,
                "element_diameter": 0.3126,
                "pitch_diameter": 1.537,
                "defects": ["BPFO"],
            }
        )
        assert isinstance(bearing, Bearing) and bearing.defects == ("BPFO",)
        pwm = source_from_dict(
            {"type": "pwm", "label": "i", "carrier_hz": 1e4, "speed_rpm": 6000, "pole_pairs": 4}
        )
        assert isinstance(pwm, PwmCarrier) and pwm.fundamental_hz == pytest.approx(400.0)
        assert SOURCE_TYPES["tones"] is ExplicitTones
        assert set(SOURCE_TYPES) == {
            "shaft", "gear_mesh", "bearing", "blade_pass", "line", "pwm", "resonance", "tones"
        }  # fmt: skip

    def test_edges(self) -> None:
        # None means "not given": defaults apply.
        s = source_from_dict(
            {"type": "gear_mesh", "label": "g", "speed_hz": 10, "teeth": 5, "speed_rpm": None}
        )
        assert s == GearMesh("g", 10.0, 5)
        t = source_from_dict({"type": "tones", "label": "x", "freq_hz": [1.0, 2.0]})
        assert t == ExplicitTones("x", (1.0, 2.0))

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match=r"unknown source type 'x'; expected one of shaft"):
            source_from_dict({"type": "x", "label": "m"})
        with pytest.raises(ValueError, match=r"unknown source type None"):
            source_from_dict({"label": "m"})
        with pytest.raises(ValueError, match=r"unknown source type \['shaft'\]"):
            source_from_dict({"type": ["shaft"], "label": "m"})
        with pytest.raises(ValueError, match=r"got speed_hz, speed_rpm; give exactly one"):
            source_from_dict({"type": "shaft", "label": "m", "speed_hz": 1, "speed_rpm": 60})
        with pytest.raises(ValueError, match=r"needs a speed: give exactly one of speed_hz"):
            source_from_dict({"type": "shaft", "label": "m"})
        with pytest.raises(ValueError, match=r"speed_rpm=-6000 must be a finite number > 0"):
            source_from_dict({"type": "shaft", "label": "m", "speed_rpm": -6000})
        with pytest.raises(ValueError, match=r"element_diameter=2 must be less than"):
            source_from_dict(
                {
                    "type": "bearing",
                    "label": "b",
                    "speed_hz": 30,
                    "n_elements": 9,
                    "element_diameter": 2,
                    "pitch_diameter": 1,
                }
            )
        with pytest.raises(ValueError, match=r"harmonics=0 must be an integer between 1 and 100"):
            source_from_dict(
                {"type": "blade_pass", "label": "f", "speed_hz": 50, "blades": 7, "harmonics": 0}
            )
        with pytest.raises(ValueError, match=r"unknown field 'rpm' for source type 'shaft'"):
            source_from_dict({"type": "shaft", "label": "m", "speed_hz": 50, "rpm": 3000})
        with pytest.raises(ValueError, match=r"source type 'gear_mesh' needs field 'teeth'"):
            source_from_dict({"type": "gear_mesh", "label": "g", "speed_hz": 50})
        with pytest.raises(ValueError, match=r"needs both a shaft speed"):
            source_from_dict({"type": "pwm", "label": "i", "carrier_hz": 1e4, "pole_pairs": 4})
        with pytest.raises(ValueError, match=r"give fundamental_hz, or a shaft speed"):
            source_from_dict(
                {
                    "type": "pwm",
                    "label": "i",
                    "carrier_hz": 1e4,
                    "fundamental_hz": 50,
                    "speed_hz": 100,
                    "pole_pairs": 4,
                }
            )
        with pytest.raises(ValueError, match=r"must be an object with a 'type' key"):
            source_from_dict([("type", "shaft")])  # type: ignore[arg-type]


class TestSourceToDict:
    def test_basic(self) -> None:
        for s in _demo_sources():
            d = source_to_dict(s)
            assert d["type"] in SOURCE_TYPES
            assert source_from_dict(d) == s
        d = source_to_dict(Shaft("m", 50.0))
        assert d == {
            "type": "shaft",
            "label": "m",
            "speed_hz": 50.0,
            "orders": [1.0, 2.0, 3.0],
            "amplitude": None,
            "harmonic_amplitudes": None,
        }

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="is not a source type"):
            source_to_dict(object())  # type: ignore[arg-type]
