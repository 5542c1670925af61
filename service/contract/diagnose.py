"""Request and response models of diagnosis and the two-rate test (contract under /api/v1)."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, Field, model_validator

from ..core.speed import DEFAULT_SEARCH_PCT
from .common import (
    BandHz,
    Hz,
    HzOrZero,
    Rate,
    StrictModel,
    at_least_one,
    exactly_one,
    not_together,
    strict_with_rules,
)
from .filters import AnalogFilterIn
from .fold import ONE_SAMPLE_STAGE, StageIn, ToneIn
from .saved import SavedLinkOut
from .sources import SourceIn

__all__ = [
    "CaptureIn",
    "CaptureOut",
    "CompareCandidateOut",
    "CompareGroupOut",
    "CompareIn",
    "ComparePeakOut",
    "DiagnoseIn",
    "SpectrumIn",
    "SpectrumOptionsIn",
    "TimeRecordIn",
    "UploadIn",
]

#: A measured value in any unit (or dB): up to 1e12 in size, so sums of squares over the
#: longest record stay far inside float64.
Finite = Annotated[float, Field(ge=-1e12, le=1e12, allow_inf_nan=False)]
Window = Literal["hann", "flattop", "rectangular", "hamming", "blackmanharris"]


class SpectrumIn(StrictModel):
    """A measured amplitude spectrum: frequency and amplitude arrays."""

    freq_hz: list[HzOrZero] = Field(
        min_length=16, description="Frequencies, Hz, strictly increasing"
    )
    amplitude: list[Finite] = Field(min_length=16, description="Amplitude per line")
    unit: Literal["auto", "linear", "db"] = Field(
        "auto",
        description="'linear' amplitude, 'db' (20·log10 re any reference), or 'auto': "
        "none negative is linear; a fifth or more negative is dB; a handful of negative "
        "values (at most 3, or 1 % of the lines) in an otherwise linear spectrum are bad "
        "cells, left out and counted (summary.dropped_rows), not a switch to dB; anything "
        "between is a 422 asking for the unit. The answer says how it was decided "
        "(summary.scale, scale_source, scale_reason)",
    )
    amplitude_unit: str | None = Field(
        None,
        max_length=40,
        description="Unit of the amplitude as measured (g, m/s², mm/s, V, Pa, dB re 1 g "
        "...), carried to the answer's summary.amplitude_unit",
        examples=["g"],
    )
    amplitude_kind: Literal["peak", "rms", "peak_to_peak"] | None = Field(
        None,
        description="What the amplitudes state: the peak of each sine, its RMS, or "
        "peak-to-peak; carried to the answer's summary.amplitude_kind (a time record's "
        "spectrum is always peak)",
        examples=["rms"],
    )
    window: Window | Literal["unknown"] = Field(
        "hann", description="Window the analyser used; sets peak refinement and scalloping"
    )

    @model_validator(mode="after")
    def _same_length(self) -> SpectrumIn:
        if len(self.freq_hz) != len(self.amplitude):
            raise ValueError(
                f"freq_hz has {len(self.freq_hz)} values but amplitude has "
                f"{len(self.amplitude)}; they must match"
            )
        return self


class TimeRecordIn(StrictModel):
    """A time record sent inline (for files, use the multipart form)."""

    samples: list[Finite] = Field(min_length=64, description="Samples, any unit")
    sample_rate_hz: Rate | None = Field(
        None, description="Rate of the samples, Hz; default the chain's final rate"
    )


class SpectrumOptionsIn(StrictModel):
    """How a time record becomes an averaged amplitude spectrum."""

    lines: int | None = Field(
        None,
        ge=16,
        le=6_553_600,
        description="Analysis lines (FFT length 2.56·lines); default the largest usual "
        "value giving at least 8 averages",
    )
    window: Window = "hann"
    overlap_pct: float = Field(50.0, ge=0, le=95, allow_inf_nan=False)
    averages: int | None = Field(None, ge=1, le=100_000)


class UploadIn(StrictModel):
    """How to read an uploaded file (multipart only)."""

    kind: Literal["auto", "spectrum", "time_record"] = Field(
        "auto",
        description="'auto': .wav and .npy are time records; text with two columns is a "
        "spectrum, with one column a time record",
    )
    channel: int = Field(0, ge=0, le=1023, description="Channel of a multichannel file, from 0")
    sample_rate_hz: Rate | None = Field(
        None,
        description="Rate of a text or .npy time record; the request's top-level "
        "sample_rate_hz serves as well (give it once). A file that states its own rate "
        "(WAV header, a sample-rate line, a time column) must agree: a disagreement is a "
        "422 naming both values",
    )
    unit: Literal["auto", "linear", "db"] = Field(
        "auto",
        description="Scale of a spectrum file's amplitude: 'auto' decides from the column "
        "header (dB, dBV, dB re ...), else from the values as for a JSON spectrum",
    )
    amplitude_unit: str | None = Field(
        None,
        max_length=40,
        description="Unit of the file's amplitude (g, m/s², mm/s, V, Pa ...), when the file "
        "does not say or says otherwise; carried to summary.amplitude_unit",
        examples=["g"],
    )
    amplitude_kind: Literal["peak", "rms", "peak_to_peak"] | None = Field(
        None,
        description="What the amplitudes state: the peak of each sine, its RMS, or "
        "peak-to-peak; carried to the answer's summary.amplitude_kind (a time record's "
        "spectrum is always peak)",
        examples=["rms"],
    )
    amplitude_column: (
        Annotated[str, Field(min_length=1, max_length=200)]
        | Annotated[int, Field(ge=0, le=1023)]
        | None
    ) = Field(
        None,
        description="The amplitude column of a spectrum file, by header name or 0-based "
        "number, when the header does not settle it (several value columns and none named "
        "amplitude, magnitude or level)",
        examples=["Amplitude (g)", 2],
    )
    window: Window | Literal["unknown"] = "hann"


class _ChainOptional(StrictModel):
    sample_rate_hz: Rate | None = Field(None, description="Shorthand: the sample rate, Hz")
    anti_alias: AnalogFilterIn | None = None
    chain: list[StageIn] | None = Field(
        None, min_length=1, max_length=64, json_schema_extra=ONE_SAMPLE_STAGE
    )


_RATE_GIVEN = at_least_one("sample_rate_hz", "chain")

#: A measured input: one spectrum or one time record (in JSON), and one way to give the
#: chain. A spectrum carries no rate of its own, so the request states it (sample_rate_hz
#: or a chain); a time record states it itself or the request does (the use-case's rule
#: in measure.py, written as JSON Schema; whether two given rates agree stays in code).
_MEASURED_INPUT = strict_with_rules(
    [
        exactly_one("spectrum", "time_record"),
        not_together("chain", "sample_rate_hz"),
        not_together("chain", "anti_alias"),
        {"if": {"required": ["spectrum"]}, "then": _RATE_GIVEN},
        {
            "if": {
                "required": ["time_record"],
                "properties": {"time_record": {"not": {"required": ["sample_rate_hz"]}}},
            },
            "then": _RATE_GIVEN,
        },
    ]
)


class DiagnoseIn(_ChainOptional):
    """Which peaks of a spectrum are aliases, of what, and how sure.

    A JSON body carries exactly one of ``spectrum`` and ``time_record``; with a multipart
    upload the file takes their place.
    """

    model_config = _MEASURED_INPUT

    spectrum: SpectrumIn | None = None
    time_record: TimeRecordIn | None = None
    spectrum_options: SpectrumOptionsIn = Field(default_factory=SpectrumOptionsIn)
    upload: UploadIn | None = Field(None, description="Multipart only: how to read the file")
    tones: list[ToneIn] | None = Field(None, min_length=1)
    sources: list[SourceIn] | None = Field(None, min_length=1, max_length=500)
    speed_tolerance_pct: float | None = Field(
        None,
        ge=0,
        le=50,
        allow_inf_nan=False,
        description=(
            "Uncertainty of the machines' speed, percent. Leave it out for automatic: twice "
            "the running-speed estimate's uncertainty when the speed was estimated, at "
            "least 0.05 %, and 0.05 % otherwise (an off-nameplate speed is the speed "
            "search's job; a wide tolerance lets high orders swallow unrelated peaks)"
        ),
    )
    speed_search_pct: float = Field(
        DEFAULT_SEARCH_PCT,
        ge=0,
        le=20,
        allow_inf_nan=False,
        description=(
            "Search the actual running speed within ± this percent of the speeds given, "
            "from the peaks themselves; 0 turns the search off. Default 4 %: an induction "
            "motor slips s = (n_sync − n)/n_sync, a few percent below synchronous speed at "
            "rated load (common practice), and controllers and tachometers drift"
        ),
    )
    band_hz: BandHz | None = Field(
        None, description="Band of interest [low, high], Hz; default DC to final rate / 2.56"
    )
    threshold_db: float = Field(
        10.0,
        ge=0,
        le=200,
        allow_inf_nan=False,
        description="A peak must stand this far above the noise floor, dB",
    )
    level_tolerance_db: float = Field(10.0, gt=0, le=60, allow_inf_nan=False)
    blind: Literal["auto", "on", "off"] = Field(
        "auto", description="Search harmonic families; 'auto' does so when no sources are given"
    )
    max_peaks: int = Field(1000, ge=1, le=5000)

    @model_validator(mode="after")
    def _check(self) -> DiagnoseIn:
        if self.spectrum is not None and self.time_record is not None:
            raise ValueError("give either spectrum or time_record, not both")
        if self.chain is not None and (self.sample_rate_hz is not None or self.anti_alias):
            raise ValueError("give either sample_rate_hz (with optional anti_alias) or chain")
        return self


class CaptureIn(_ChainOptional):
    """One capture of the multi-rate test: its chain and its spectrum or time record."""

    model_config = _MEASURED_INPUT

    spectrum: SpectrumIn | None = None
    time_record: TimeRecordIn | None = None
    upload: UploadIn | None = None
    label: str | None = Field(
        None, min_length=1, max_length=40, description="A name; default A, B, C, ..."
    )


#: Captures per multi-rate test (the core's bounds).
MIN_CAPTURES, MAX_CAPTURES = 2, 6


class CompareIn(StrictModel):
    """The same signal captured at 2 to 6 sample rates: which peaks stay, which move, and
    which true frequencies the moving ones can have.

    Give the captures either as ``captures`` (2 to 6) or as ``a`` and ``b`` (the
    two-capture form, read as ``captures = [a, b]``), not both.
    """

    model_config = strict_with_rules(
        [
            {
                "oneOf": [
                    {"required": ["captures"]},
                    {"required": ["a", "b"]},
                ]
            },
            not_together("captures", "a"),
            not_together("captures", "b"),
        ],
        depends={"a": ["b"], "b": ["a"]},
    )

    captures: list[CaptureIn] | None = Field(
        None,
        min_length=MIN_CAPTURES,
        max_length=MAX_CAPTURES,
        description="2 to 6 captures of the same signal at different final sample rates",
    )
    a: CaptureIn | None = Field(None, description="Two-capture form: the first capture")
    b: CaptureIn | None = Field(None, description="Two-capture form: the second capture")
    spectrum_options: SpectrumOptionsIn = Field(default_factory=SpectrumOptionsIn)
    threshold_db: float = Field(
        10.0,
        ge=0,
        le=200,
        allow_inf_nan=False,
        description="A peak must stand this far above the noise floor, dB",
    )
    level_tolerance_db: float = Field(
        3.0,
        gt=0,
        le=60,
        allow_inf_nan=False,
        description="Spread of a measured peak level, dB: the level a capture implies "
        "before its chain must agree across captures within about this",
    )
    max_true_hz: Hz | None = Field(
        None,
        description="Highest true frequency the signal can hold, Hz; default 10× the "
        "highest rate. Set it to the sensor's or transducer's bandwidth: when it lies "
        "inside the unambiguous range of the rates, the answers are unique",
    )
    drift_pct: float = Field(
        0.5,
        ge=0,
        le=20,
        allow_inf_nan=False,
        description="Machine-speed drift allowed between the captures, % (a line that "
        "moves less than this is still the same line)",
    )
    full_scale_db: float | None = Field(
        None,
        ge=-400,
        le=400,
        allow_inf_nan=False,
        description="Converter full scale on the spectra's dB scale (20·log10 of the "
        "linear amplitude): a candidate that would need a level far above it before the "
        "chain is implausible. Leave out when the spectra are not in units of full scale",
    )
    prior_weight: float = Field(
        0.0,
        ge=0,
        le=10,
        allow_inf_nan=False,
        description="Belief that lower true frequencies are likelier: this many log10 "
        "units of evidence per unambiguous range. 0 (default) leaves it out; an answer "
        "that only this belief decides says so (decided_by_prior)",
    )
    settle_rates_hz: list[Rate] | None = Field(
        None,
        min_length=1,
        max_length=200,
        description="The converter's available sample rates, S/s, from which to propose "
        "the rate that would settle an ambiguous answer; default a common series",
    )
    band_hz: BandHz | None = Field(
        None,
        description="Band of interest in the captured spectra [low, high], Hz (flags groups in it)",
    )
    max_peaks: int = Field(200, ge=1, le=500, description="Peaks per capture, strongest first")

    @model_validator(mode="after")
    def _check(self) -> CompareIn:
        pair = (self.a is not None) + (self.b is not None)
        if self.captures is not None and pair:
            raise ValueError("give either captures or a and b, not both")
        if self.captures is None and pair != 2:
            raise ValueError(
                "give captures (2 to 6), or both a and b: the test needs at least two captures"
            )
        return self

    @property
    def capture_list(self) -> list[CaptureIn]:
        """The captures in order, whichever form the request used."""
        if self.captures is not None:
            return list(self.captures)
        assert self.a is not None and self.b is not None
        return [self.a, self.b]

    @property
    def capture_fields(self) -> list[str]:
        """The request path of each capture (``captures[2]``, or ``a``/``b``)."""
        if self.captures is not None:
            return [f"captures[{i}]" for i in range(len(self.captures))]
        return ["a", "b"]


class AlternativeOut(BaseModel):
    kind: str = Field(description="direct, alias, family, mirror or unexplained")
    confidence: float
    label: str | None
    source: str | None
    true_hz: float | None
    zone: int | None
    inverted: bool | None
    attenuation_db: float | None
    predicted_amplitude: float | None
    sentence: str


class PeakOut(BaseModel):
    freq_hz: float = Field(description="Refined peak frequency, Hz")
    amplitude: float = Field(description="Peak amplitude (linear), scalloping corrected")
    amplitude_db: float = Field(description="20·log10(amplitude)")
    floor: float = Field(description="Noise floor at the peak (linear)")
    snr_db: float
    verdict: str = Field(
        description="alias, direct, family, mirror, unexplained, or clipping: a harmonic "
        "or intermodulation product of the strongest tones of a clipped time record "
        "(summary.clipping), made by the clipping and not an alias of anything"
    )
    confidence: float = Field(description="0 to 1")
    source: str | None = Field(description="Label of the source, or null")
    tone: str | None = Field(description="Label of the tone, or null")
    true_hz: float | None = Field(description="Estimated true frequency, Hz, or null")
    zone: int | None = Field(description="Nyquist zone of the true frequency, or null")
    inverted: bool | None
    aliased: bool = Field(
        description=(
            "The verdict's energy comes from above the Nyquist frequency of the final rate "
            "(an alias, a mirror, or a harmonic-family member from a zone above the first). "
            "False for real lines and unexplained peaks. A controller can rely on this "
            "instead of the verdict: a 'family' verdict can be either"
        ),
        examples=[True],
    )
    in_band: bool
    beyond_span: bool = Field(
        description=(
            "Above the analysed span (fs/2.56), where the anti-alias filter's transition "
            "band lets folded energy in"
        )
    )
    explanation: str = Field(description="One plain sentence")
    alternatives: list[AlternativeOut]


class ClippingOut(BaseModel):
    verdict: Literal["none", "suspected", "clipped"] = Field(
        description="Runs of samples held at the record's extremes (or the converter's "
        "full scale for integer WAV): 'clipped', 'suspected' or 'none'"
    )
    fraction: float = Field(description="Share of the samples on a clip level, 0 to 1")
    symmetric: bool = Field(description="Both polarities clip (odd products only)")
    sentence: str


class ChannelOut(BaseModel):
    index: int = Field(description="0-based channel number")
    name: str
    activity: Literal["signal", "noise", "constant"]
    rms: float = Field(description="RMS about the mean, unit of the samples")
    analysed: bool = Field(description="The channel this answer analyses")
    reasons: list[str]


class SourceSpeedOut(BaseModel):
    source: str
    given_rpm: float
    used_rpm: float


class SpeedOut(BaseModel):
    estimated: bool = Field(description="The speed estimated from the peaks was used")
    ratio: float = Field(description="Speed used / speed given")
    offset_pct: float = Field(description="How far the speed used is from the one given, %")
    uncertainty_pct: float | None = Field(description="1 σ of the estimate, %")
    search_pct: float = Field(description="Searched ± this percent of the speed given")
    tolerance_pct: float = Field(description="Speed tolerance used, %")
    explained_at_given: int = Field(description="Peaks matched by some tone at the speed given")
    explained_at_used: int = Field(description="... and at the speed used")
    sources: list[SourceSpeedOut]
    reason: str


class SummaryOut(BaseModel):
    input: str = Field(description="What was read")
    unit: str = Field(description="Same as scale (kept for existing clients)")
    unit_reason: str = Field(description="Same as scale_reason")
    scale: Literal["linear", "db"] = Field(description="How the values were read")
    scale_source: Literal["request", "header", "values", "time_record"] = Field(
        description="What decided the scale: the request's unit, the file's header, the "
        "values alone, or a time record (its spectrum is computed, linear)"
    )
    scale_reason: str = Field(description="One sentence saying how the scale was decided")
    frequency_unit: str = Field(description="Unit of the file's frequency column (Hz, kHz, cpm)")
    amplitude_unit: str | None = Field(
        description="Amplitude unit from the header or the request, null when unknown"
    )
    amplitude_kind: Literal["peak", "rms", "peak_to_peak"] | None = Field(
        description="What the amplitudes state (peak, rms, peak_to_peak), as the request "
        "says; 'peak' for a time record's computed spectrum; null when not stated"
    )
    dropped_rows: dict[str, int] = Field(
        description="Lines left out, by reason: non_finite (NaN, inf, -1.#INF, 1.#QNAN, "
        "#N/A, empty), negative (a handful in a linear column)"
    )
    input_notes: list[str] = Field(description="How the input was read, each note once")
    metadata: dict[str, str] = Field(description="key: value lines before a file's table")
    clipping: ClippingOut | None = Field(description="Time records only")
    channels: list[ChannelOut] = Field(description="Multichannel uploads: every channel's activity")
    window: str
    bin_width_hz: float
    lines: int | None
    n_bins: int
    averages: int | None
    nfft: int | None
    floor_median: float = Field(description="Median noise floor (linear)")
    peaks_found: int
    peaks_shown: int
    headline: str = Field(
        description=(
            "The answer in one sentence, as the pages and the command line show it: "
            "'no aliases' only when every peak is explained as a real line"
        ),
        examples=["3 of 11 peaks are probably aliased: inverter (2), first mesh (1)."],
    )
    status: Literal["aliases_found", "unexplained_peaks", "no_aliases", "no_peaks"] = Field(
        description="The headline as a code a controller can test"
    )
    aliased_count: int = Field(description="Peaks whose `aliased` is true")
    unexplained_count: int
    speed: SpeedOut | None = Field(
        description="The running speed used against the speeds given (null: no search)"
    )


class DiagnoseOut(BaseModel):
    summary: SummaryOut
    nyquist_hz: float
    final_rate_hz: float
    band_hz: tuple[float, float]
    span_hz: float = Field(
        description=(
            "The analysed span, final rate / 2.56 (common practice). A convention, not a "
            "guarantee: see the two rejections"
        )
    )
    rejection_at_span_edge_db: float = Field(
        description="The entered chain's attenuation at span_hz, dB"
    )
    rejection_at_fold_of_span_edge_db: float = Field(
        description=(
            "The entered chain's attenuation at fs − span_hz, the frequency that folds onto "
            "the span edge, dB: how far below its true level an alias at the span edge is"
        )
    )
    tolerance_hz: float
    stages: list[str]
    notes: list[str]
    counts: dict[str, int]
    peaks: list[PeakOut]
    families: list[dict[str, Any]]
    caution: str
    computation_version: str
    saved: SavedLinkOut | None = Field(None, description="With `?save=true`: the link")


class CompareCandidateOut(BaseModel):
    """A candidate true frequency of a group and its evidence; lists are per capture."""

    true_hz: float = Field(description="Candidate true frequency, Hz")
    zone: list[int] = Field(description="Nyquist zone in each capture (1 = not aliased)")
    apparent_hz: list[float] = Field(description="Where it lands in each capture, Hz")
    freq_error_hz: list[float | None] = Field(
        description="Landing point minus the measured peak, Hz; null where no peak"
    )
    level_error_db: list[float | None] = Field(
        description="Level before the chain implied by this capture minus the mean over "
        "the captures, dB; null where no peak"
    )
    attenuation_db: list[float] = Field(description="Each chain's attenuation here, dB")
    in_range: bool = Field(description="Inside the unambiguous range")
    score: float = Field(description="Evidence, log10 units: 0 best, -1 ten times less likely")
    tied: bool = Field(description="Tied for best: the captures cannot tell it from the top")


class CompareGroupOut(BaseModel):
    """Peaks matched across the captures as one tone, and what it is."""

    id: int
    verdict: Literal["real", "alias", "ambiguous", "unmatched"] = Field(
        description="real: stays put; alias: moves, one true frequency; ambiguous: moves "
        "or stays, but several true frequencies fit equally; unmatched: seen in one "
        "capture only, or no common true frequency"
    )
    true_hz: float | None = Field(description="The true frequency, only when unique, Hz")
    peaks: list[int | None] = Field(description="Index of the peak in each capture")
    freq_hz: list[float | None] = Field(description="Measured peak in each capture, Hz")
    level_db: list[float | None] = Field(description="Its level, dB (20·log10 amplitude)")
    candidates: list[CompareCandidateOut] = Field(
        description="Best first: the tied ones by ascending frequency, then the rest"
    )
    tied: int = Field(description="Candidates tied for best")
    decided_by_prior: bool = Field(
        description="Only the lower-frequency prior (prior_weight) separated the answer"
    )
    unambiguous_hz: float | None = Field(
        description="Unique answers below this true frequency, Hz (null when unmatched)"
    )
    error_bound_hz: float | None = Field(
        description="Remainder-error bound of the group's rates (a quarter of their "
        "greatest common divisor), Hz: answers are unique while every capture reads within "
        "it (null when unmatched)"
    )
    period_hz: float | None = Field(
        description="When ambiguous: candidates repeat with this period, Hz"
    )
    settle_rate_hz: float | None = Field(
        description="When ambiguous: the additional sample rate that best separates the "
        "tied candidates, S/s"
    )
    settle_separation_bins: float | None = Field(
        description="How far apart those candidates land at that rate, in its bins (3200 lines)"
    )
    in_band: bool
    chance_probability: float | None = Field(
        description="For a group that moves and pointed to one true frequency: the "
        "probability that an unrelated peak of comparable level would fit some candidate "
        "as well (a unique alias needs it below 1 %); null when not weighed"
    )
    could_be_chance: bool = Field(
        description="The best fit was one true frequency, but the match could be chance "
        "(chance_probability at least 1 %, or a peak less than 15 dB above its floor): "
        "ambiguous until a capture at settle_rate_hz confirms it"
    )
    sentence: str = Field(description="One plain sentence")


class ComparePeakOut(BaseModel):
    freq_hz: float = Field(description="Refined peak frequency, Hz")
    amplitude: float = Field(description="Peak amplitude (linear)")
    level_db: float = Field(description="20·log10(amplitude)")
    verdict: Literal["real", "alias", "ambiguous", "unmatched"] = Field(
        description="Its group's verdict"
    )
    aliased: bool | None = Field(
        description="The peak is folded in this capture (true for every candidate); null "
        "when the candidates disagree"
    )
    group: int = Field(description="Id of its group in `groups`")
    true_hz: float | None = Field(description="The group's true frequency when unique, Hz")
    explanation: str


class CaptureOut(BaseModel):
    label: str
    sample_rate_hz: float = Field(description="Final sample rate, S/s")
    input: str = Field(description="What was read")
    stages: list[str]
    bin_width_hz: float
    counts: dict[str, int] = Field(description="Peaks per verdict")
    peaks: list[ComparePeakOut]


class CompareOut(BaseModel):
    captures: list[CaptureOut]
    groups: list[CompareGroupOut] = Field(description="Real lines first, then by frequency")
    counts: dict[str, int] = Field(description="Groups per verdict")
    rates_hz: list[float]
    resolution_hz: float = Field(description="Greatest common divisor of the rates, Hz")
    unambiguous_hz: float = Field(
        description="True frequencies below this are told apart by the captures, Hz"
    )
    error_bound_hz: float
    max_true_hz: float = Field(description="Highest true frequency considered, Hz")
    drift_pct: float
    sentence: str
    a: CaptureOut | None = Field(None, description="Two-capture form: captures[0] again")
    b: CaptureOut | None = Field(None, description="Two-capture form: captures[1] again")
    caution: str
    computation_version: str
    saved: SavedLinkOut | None = Field(None, description="With `?save=true`: the link")
