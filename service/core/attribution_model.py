"""The attribution's answer: explanation kinds, confidence constants and the
:class:`Explanation` and :class:`Attribution` results.

Raw score = frequency score × level score, capped at :data:`MAX_CONFIDENCE`; the stated
confidence is calibrated (:mod:`service.core.calibration`), at most 0.97: no
explanation is ever certain. An alias verdict is a hypothesis about the measurement,
not about the machine.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978 (main-lobe width of a window).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "BELOW_FLOOR_DB",
    "BELOW_FLOOR_FACTOR",
    "FAMILY_FACTOR_LOW",
    "FAMILY_FACTOR_PER_DECADE",
    "KINDS",
    "KIND_ALIAS",
    "KIND_CODE",
    "KIND_DIRECT",
    "KIND_FAMILY",
    "KIND_MIRROR",
    "MAX_CONFIDENCE",
    "MIN_CONFIDENCE",
    "MIRROR_CONFIDENCE",
    "REFINE_ERROR_BINS",
    "REFINE_ERROR_UNKNOWN_BINS",
    "SIGMA_FRACTION",
    "TIE_RATIO",
    "UNKNOWN_LEVEL_SCORE",
    "Attribution",
    "Explanation",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
ObjArray = NDArray[np.object_]


#: Explanation kinds, in the order preferred when confidences are equal.
KINDS: tuple[str, ...] = ("direct", "family", "alias", "mirror", "unexplained")


#: A peak's verdict is its best explanation's kind only from this confidence up.
MIN_CONFIDENCE = 0.3


#: No raw score is ever certain (the stated, calibrated confidence is capped at
#: :data:`service.core.calibration.MAX_CALIBRATED`, 0.97).
MAX_CONFIDENCE = 0.95


#: A second explanation at least this fraction as confident as the best is named too.
TIE_RATIO = 0.9


#: Level score when the tone's amplitude is unknown (a level that cannot be checked is
#: weaker evidence than one that agrees).
UNKNOWN_LEVEL_SCORE = 0.8


#: An explanation predicted more than this far below the floor is implausible, dB.
BELOW_FLOOR_DB = 6.0


#: ... and its level score is multiplied by this factor.
BELOW_FLOOR_FACTOR = 0.02


#: Assumed error of the refined peak frequency, bins, for a known window and for
#: ``window="unknown"`` (parabolic interpolation is worse).
REFINE_ERROR_BINS = 0.05


REFINE_ERROR_UNKNOWN_BINS = 0.1


#: The frequency score is a Gaussian of the distance outside the tone's apparent
#: interval with σ = tolerance × this fraction (so it is ~0.01 at the tolerance).
SIGMA_FRACTION = 1.0 / 3.0


#: Mirror raw score rises linearly from the analysed span's edge (fs/2.56) to fs/2.
MIRROR_CONFIDENCE = (0.25, 0.5)


#: Blind family member confidence factor: from this value at the reporting threshold ...
FAMILY_FACTOR_LOW = 0.5


#: ... plus this much per decade of chance probability below 1e-4.
FAMILY_FACTOR_PER_DECADE = 0.05


KIND_CODE = {k: i for i, k in enumerate(KINDS)}


KIND_DIRECT, KIND_FAMILY, KIND_ALIAS, KIND_MIRROR = (
    KIND_CODE[k] for k in ("direct", "family", "alias", "mirror")
)


@dataclass(frozen=True)
class Explanation:
    """One way to explain a peak.

    Attributes
    ----------
    kind : str
        ``"direct"``, ``"family"``, ``"alias"`` or ``"mirror"``.
    confidence : float
        Calibrated confidence: how often explanations of this kind and raw score were
        right on the project's simulated acquisitions
        (:func:`service.core.calibration.calibrate`), 0.02 to 0.97; a ranked alternative
        (or a candidate of an unexplained peak) uses the alternatives' tables.
    raw_confidence : float
        The raw score (frequency score × level score), 0 to :data:`MAX_CONFIDENCE`;
        ranking, the :data:`MIN_CONFIDENCE` gate and :data:`TIE_RATIO` use it.
    tone_index : int
        Index of the tone in the ToneSet; -1 for a blind family member or a mirror.
    label : str or None
        Tone label (``"carrier 1×"``), ``"7×"`` for a blind family member, None for a
        mirror.
    source : str or None
        Source label (``"inverter"``) or the blind family's label; None for a mirror.
    true_hz : float
        True frequency of the explaining tone (the image ``fs − f`` for a mirror), Hz.
    zone : int
        Nyquist zone of ``true_hz`` at the final rate (1 = in band).
    inverted : bool
        The tone lands mirrored (even zone).
    attenuation_db : float
        The chain's attenuation at ``true_hz``, dB.
    predicted_amplitude : float
        Tone amplitude × chain gain, unit of the spectrum; NaN where unknown.
    sentence : str
        One plain sentence.
    freq_error_hz : float
        Distance of the peak outside the tone's apparent interval, Hz.
    harmonic : float
        Harmonic number within the tone's family; NaN if none.
    family_index : int
        Index of the blind family (in the list given), -1 otherwise.
    """

    kind: str
    confidence: float
    raw_confidence: float
    tone_index: int
    label: str | None
    source: str | None
    true_hz: float
    zone: int
    inverted: bool
    attenuation_db: float
    predicted_amplitude: float
    sentence: str
    freq_error_hz: float = 0.0
    harmonic: float = float("nan")
    family_index: int = -1


@dataclass(frozen=True, eq=False)
class Attribution:
    """Verdicts for every peak (arrays of the peaks' length) and ranked alternatives.

    Attributes
    ----------
    freq_hz, amplitude : ndarray
        The peaks as given (Hz; linear amplitude).
    verdict : ndarray of str
        Kind of the best explanation if its raw score >= :data:`MIN_CONFIDENCE`, else
        ``"unexplained"``.
    confidence : ndarray
        Calibrated confidence of the best explanation (for an ``"unexplained"`` peak:
        of its closest candidate, as an alternative; 0 if there is no candidate at all).
    raw_confidence : ndarray
        Raw score of the best explanation (0 if there is no candidate).
    aliased : ndarray of bool
        The verdict's energy comes from above the Nyquist frequency of the final rate:
        an ``alias``, a ``mirror``, or a ``family`` member from a zone above the first.
        False for direct, in-band family members and unexplained peaks.
    source, tone_label : ndarray of str or None
        Of the verdict's explanation; None for ``"unexplained"`` and ``"mirror"``.
    true_hz : ndarray
        True frequency of the verdict's explanation, Hz; NaN if none.
    zone : ndarray of int
        Its Nyquist zone; 0 if none.
    inverted : ndarray of bool
    explanation : ndarray of str
        One sentence per peak (naming a second explanation when it is about as good).
    beyond_span : ndarray of bool
        The peak lies above the analysed span (final rate / 2.56), where the anti-alias
        filter's transition band lets folded energy in.
    in_band : ndarray of bool
        The peak lies inside the band of interest.
    alternatives : list of list of Explanation
        Per peak, up to ``max_alternatives`` explanations, best first.
    tolerance_hz : float
        Frequency tolerance used (window main-lobe half-width + refinement error), Hz.
    span_hz : float
        The analysed span, final rate / 2.56, Hz (common practice: lines = N/2.56). It
        is a convention of analysers, not a guarantee: the chain's actual rejection at
        the span edge and at the frequency folding onto it is what protects it.
    band_hz : (float, float)
        Band of interest, Hz.
    notes : tuple of str
        The chain's warnings.
    """

    freq_hz: FloatArray
    amplitude: FloatArray
    verdict: ObjArray
    confidence: FloatArray
    raw_confidence: FloatArray
    aliased: BoolArray
    source: ObjArray
    tone_label: ObjArray
    true_hz: FloatArray
    zone: IntArray
    inverted: BoolArray
    explanation: ObjArray
    beyond_span: BoolArray
    in_band: BoolArray
    alternatives: list[list[Explanation]]
    tolerance_hz: float
    span_hz: float
    band_hz: tuple[float, float]
    notes: tuple[str, ...]

    def __len__(self) -> int:
        return int(self.freq_hz.size)
