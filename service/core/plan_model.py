"""The plan search's request and results: :class:`PlanRequest`, :class:`Plan`,
:class:`ToneAlias` and :class:`RejectedOption` (with its named rejection codes).

Levels are ``20·log10(amplitude)`` in dB re one unit of the user's amplitude unit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.core.chain import Chain
from service.core.stages import SensorResonance
from service.core.tones import ToneSet

from .analysis_lines import STANDARD_LINES, RecordLength
from .filter_catalogue import FilterOption

__all__ = [
    "ALIAS_ABOVE_LIMIT",
    "API_FAILURE",
    "BAND_LOSS_TOO_HIGH",
    "DEFAULT_MAX_BAND_LOSS_DB",
    "PASSES",
    "REJECTION_CODES",
    "RESOLUTION_NOT_MET",
    "SPAN_TOO_SHORT",
    "Plan",
    "PlanRequest",
    "RejectedOption",
    "ToneAlias",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


DEFAULT_MAX_BAND_LOSS_DB = 3.1  # a Butterworth's -3.01 dB point on the band edge passes


@dataclass(frozen=True)
class PlanRequest:
    """What the plan must achieve and what it may choose from.

    Attributes
    ----------
    tones : ToneSet
        Tones at the sensor at nominal speed (amplitudes in the user's unit, NaN where
        unknown).
    band_hz : (float, float)
        Band of interest, Hz, ``0 <= low < high``.
    rejection_db : float, optional
        Required alias rejection, dB below the strongest tone in the band (0 to 300).
    floor : float, optional
        Required alias level, absolute, in the amplitude unit (> 0). Exactly one of
        ``rejection_db`` and ``floor``.
    speed_range : (float, float)
        Minimum and maximum speed as factors of nominal (1 = nominal); see
        :func:`speed_range_from_tolerance` for a ± tolerance.
    nominal_rpm : float, optional
        Nominal speed, rpm; lets sentences give speeds in rpm instead of percent.
    bin_width_hz : float, optional
        Required bin width, Hz (at most this wide).
    resolve : (str, str), optional
        Two tones (label or ``"source: label"``) that must be resolved over the whole
        speed range; the bin width must be at most their smallest separation divided
        by the window's main-lobe width in bins.
    window : str
        Analysis window, see :func:`resolution_bins`.
    rates_hz : tuple of float, optional
        Candidate sample rates, Hz; default the ``rate_series``.
    rate_series : {"converter", "analyser"}
        Common series used when ``rates_hz`` is not given (:data:`CONVERTER_RATES_HZ`,
        :data:`ANALYSER_RATES_HZ`).
    filters : tuple of FilterOption, optional
        Candidate anti-alias filters; default :data:`DEFAULT_FILTERS`.
    lines_options : tuple of int
        Analysis lines the analyser offers; default :data:`STANDARD_LINES`.
    averages : int
        Records to average, 1 to 100,000.
    overlap_pct : float
        Overlap of consecutive records, percent, 0 to < 100.
    max_band_loss_db : float
        Largest loss the filter may take anywhere in the band, dB (default 3.1, so a
        Butterworth with its -3 dB point on the band edge passes).
    sensor : SensorResonance, optional
        Mounted sensor resonance ahead of the filter (it can lift an alias).
    n_speeds : int
        Points of the speed grid (2 to 20,000; the interval's ends are always on it).
    """

    tones: ToneSet
    band_hz: tuple[float, float]
    rejection_db: float | None = None
    floor: float | None = None
    speed_range: tuple[float, float] = (1.0, 1.0)
    nominal_rpm: float | None = None
    bin_width_hz: float | None = None
    resolve: tuple[str, str] | None = None
    window: str = "hann"
    rates_hz: tuple[float, ...] | None = None
    rate_series: str = "converter"
    filters: tuple[FilterOption, ...] | None = None
    lines_options: tuple[int, ...] = STANDARD_LINES
    averages: int = 1
    overlap_pct: float = 0.0
    max_band_loss_db: float = DEFAULT_MAX_BAND_LOSS_DB
    sensor: SensorResonance | None = None
    n_speeds: int = 200


@dataclass(frozen=True)
class ToneAlias:
    """A tone's worst alias in the band for the chosen setup.

    Attributes
    ----------
    index : int
        Position in the request's ToneSet.
    label, source : str
        The tone's label and source.
    aliases_into_band : bool
        Whether any alias of the tone lands in the band over the speed range; the
        fields below are NaN (zone 0) when not.
    true_hz, apparent_hz : float
        True and apparent frequency at the worst speed, Hz.
    zone : int
        Nyquist zone of the true frequency there.
    speed_factor : float
        Speed (factor of nominal) where the alias is strongest; NaN for a tone that
        does not move with speed.
    rpm : float, optional
        The same speed in rpm when the nominal rpm is known.
    level : float
        Alias level after the chain, amplitude unit (dB value in ``level_db``).
    level_db : float
        ``20·log10(level)``, dB re one unit.
    margin_db : float
        Limit minus level, dB (>= 0: meets the requirement).
    amplitude_assumed : bool
        True where the tone's amplitude was unknown and assumed (see the plan's
        residual risk).
    """

    index: int
    label: str
    source: str
    aliases_into_band: bool
    true_hz: float
    apparent_hz: float
    zone: int
    speed_factor: float
    rpm: float | None
    level: float
    level_db: float
    margin_db: float
    amplitude_assumed: bool


# Why a (sample rate, filter) pair fails, as named codes. The search stores them in an
# int8 grid, one cell per pair, by their position in REJECTION_CODES.
#: The pair meets every requirement.
PASSES = "passes"
#: The span fs/2.56 does not reach the band edge.
SPAN_TOO_SHORT = "span_too_short"
#: No offered line count gives bins narrow enough.
RESOLUTION_NOT_MET = "resolution_not_met"
#: The filter takes more than the allowed loss off the band.
BAND_LOSS_TOO_HIGH = "band_loss_too_high"
#: An alias lands in the band above the limit.
ALIAS_ABOVE_LIMIT = "alias_above_limit"
#: Every code, in the order of its integer in the search grid (0 = passes).
REJECTION_CODES: tuple[str, ...] = (
    PASSES,
    SPAN_TOO_SHORT,
    RESOLUTION_NOT_MET,
    BAND_LOSS_TOO_HIGH,
    ALIAS_ABOVE_LIMIT,
)
#: The word the published API's ``rejected[].failure`` field uses for each code.
API_FAILURE: dict[str, str] = {
    SPAN_TOO_SHORT: "span",
    RESOLUTION_NOT_MET: "resolution",
    BAND_LOSS_TOO_HIGH: "band_loss",
    ALIAS_ABOVE_LIMIT: "alias",
}


@dataclass(frozen=True)
class RejectedOption:
    """A cheaper setup than the chosen one, and why it fails.

    Attributes
    ----------
    sample_rate_hz : float
        Sample rate, Hz.
    filter : FilterOption
        The filter option.
    cutoff_hz : float, optional
        Its cutoff at this rate, Hz.
    code : str
        What failed: one of :data:`REJECTION_CODES` other than ``PASSES``
        (:attr:`failure` gives the API's word for it).
    reason : str
        One sentence for a person.
    tone_index : int, optional
        The offending tone (for ``"alias"``).
    speed_factor : float
        Speed of the worst alias (factor of nominal; NaN when it does not apply).
    apparent_hz : float
        Where that alias lands, Hz (NaN when it does not apply).
    excess_db : float
        How far the worst alias exceeds the limit, dB (NaN when it does not apply).
    """

    sample_rate_hz: float
    filter: FilterOption
    cutoff_hz: float | None
    code: str
    reason: str
    tone_index: int | None = None
    speed_factor: float = math.nan
    apparent_hz: float = math.nan
    excess_db: float = math.nan

    @property
    def failure(self) -> str:
        """The API's word for :attr:`code` (``span``, ``resolution``, ``band_loss``, ``alias``)."""
        return API_FAILURE[self.code]


@dataclass(frozen=True)
class Plan:
    """The cheapest setup that meets the requirements.

    Attributes
    ----------
    sample_rate_hz : float
        Chosen sample rate, Hz.
    filter : FilterOption
        Chosen anti-alias filter option.
    cutoff_hz : float, optional
        Its cutoff, Hz (None for no filter or a table).
    chain : Chain
        The chosen acquisition chain (sensor, filter, sample).
    band_hz : (float, float)
        Band of interest, Hz.
    record : RecordLength
        Lines, span, bin width, record length and total time.
    window : str
        Analysis window.
    mainlobe_bins : float
        Its main-lobe width, bins.
    required_bin_hz : float, optional
        Largest bin width the resolution requirement allows, Hz.
    limit_db : float
        Highest allowed alias level, dB re one unit.
    reference_db : float, optional
        Level of the strongest in-band tone, dB re one unit (rejection mode).
    worst_margin_db : float
        Smallest margin over all tones, dB (inf when no alias reaches the band).
    band_loss_db : float
        Largest filter loss inside the band, dB.
    speed_range : (float, float)
        Speed factors planned for.
    tones : tuple of ToneAlias
        Every tone's worst in-band alias.
    rejected : tuple of RejectedOption
        Every cheaper option, in cost order, with its reason.
    residual_risk : tuple of str
        What the plan does not cover.
    amplitude_basis : str
        Which amplitude assumption set the answer: ``"known"`` (the binding alias and
        the reference have given amplitudes), ``"unknown_alias_as_strongest"`` (the
        binding alias is of a tone without an amplitude, taken as strong as the strongest
        tone with one), ``"unknown_reference_as_weakest"`` (the in-band reference tone has
        no amplitude and was taken as weak as the weakest tone with one) or
        ``"all_unknown"`` (no amplitudes: every tone at one common level).
    amplitude_basis_text : str
        The same as one sentence.
    """

    sample_rate_hz: float
    filter: FilterOption
    cutoff_hz: float | None
    chain: Chain
    band_hz: tuple[float, float]
    record: RecordLength
    window: str
    mainlobe_bins: float
    required_bin_hz: float | None
    limit_db: float
    reference_db: float | None
    worst_margin_db: float
    band_loss_db: float
    speed_range: tuple[float, float]
    tones: tuple[ToneAlias, ...]
    rejected: tuple[RejectedOption, ...]
    residual_risk: tuple[str, ...]
    amplitude_basis: str = "known"
    amplitude_basis_text: str = ""
