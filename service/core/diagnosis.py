"""The diagnosis of found peaks, in one place: running speed, blind families, attribution.

The diagnose use-case and the calibration harness (``tests/core/acquisitions.py``) both
call :func:`diagnose_peaks`, so the confidence tables are fitted on exactly the path
that answers requests.

Steps, in order:

1. **Running speed** (sources with a speed given): machines rarely run at the speed the
   engineer states — an induction motor slips below synchronous speed,
   ``s = (n_sync − n) / n_sync``, a few percent at rated load [1]_, and controllers and
   tachometers drift. :func:`service.core.speed.estimate_speed_for_tones` searches the
   speed ratio within ``±speed_search_pct`` (default
   :data:`service.core.speed.DEFAULT_SEARCH_PCT`, 4 %) that makes the folded tones
   explain the most peaks; a trustworthy estimate scales every speed-proportional tone.
2. **Speed tolerance**: given, or (default) twice the estimate's standard uncertainty
   when the estimate is used (at least :data:`MIN_AUTO_TOLERANCE_PCT`, 0.05 %), else
   :data:`UNESTIMATED_TOLERANCE_PCT` (the same 0.05 %). The old default, 0 %, treated the
   stated speed as exact and nothing corrected it: a 0.7 % error moves the 30th order of a
   25 Hz shaft by 5 Hz, many bins. The search corrects such an error; a wide tolerance
   instead would let high orders swallow unrelated peaks.
3. **Blind families** (:func:`service.core.harmonics.find_families`) when asked.
4. **Attribution** (:func:`service.core.attribution.attribute`), with calibrated
   confidence.

References
----------
.. [1] Common practice (no single source): slip of an induction motor
   ``s = (n_sync − n) / n_sync``, about 1–5 % at rated load.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .attribution import Attribution, attribute, frequency_tolerance_hz
from .chain import Chain
from .checks import check_range
from .harmonics import Family, find_families
from .spectrum import Peaks
from .speed import DEFAULT_SEARCH_PCT, SpeedEstimate, estimate_speed_for_tones
from .tones import ToneSet

__all__ = [
    "MIN_AUTO_TOLERANCE_PCT",
    "MOST_UNEXPLAINED",
    "UNESTIMATED_TOLERANCE_PCT",
    "Diagnosis",
    "diagnose_peaks",
]

#: Smallest automatic speed tolerance when the speed was estimated, percent: the
#: estimate's own uncertainty can come out tiny on a clean record.
MIN_AUTO_TOLERANCE_PCT = 0.05
#: Automatic speed tolerance when the speed was not estimated (search off, or an estimate
#: not trusted), percent. Kept as small as the estimated case's floor: a wide interval at
#: a high order swallows unrelated peaks (0.5 % is ±14 Hz at 2.8 kHz, enough to call a
#: folded inverter carrier a gear-mesh sideband), and an off-nameplate speed is the speed
#: search's job, with a note when most peaks stay unexplained.
UNESTIMATED_TOLERANCE_PCT = MIN_AUTO_TOLERANCE_PCT
#: More than this fraction of the peaks unexplained (with sources given) earns a note.
MOST_UNEXPLAINED = 0.5


@dataclass(frozen=True, eq=False)
class Diagnosis:
    """What :func:`diagnose_peaks` found.

    Attributes
    ----------
    attribution : Attribution
    families : list of Family
        Blind harmonic families (empty unless searched).
    speed : SpeedEstimate or None
        The running-speed estimate; None when not searched (no sources with a speed,
        search off, no peaks).
    speed_tolerance_pct : float
        Speed tolerance used, percent.
    tones : ToneSet or None
        The tones as attributed (speed-proportional parts scaled by ``speed.ratio``).
    notes : tuple of str
        Sentences about the speed and about peaks left unexplained.
    """

    attribution: Attribution
    families: list[Family]
    speed: SpeedEstimate | None
    speed_tolerance_pct: float
    tones: ToneSet | None
    notes: tuple[str, ...]


def diagnose_peaks(
    peaks: Peaks,
    chain: Chain,
    tones: ToneSet | None,
    bin_width_hz: float,
    window: str = "hann",
    speed_tolerance_pct: float | None = None,
    speed_search_pct: float = DEFAULT_SEARCH_PCT,
    band_hz: tuple[float, float] | None = None,
    level_tolerance_db: float = 10.0,
    blind: bool = False,
) -> Diagnosis:
    """Estimate the running speed, search blind families and attribute the peaks.

    Parameters
    ----------
    peaks : Peaks
        From :func:`service.core.spectrum.find_peaks`.
    chain : Chain
        The acquisition chain of the spectrum.
    tones : ToneSet or None
        Known tones at the stated speed; None without sources.
    bin_width_hz : float
        Bin width, Hz.
    window : str
        Window of the spectrum, or ``"unknown"``.
    speed_tolerance_pct : float or None
        Speed uncertainty, percent (0–50); None: automatic (see the module notes).
    speed_search_pct : float
        Half-width of the running-speed search, percent of the stated speed (0 turns
        the search off; else 0.1–20).
    band_hz : (float, float), optional
        Band of interest, Hz.
    level_tolerance_db : float
        Level tolerance of the attribution, dB.
    blind : bool
        Search harmonic families (with at least 3 peaks).

    Returns
    -------
    Diagnosis
    """
    search = check_range(speed_search_pct, "speed_search_pct", 0.0, 20.0)
    rate = chain.final_rate_hz
    notes: list[str] = []
    estimate: SpeedEstimate | None = None
    used = tones
    moving = tones is not None and len(tones) > 0 and bool(np.any(tones.speed_hz != 0.0))
    if tones is not None and moving and search > 0 and len(peaks):
        tol = frequency_tolerance_hz(bin_width_hz, window)
        estimate = estimate_speed_for_tones(
            tones, peaks.freq_hz, rate, tol, peaks.amplitude, search_pct=max(search, 0.1)
        )
        notes.append(estimate.reason)
        if estimate.trustworthy and estimate.ratio != 1.0:
            used = replace(tones, speed_hz=tones.speed_hz * estimate.ratio)
    if speed_tolerance_pct is None:
        if estimate is not None and estimate.trustworthy:
            sigma_pct = 100.0 * estimate.ratio_uncertainty
            sigma_pct = sigma_pct if np.isfinite(sigma_pct) else 0.0
            speed_tol = max(2.0 * sigma_pct, MIN_AUTO_TOLERANCE_PCT)
        else:
            speed_tol = UNESTIMATED_TOLERANCE_PCT if moving else 0.0
    else:
        speed_tol = check_range(speed_tolerance_pct, "speed_tolerance_pct", 0.0, 50.0)
    families: list[Family] = []
    if blind and len(peaks) >= 3:
        families = find_families(
            peaks.freq_hz,
            peaks.amplitude,
            peaks.floor,
            rate,
            bin_width_hz,
            attenuation=lambda f: chain.evaluate(f).attenuation_db,
        )
    att = attribute(
        peaks.freq_hz,
        peaks.amplitude,
        peaks.floor,
        chain,
        used,
        bin_width_hz,
        window=window,
        speed_tolerance_pct=speed_tol,
        band_hz=band_hz,
        level_tolerance_db=level_tolerance_db,
        families=families,
    )
    unexplained = int(np.sum(att.verdict == "unexplained"))
    if tones is not None and len(att) and unexplained > MOST_UNEXPLAINED * len(att):
        check = (
            f"at a speed tolerance of {speed_tol:.3g} %: check the stated speed (or widen "
            "speed_search_pct or speed_tolerance_pct), the sources' list and the chain"
            if moving
            else "(none of them moves with speed): check the tones' list and the chain"
        )
        notes.append(
            f"{unexplained} of {len(att)} peaks are left unexplained with the sources given "
            + check
        )
    return Diagnosis(att, families, estimate, speed_tol, used, tuple(notes))
