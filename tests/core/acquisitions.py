"""Random simulated acquisitions with known truth, diagnosed and scored verdict by verdict.

This is the corpus behind the confidence calibration (:mod:`service.core.calibration`,
``bench/calibrate.py``, ``tests/core/test_calibration.py``). Each seed draws one
acquisition in the spirit of the drive-unit bench of DESIGN.md §6: machine sources
(shaft orders, one or two gear meshes with sidebands, bearing tones, fan blade pass,
supply harmonics, an inverter carrier with sidebands) at a random motor speed with random
amplitudes, a few tones nobody listed (a structural resonance, a neighbour machine), and
a random chain: converter at 2.56 to 51.2 kS/s behind a Butterworth, Bessel or Chebyshev I
filter of order 2 to 8 at a random cutoff (or no filter), sometimes followed by
decimation (with scipy.signal.decimate's FIR, or an unfiltered slice). The machine runs a
little off the speed the engineer states; in blind mode no sources are given.

The record is made by :func:`tests.core.simulate.simulate_capture` (true sampling
instants, converter noise, real digital filters, slicing). The analog filter is applied
here, before calling it, with scipy.signal's own designs (``butter``, ``cheby1``,
``bessel(norm="mag")``) and ``freqs``, because ``simulate_capture`` takes an
``iirfilter`` type that cannot carry a ripple or the magnitude-normalised Bessel. The
diagnosis then runs the same shared step, with a default request's options, as
``service.usecases.diagnose.diagnose_payload``: :func:`service.core.diagnosis.diagnose_peaks`
(running-speed estimate, blind families, attribution).

What "right" means
------------------
A peak's *contributors* are the simulated tones whose apparent frequency
``|f − fs·round(f/fs)|`` (fs the final rate) lies within the peak tolerance
(``Attribution.tolerance_hz``) of the peak, and whose level in the record (amplitude ×
the analog gain × the decimation filter's gain, computed here with scipy.signal) is no
more than 20 dB below the strongest such tone and at least half the noise floor at the
peak. A verdict is right when:

- ``direct`` or ``family`` (in band): some contributor is truly in band (true frequency
  below the final Nyquist frequency);
- ``alias``: some contributor lies truly above the final Nyquist frequency and its true
  frequency is within ``tolerance_hz + 1 %`` of the stated ``true_hz`` (1 % covers the
  stated speed's offset of up to 0.8 %; so the two unfoldings ``m·fs ± f`` of one peak
  are told apart only when ``2·f`` exceeds that margin);
- ``mirror``: some contributor lies in the second zone at the image ``fs − f`` (the
  same test as an alias, with ``true_hz = fs − f``).

A peak with no contributor (noise, leakage, a window sidelobe) makes every claim wrong.
``unexplained`` is not a claim: it is counted, and left out of the verdicts'
calibration. The same rule scores every ranked alternative, and the candidates of an
unexplained peak, as explanations "not chosen" (the calibration's ``alt_`` tables).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import scipy.signal

from service.core.attribution_model import Attribution
from service.core.chain import Chain
from service.core.diagnosis import diagnose_peaks
from service.core.harmonics import Family
from service.core.sources import expand_sources, source_from_dict
from service.core.spectrum import find_peaks, noise_floor
from service.core.stages import AnalogLowpass, Decimate, Sample
from service.core.tones import ToneSet, strings

from .simulate import SimChain, decimate_taps, simulate_capture

__all__ = [
    "Acquisition",
    "Scored",
    "contributors",
    "diagnose",
    "draw",
    "reliability",
    "run_corpus",
    "score",
]

RATES_HZ = (2560.0, 5120.0, 6400.0, 10240.0, 12800.0, 25600.0, 51200.0)
FAMILIES = ("butterworth", "bessel", "chebyshev1")
#: Speed the engineer states is off the true speed by up to this fraction ...
SPEED_OFFSET = 0.008
#: A contributor is within this many dB of the strongest tone at the peak.
CONTRIBUTOR_SPREAD_DB = 20.0
#: An alias's stated true frequency matches within tolerance_hz plus this fraction.
TRUE_MATCH_FRACTION = 0.01


@dataclass(frozen=True, eq=False)
class Acquisition:
    """One random acquisition: what was measured and what the engineer tells the service."""

    seed: int
    true_hz: np.ndarray  # every simulated tone's true frequency, Hz
    amplitude: np.ndarray  # at the sensor
    sim_chain: SimChain  # without the analog stage (applied separately)
    analog: tuple[str, int, float] | None  # (family, order, cutoff Hz)
    chain: Chain  # the same chain for the service
    given: ToneSet | None  # None in blind mode
    lines: int
    duration_s: float
    noise_rms: float

    @property
    def blind(self) -> bool:
        return self.given is None


def _logu(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(np.exp(rng.uniform(np.log(lo), np.log(hi))))


def _sources(rng: np.random.Generator, rpm: float) -> list[dict[str, Any]]:
    """Machine sources like the demo bench, each present with some probability."""
    motor_hz = rpm / 60.0
    out: list[dict[str, Any]] = []
    if rng.random() < 0.8:
        out.append({"type": "shaft", "label": "motor shaft", "speed_rpm": rpm,
                    "orders": [1, 2, 3], "amplitude": _logu(rng, 0.005, 0.1)})  # fmt: skip
    z1 = int(rng.integers(11, 41))
    if rng.random() < 0.85:
        out.append({"type": "gear_mesh", "label": "first mesh", "speed_rpm": rpm,
                    "teeth": z1, "harmonics": 3, "sidebands": 1,
                    "amplitude": _logu(rng, 0.05, 1.0)})  # fmt: skip
    if rng.random() < 0.5:
        z2 = int(rng.integers(2 * z1, 4 * z1))
        out.append({"type": "gear_mesh", "label": "second mesh",
                    "speed_hz": motor_hz * z1 / z2, "teeth": int(rng.integers(13, 31)),
                    "harmonics": 3, "sidebands": 1,
                    "amplitude": _logu(rng, 0.02, 0.5)})  # fmt: skip
    if rng.random() < 0.6:
        out.append({"type": "bearing", "label": "input bearing", "speed_rpm": rpm,
                    "n_elements": int(rng.integers(7, 13)),
                    "element_diameter": float(rng.uniform(6.0, 14.0)),
                    "pitch_diameter": float(rng.uniform(35.0, 60.0)),
                    "contact_angle_deg": 0.0, "harmonics": 3,
                    "amplitude": _logu(rng, 0.005, 0.05)})  # fmt: skip
    if rng.random() < 0.6:
        out.append({"type": "blade_pass", "label": "cooling fan", "speed_rpm": rpm,
                    "blades": int(rng.integers(5, 12)), "harmonics": 2,
                    "amplitude": _logu(rng, 0.02, 0.2)})  # fmt: skip
    if rng.random() < 0.6:
        out.append({"type": "line", "label": "supply",
                    "line_hz": float(rng.choice([50.0, 60.0])),
                    "harmonics": [1, 2, 3, 5, 7],
                    "amplitude": _logu(rng, 0.002, 0.02)})  # fmt: skip
    if rng.random() < 0.7:
        out.append({"type": "pwm", "label": "inverter",
                    "carrier_hz": float(rng.choice([4000.0, 8000.0, 10000.0, 16000.0, 20000.0])),
                    "pole_pairs": int(rng.integers(2, 6)), "speed_rpm": rpm,
                    "carrier_multiples": 2, "sidebands": 2,
                    "amplitude": _logu(rng, 0.05, 0.8)})  # fmt: skip
    if not out:
        out.append({"type": "shaft", "label": "motor shaft", "speed_rpm": rpm,
                    "orders": [1, 2, 3], "amplitude": _logu(rng, 0.005, 0.1)})  # fmt: skip
    return out


def _fold(f: np.ndarray, fs: float) -> np.ndarray:
    """Apparent frequency (Oppenheim & Schafer sec. 4.2)."""
    return np.abs(f - fs * np.round(f / fs))


def _analog_gain(analog: tuple[str, int, float] | None, f: np.ndarray) -> np.ndarray:
    """|H| of the analog filter (scipy.signal designs, evaluated with freqs)."""
    if analog is None:
        return np.ones_like(f)
    family, order, fc = analog
    wc = 2 * np.pi * fc
    if family == "butterworth":
        b, a = scipy.signal.butter(order, wc, analog=True)
    elif family == "chebyshev1":
        b, a = scipy.signal.cheby1(order, 0.5, wc, analog=True)
    else:
        b, a = scipy.signal.bessel(order, wc, analog=True, norm="mag")
    _, h = scipy.signal.freqs(b, a, worN=2 * np.pi * f)
    return np.abs(h)


def draw(seed: int) -> Acquisition:
    """One random acquisition for ``seed`` (numpy default_rng)."""
    rng = np.random.default_rng(seed)
    rpm = float(rng.uniform(600.0, 12000.0))
    stated_rpm = rpm * (1.0 + rng.uniform(-SPEED_OFFSET, SPEED_OFFSET))
    tones = expand_sources([source_from_dict(s) for s in _sources(rng, stated_rpm)])
    # Sensor amplitudes: each source's level, unknown harmonics a fifth of it, and every
    # tone off by a random factor (no engineer knows amplitudes to better than that).
    amp = tones.amplitude.copy()
    for src in set(tones.source.tolist()):
        sel = tones.source == src
        main = np.nanmax(amp[sel]) if np.any(np.isfinite(amp[sel])) else 0.01
        amp[sel & ~np.isfinite(amp)] = 0.2 * main
    amp = amp * np.exp(rng.normal(0.0, 0.5, amp.size))
    true = tones.at_speed(rpm / stated_rpm)

    rate = float(rng.choice(RATES_HZ))
    roll = rng.random()
    digital: tuple[tuple[object, ...], ...] = ()
    stages: list[Any] = []
    analog: tuple[str, int, float] | None = None
    if rng.random() < 0.85:
        family = str(rng.choice(FAMILIES))
        order = int(rng.integers(2, 9))
        cutoff = rate * float(rng.uniform(0.2, 0.45))
        analog = (family, order, cutoff)
        stages.append(AnalogLowpass(family=family, order=order, cutoff_hz=cutoff,
                                    ripple_db=0.5 if family == "chebyshev1" else None))  # fmt: skip
    stages.append(Sample(rate))
    if roll < 0.2:
        m = int(rng.choice([2, 4]))
        digital = (("decimate", m, "none"),)
        stages.append(Decimate(m, "none"))
    elif roll < 0.3:
        m = int(rng.choice([2, 4]))
        digital = (("decimate", m, "fir"),)
        stages.append(Decimate(m, "fir"))
    chain = Chain(tuple(stages))
    final = chain.final_rate_hz

    # Tones nobody listed: a resonance or a neighbouring machine, anywhere to 3 fs.
    n_extra = int(rng.integers(0, 4))
    extra_f = rng.uniform(0.02, 3.0, n_extra) * final
    extra_a = np.array([_logu(rng, 0.005, 0.3) for _ in range(n_extra)])
    keep = true < 20 * rate
    true_all = np.concatenate([true[keep], extra_f])
    amp_all = np.concatenate([amp[keep], extra_a])

    blind = rng.random() < 0.35
    given: ToneSet | None = None
    if not blind:
        given = tones
        if rng.random() < 0.5:  # amplitudes not known to the engineer
            given = replace(tones, amplitude=np.full(len(tones), np.nan))
    lines = int(rng.choice([800, 1600, 3200]))
    nfft = 1 << int(np.ceil(np.log2(2.56 * lines)))
    m_total = round(rate / final)
    duration = (5 * nfft * m_total + 400 * m_total) / rate
    return Acquisition(
        seed=seed, true_hz=true_all, amplitude=amp_all,
        sim_chain=SimChain(rate_hz=rate, analog=None, digital=digital), analog=analog,
        chain=chain, given=given, lines=lines, duration_s=duration,
        noise_rms=_logu(rng, 1e-4, 3e-3),
    )  # fmt: skip


def _record_level(acq: Acquisition) -> np.ndarray:
    """Each tone's amplitude in the final record: analog gain × decimation filter gain."""
    gain = _analog_gain(acq.analog, acq.true_hz)
    rate = acq.sim_chain.rate_hz
    for step in acq.sim_chain.digital:
        m = int(step[1])  # type: ignore[call-overload]
        if step[2] == "fir":
            taps = decimate_taps(m)
            _, h = scipy.signal.freqz(taps, worN=_fold(acq.true_hz, rate), fs=rate)
            gain = gain * np.abs(h)
        rate /= m
    out: np.ndarray = acq.amplitude * gain
    return out


def diagnose(acq: Acquisition) -> tuple[Attribution, list[Family], Any]:
    """Simulate the record and diagnose it exactly as ``diagnose_payload`` does."""
    gain = _analog_gain(acq.analog, acq.true_hz)
    cap = simulate_capture(
        list(zip(acq.true_hz.tolist(), (acq.amplitude * gain).tolist(), strict=True)),
        acq.sim_chain, acq.duration_s, acq.noise_rms, seed=acq.seed, lines=acq.lines,
    )  # fmt: skip
    spec = cap.spectrum
    floor = noise_floor(spec.amplitude)
    peaks = find_peaks(spec.freq_hz, spec.amplitude, floor, threshold_db=10.0,
                       window=spec.window, max_peaks=1000)  # fmt: skip
    # The one shared step (running speed, families, attribution), as the use-case calls
    # it with a default request.
    d = diagnose_peaks(
        peaks, acq.chain, acq.given, spec.bin_width_hz, window=spec.window,
        blind=acq.blind,
    )  # fmt: skip
    att, families = d.attribution, d.families
    return att, families, peaks


@dataclass(frozen=True, eq=False)
class Scored:
    """Scored explanations of a corpus as parallel arrays, one row per explanation.

    Rows with ``rank == 0`` are the verdicts (the best explanation of a peak that was
    not left unexplained); ``rank >= 1`` are its ranked alternatives; ``rank == -1`` the
    candidates of a peak left unexplained (none was chosen). Alternatives and those
    candidates are the explanations "not chosen".
    """

    kind: np.ndarray  # str: direct / family / alias / mirror
    raw: np.ndarray  # the confidence attribute() gave
    blind: np.ndarray  # bool
    right: np.ndarray  # bool
    rank: np.ndarray  # int, 0 = the verdict, -1 = a candidate of an unexplained peak
    peak: np.ndarray  # int, running peak number over the corpus
    seed: np.ndarray  # int
    unexplained: int  # peaks left unexplained (not claims)
    peaks: int
    acquisitions: int

    @property
    def verdicts(self) -> np.ndarray:
        """Boolean mask of the verdict rows."""
        out: np.ndarray = self.rank == 0
        return out


def _right(kind: str, true_hz: float, contrib_true: np.ndarray, nyq: float, tol: float) -> bool:
    if contrib_true.size == 0:
        return False
    if kind in ("direct", "family") and true_hz < nyq:
        return bool(np.any(contrib_true < nyq))
    above = contrib_true[contrib_true > nyq]
    return bool(np.any(np.abs(above - true_hz) <= tol + TRUE_MATCH_FRACTION * above))


def contributors(acq: Acquisition, att: Attribution, floor: np.ndarray) -> list[np.ndarray]:
    """True frequencies of the tones that make each peak (see the module's definition)."""
    fs = acq.chain.final_rate_hz
    apparent = _fold(acq.true_hz, fs)
    level = _record_level(acq)
    out = []
    for i in range(len(att)):  # peaks of one acquisition
        near = np.abs(apparent - att.freq_hz[i]) <= att.tolerance_hz
        near &= level >= 0.5 * floor[i]
        if np.any(near):
            near &= level >= np.max(level[near]) * 10 ** (-CONTRIBUTOR_SPREAD_DB / 20)
        out.append(acq.true_hz[near])
    return out


def score(
    acq: Acquisition, att: Attribution, floor: np.ndarray
) -> list[list[tuple[str, float, bool, bool]]]:
    """Per peak, (kind, raw confidence, blind, right) of each ranked explanation, best
    first (also for a peak left unexplained: its candidates were all too weak).
    ``blind``: a blind family member, or a mirror found without sources (the
    calibration groups)."""
    nyq = acq.chain.final_rate_hz / 2.0
    out: list[list[tuple[str, float, bool, bool]]] = []
    for i, contrib in enumerate(contributors(acq, att, floor)):
        out.append([
            (e.kind, float(e.raw_confidence), acq.blind or e.family_index >= 0,
             _right(e.kind, e.true_hz, contrib, nyq, att.tolerance_hz))
            for e in att.alternatives[i]
        ])  # fmt: skip
    return out


def run_corpus(seeds: range | list[int]) -> Scored:
    """Draw, simulate, diagnose and score the acquisitions of ``seeds``."""
    cols: dict[str, list[Any]] = {
        k: [] for k in ("kind", "raw", "blind", "right", "rank", "peak", "seed")
    }
    unexplained = 0
    n_peaks = 0
    for s in seeds:  # one acquisition per seed
        acq = draw(s)
        att, _fams, peaks = diagnose(acq)
        for verdict, expl in zip(att.verdict, score(acq, att, peaks.floor), strict=True):
            chosen = verdict != "unexplained"
            unexplained += not chosen
            for rank, (k, c, b, ok) in enumerate(expl):
                rank = rank if chosen else -1
                for name, v in zip(cols, (k, c, b, ok, rank, n_peaks, s), strict=True):
                    cols[name].append(v)
            n_peaks += 1
    return Scored(
        kind=strings(cols["kind"]), raw=np.array(cols["raw"], dtype=np.float64),
        blind=np.array(cols["blind"], dtype=bool), right=np.array(cols["right"], dtype=bool),
        rank=np.array(cols["rank"], dtype=np.int64), peak=np.array(cols["peak"], dtype=np.int64),
        seed=np.array(cols["seed"], dtype=np.int64), unexplained=unexplained, peaks=n_peaks,
        acquisitions=len(seeds),
    )  # fmt: skip


def reliability(
    confidence: np.ndarray, right: np.ndarray, edges: np.ndarray | None = None
) -> list[tuple[float, float, int, float, float]]:
    """Reliability table: per confidence bin (lo, hi, count, stated mean, observed accuracy).

    Bins are the deciles of stated confidence, [0, 0.1), ..., [0.9, 1.0]; empty bins have
    NaN mean and accuracy.
    """
    e = np.linspace(0.0, 1.0, 11) if edges is None else edges
    idx = np.clip(np.searchsorted(e, confidence, side="right") - 1, 0, e.size - 2)
    rows = []
    for b in range(e.size - 1):  # ten bins
        sel = idx == b
        n = int(np.sum(sel))
        mean = float(np.mean(confidence[sel])) if n else float("nan")
        acc = float(np.mean(right[sel])) if n else float("nan")
        rows.append((float(e[b]), float(e[b + 1]), n, mean, acc))
    return rows
