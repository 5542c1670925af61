"""Request and response models of diagnosis and the two-rate test (contract under /api/v1)."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, Field, model_validator

from ..core.speed import DEFAULT_SEARCH_PCT
from .common import (
    Hz,
    HzOrZero,
    Rate,
    StrictModel,
    exactly_one,
    not_together,
    strict_with_rules,
)
from .fold import AnalogFilterIn, StageIn, ToneIn
from .saved import SavedLinkOut
from .sources import SourceIn

__all__ = [
    "CaptureIn",
    "CompareIn",
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
        "negative values mean dB, otherwise linear (the answer says which was used)",
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
        None, description="Rate of a text or .npy time record (WAV files carry their own)"
    )
    unit: Literal["auto", "linear", "db"] = "auto"
    window: Window | Literal["unknown"] = "hann"


class _ChainOptional(StrictModel):
    sample_rate_hz: Rate | None = Field(None, description="Shorthand: the sample rate, Hz")
    anti_alias: AnalogFilterIn | None = None
    chain: list[StageIn] | None = Field(None, min_length=1, max_length=64)


#: A measured input: one spectrum or one time record (in JSON), and one way to give the
#: chain.
_MEASURED_INPUT = strict_with_rules(
    [
        exactly_one("spectrum", "time_record"),
        not_together("chain", "sample_rate_hz"),
        not_together("chain", "anti_alias"),
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
    band_hz: tuple[HzOrZero, HzOrZero] | None = Field(
        None, description="Band of interest, Hz; default DC to final rate / 2.56"
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
        if self.band_hz is not None and self.band_hz[1] <= self.band_hz[0]:
            raise ValueError(f"band_hz={list(self.band_hz)} must be [low, high] with low < high")
        return self


class CaptureIn(_ChainOptional):
    """One capture of the two-rate test: its chain and its spectrum or time record."""

    model_config = _MEASURED_INPUT

    spectrum: SpectrumIn | None = None
    time_record: TimeRecordIn | None = None
    upload: UploadIn | None = None


class CompareIn(StrictModel):
    """The same signal captured at two sample rates: which peaks stay, which move."""

    a: CaptureIn
    b: CaptureIn
    spectrum_options: SpectrumOptionsIn = Field(default_factory=SpectrumOptionsIn)
    threshold_db: float = Field(10.0, ge=0, le=200, allow_inf_nan=False)
    level_tolerance_db: float = Field(6.0, gt=0, le=60, allow_inf_nan=False)
    max_true_hz: Hz | None = Field(
        None, description="Highest true frequency to consider; default 10× the higher rate"
    )
    max_peaks: int = Field(500, ge=1, le=5000)


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
    verdict: str = Field(description="alias, direct, family, mirror or unexplained")
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
    unit: str
    unit_reason: str
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


class CompareOut(BaseModel):
    a: dict[str, Any]
    b: dict[str, Any]
    tolerance_hz: float
    max_true_hz: float
    caution: str
    computation_version: str
    saved: SavedLinkOut | None = Field(None, description="With `?save=true`: the link")
