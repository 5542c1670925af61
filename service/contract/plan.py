"""Request and response models of POST /api/v1/plan (``PlanIn`` / ``PlanOut``), and its
worked examples from the invented demo scenario. Field names are a contract under /api/v1.

Cross-field rules are checked in field validators (not one model validator) so that an
error names the field it is about, e.g. ``floor`` when both ``rejection_db`` and
``floor`` are given.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    Discriminator,
    Field,
    Tag,
    ValidationInfo,
    field_validator,
)

from ..core.analysis_lines import SPAN_DIVISOR
from ..core.filters import MAX_Q, MIN_CUTOFF_HZ, MIN_Q
from ..core.plan_common import RATE_SERIES
from .common import (
    BandHz,
    Hz,
    Label,
    Rate,
    StrictModel,
    at_least_one,
    by_json_type,
    exactly_one,
    not_together,
    strict_with_rules,
)
from .filters import FilterIn
from .fold import StageIn, ToneIn
from .sources import SourceIn

__all__ = [
    "FilterIn",
    "PlanIn",
    "PlanOut",
    "RunUpIn",
    "SensorIn",
]

#: Limits on list lengths (kept well inside the core's own limits).
MAX_RATES = 200
MAX_FILTERS = 50
MAX_SOURCES = 500
MAX_TONES_IN = 100_000
MAX_LINES_OPTIONS = 64
MAX_ORDERS_OF_INTEREST = 100
MAX_RUNUP_SPEEDS = 5000

Rpm = Annotated[float, Field(ge=0, le=6e6, allow_inf_nan=False, description="rpm, >= 0")]
Lines = Annotated[int, Field(ge=1, le=1_048_576, description="Analysis lines")]
Order = Annotated[float, Field(gt=0, le=1000, allow_inf_nan=False, description="Order, > 0")]
#: A line of interest: a tone label, or a numeric order (checked by its JSON type, so a 0
#: is reported as an order out of range, not as "not a string").
OrderOrLabel = Annotated[
    Annotated[Label, Tag("as-text")] | Annotated[Order, Tag("as-number")],
    Discriminator(by_json_type),
]

Window = Literal["rectangular", "hann", "hamming", "blackmanharris", "flattop"]


class SensorIn(StrictModel):
    """Mounted sensor resonance ahead of the filter (it can lift an alias)."""

    natural_hz: Hz = Field(description="Mounted resonance, Hz")
    q: float = Field(ge=MIN_Q, le=MAX_Q, allow_inf_nan=False, description="Quality factor")


class RunUpIn(StrictModel):
    """Ask for the run-up through the recommended chain."""

    orders_of_interest: list[OrderOrLabel] | None = Field(
        None,
        max_length=MAX_ORDERS_OF_INTEREST,
        description="Lines an alias must not hide: tone labels ('label' or 'source: label') "
        "or numeric orders of the nominal shaft speed (need nominal_rpm). Default: every "
        "tone while it is direct",
    )
    n_speeds: int = Field(
        200, ge=2, le=MAX_RUNUP_SPEEDS, description="Points of the speed grid, 2 to 5000"
    )
    tolerance_hz: Hz | None = Field(
        None,
        description="How close two lines must come to count as crossing, Hz; default "
        "one bin of the recommended setup",
    )


def _high_edge_reaches_cutoffs(v: tuple[float, float]) -> tuple[float, float]:
    if v[1] < MIN_CUTOFF_HZ:
        raise ValueError(
            f"band_hz={list(v)} ends below {MIN_CUTOFF_HZ:g} Hz, the lowest filter cutoff; "
            f"raise its high edge to at least {MIN_CUTOFF_HZ:g} Hz"
        )
    return v


#: The plan's band: its high edge is where filter cutoffs go, so it reaches the core's
#: lowest cutoff (MIN_CUTOFF_HZ); the schema says so with ``contains``.
PlanBandHz = Annotated[
    BandHz,
    AfterValidator(_high_edge_reaches_cutoffs),
    Field(json_schema_extra={"uniqueItems": True, "contains": {"minimum": MIN_CUTOFF_HZ}}),
]


def _some_member(*names: str) -> dict[str, Any]:
    return {"anyOf": [{"required": [n]} for n in names]}


#: An absolute floor is compared with tone levels, so some tone must have one: an
#: explicit tone's ``amplitude`` or a source's ``amplitude``, ``amplitudes`` or
#: ``harmonic_amplitudes`` (the core's rule in plan_engine, written as JSON Schema).
_FLOOR_NEEDS_AN_AMPLITUDE: dict[str, Any] = {
    "if": {"required": ["floor"]},
    "then": {
        "anyOf": [
            {
                "required": ["tones"],
                "properties": {"tones": {"contains": _some_member("amplitude")}},
            },
            {
                "required": ["sources"],
                "properties": {
                    "sources": {
                        "contains": _some_member("amplitude", "amplitudes", "harmonic_amplitudes")
                    }
                },
            },
        ]
    },
}


def _band_within_series(series: str, when: dict[str, Any]) -> dict[str, Any]:
    """JSON Schema: without rates_hz, the band ends within the span fs/2.56 of the
    highest rate of the common series the request uses (the core's span rule)."""
    top = max(RATE_SERIES[series]) / SPAN_DIVISOR
    edge = {"maximum": top}
    return {"if": when, "then": {"properties": {"band_hz": {"prefixItems": [edge, edge]}}}}


_NO_RATES = {"not": {"required": ["rates_hz"]}}
_ANALYSER = {"required": ["rate_series"], "properties": {"rate_series": {"const": "analyser"}}}
_SPAN_OF_THE_SERIES = [
    _band_within_series("analyser", {"allOf": [_NO_RATES, _ANALYSER]}),
    _band_within_series("converter", {"allOf": [_NO_RATES, {"not": _ANALYSER}]}),
]


class PlanIn(StrictModel):
    """Choose the cheapest sample rate and anti-alias filter for the given sources."""

    model_config = strict_with_rules(
        [
            at_least_one("tones", "sources"),
            exactly_one("rejection_db", "floor"),
            not_together("speed_range_rpm", "speed_tolerance_pct"),
            not_together("rates_hz", "rate_series"),
            _FLOOR_NEEDS_AN_AMPLITUDE,
            *_SPAN_OF_THE_SERIES,
        ],
        {"speed_range_rpm": ["nominal_rpm"]},
    )

    band_hz: PlanBandHz = Field(
        description="Band of interest [low, high], Hz (high first is read as the same band)"
    )
    tones: list[ToneIn] | None = Field(
        None, min_length=1, max_length=MAX_TONES_IN, description="Explicit tones"
    )
    sources: list[SourceIn] | None = Field(
        None,
        min_length=1,
        max_length=MAX_SOURCES,
        validate_default=True,
        description="Machine sources expanded into tones, given at nominal_rpm",
    )
    nominal_rpm: float | None = Field(
        None,
        gt=0,
        le=6e6,
        allow_inf_nan=False,
        description="The speed, rpm, at which the sources are given; needed for "
        "speed_range_rpm and numeric orders of interest",
    )
    speed_range_rpm: tuple[Rpm, Rpm] | None = Field(
        None,
        description="Speeds to plan for [min, max], rpm (needs nominal_rpm; given max "
        "first, read as the same range)",
    )
    speed_tolerance_pct: float | None = Field(
        None,
        ge=0,
        le=99,
        allow_inf_nan=False,
        description="Instead of speed_range_rpm: ± this many percent of nominal speed",
    )
    rejection_db: float | None = Field(
        None,
        ge=0,
        le=300,
        allow_inf_nan=False,
        description="Required alias rejection, dB below the strongest in-band tone",
    )
    floor: float | None = Field(
        None,
        gt=0,
        le=1e12,
        allow_inf_nan=False,
        validate_default=True,
        description="Instead of rejection_db: the highest allowed alias level, amplitude unit",
    )
    bin_width_hz: Hz | None = Field(None, description="Required bin width, Hz (at most this)")
    resolve: tuple[Label, Label] | None = Field(
        None,
        description="Two tones ('label' or 'source: label') that must be resolved at every "
        "speed in the range",
        json_schema_extra={"uniqueItems": True},
    )
    window: Window = Field("hann", description="Analysis window (sets the main-lobe width)")
    rates_hz: list[Rate] | None = Field(
        None, min_length=1, max_length=MAX_RATES, description="Candidate sample rates, Hz"
    )
    rate_series: Literal["converter", "analyser"] | None = Field(
        None,
        description="Instead of rates_hz: a common series (default 'converter': 1 kS/s to "
        "262.144 kS/s; 'analyser': 2.56 × 1-2-5 spans)",
    )
    filters: list[FilterIn] | None = Field(
        None,
        min_length=1,
        max_length=MAX_FILTERS,
        description="Candidate anti-alias filters; default none, Butterworth 2/4/6/8, "
        "Chebyshev I 8, elliptic 8, cutoff at the band edge",
    )
    lines_options: list[Lines] | None = Field(
        None,
        min_length=1,
        max_length=MAX_LINES_OPTIONS,
        description="Analysis lines on offer; default 100·2^n, 100 to 102,400",
    )
    averages: int = Field(1, ge=1, le=100_000, description="Records averaged")
    overlap_pct: float = Field(
        0.0, ge=0, lt=100, allow_inf_nan=False, description="Overlap of records, %"
    )
    max_band_loss_db: float = Field(
        3.1,
        ge=0,
        le=100,
        allow_inf_nan=False,
        description="Largest filter loss allowed inside the band, dB",
    )
    sensor: SensorIn | None = Field(None, description="Mounted sensor resonance, if any")
    runup: RunUpIn | None = Field(
        None, description="Include the run-up through the recommended chain"
    )

    @field_validator("sources")
    @classmethod
    def _something_to_plan(cls, v: list[Any] | None, info: ValidationInfo) -> list[Any] | None:
        if v is None and "tones" in info.data and info.data["tones"] is None:
            raise ValueError("give at least one tone in tones or one source in sources")
        return v

    @field_validator("speed_range_rpm")
    @classmethod
    def _speed_range(
        cls, v: tuple[float, float] | None, info: ValidationInfo
    ) -> tuple[float, float] | None:
        if v is None:
            return v
        # Given fastest first, it is the same range of speeds: put it in order.
        v = (min(v), max(v))
        if "nominal_rpm" not in info.data:
            return v  # nominal_rpm itself failed; that error is reported
        nominal = info.data["nominal_rpm"]
        if nominal is None:
            raise ValueError(
                "speed_range_rpm needs nominal_rpm, the speed at which the sources are given"
            )
        if v[1] > 100 * nominal:
            raise ValueError(
                f"speed_range_rpm max {v[1]:g} must be <= 100 × nominal_rpm ({100 * nominal:g})"
            )
        return v

    @field_validator("speed_tolerance_pct")
    @classmethod
    def _one_speed_spec(cls, v: float | None, info: ValidationInfo) -> float | None:
        if v is not None and info.data.get("speed_range_rpm") is not None:
            raise ValueError("give speed_range_rpm or speed_tolerance_pct, not both")
        return v

    @field_validator("floor")
    @classmethod
    def _one_requirement(cls, v: float | None, info: ValidationInfo) -> float | None:
        if "rejection_db" not in info.data:
            return v  # rejection_db itself failed; that error is reported
        rej = info.data["rejection_db"]
        if v is not None and rej is not None:
            raise ValueError(
                "give rejection_db (dB below the strongest in-band tone) or floor "
                "(absolute level), not both"
            )
        if v is None and rej is None:
            raise ValueError(
                "give rejection_db (dB below the strongest in-band tone) or floor "
                "(absolute alias level in the amplitude unit)"
            )
        return v

    @field_validator("resolve")
    @classmethod
    def _two_tones(cls, v: tuple[str, str] | None) -> tuple[str, str] | None:
        if v is not None and v[0] == v[1]:
            raise ValueError(f"resolve names the same tone twice ({v[0]!r})")
        return v

    @field_validator("rate_series")
    @classmethod
    def _one_rate_spec(cls, v: str | None, info: ValidationInfo) -> str | None:
        if v is not None and info.data.get("rates_hz") is not None:
            raise ValueError("give rates_hz or rate_series, not both")
        return v


# --------------------------------------------------------------------------- responses


class FilterOut(BaseModel):
    name: str = Field(description="Readable, e.g. '4th-order Butterworth at 5 kHz'")
    family: str
    order: int
    ripple_db: float | None = None
    stop_atten_db: float | None = None
    cutoff_hz: float | None = Field(None, description="Fixed cutoff as offered, Hz")
    cutoff_fraction: float | None = Field(None, description="Cutoff as offered, fraction of fs")


class RecommendationOut(BaseModel):
    sample_rate_hz: float
    filter: FilterOut
    cutoff_hz: float | None = Field(description="The filter's cutoff at this rate, Hz")
    chain: list[StageIn] = Field(
        description="The chain, stage by stage, in the request's chain model: send it as "
        "`chain` to /api/v1/fold or /api/v1/diagnose as it is"
    )
    stages: list[str] = Field(description="The chain, one readable name per stage")
    lines: int
    span_hz: float
    bin_width_hz: float
    required_bin_hz: float | None = Field(description="Widest bin the resolution allows, Hz")
    record_s: float
    samples: int
    averages: int
    overlap_pct: float
    total_s: float
    window: str
    mainlobe_bins: float
    limit_db: float = Field(description="Highest allowed alias level, dB re one unit")
    reference_db: float | None = Field(description="Strongest in-band tone, dB re one unit")
    worst_margin_db: float | None = Field(
        description="Smallest margin below the limit, dB; null when no alias reaches the band"
    )
    band_loss_db: float = Field(description="Largest filter loss inside the band, dB")


class ToneAliasOut(BaseModel):
    label: str
    source: str
    aliases_into_band: bool
    true_hz: float | None
    apparent_hz: float | None
    zone: int | None
    speed_factor: float | None = Field(description="Speed of the worst alias, factor of nominal")
    rpm: float | None
    level_db: float | None = Field(description="Worst alias level, dB re one unit")
    margin_db: float | None = Field(description="Limit minus level, dB")
    amplitude_assumed: bool


class RejectedOut(BaseModel):
    sample_rate_hz: float
    filter: FilterOut
    cutoff_hz: float | None
    failure: Literal["span", "resolution", "band_loss", "alias"]
    reason: str
    tone: str | None = None
    tone_source: str | None = None
    apparent_hz: float | None = None
    excess_db: float | None = None
    speed_factor: float | None = None
    rpm: float | None = None


class FoldLineOut(BaseModel):
    speed_factor: float
    rpm: float | None
    true_hz: float
    multiple: int


class RunUpLineOut(BaseModel):
    label: str
    source: str
    interest: bool
    apparent_hz: list[float]
    zone: list[int]
    fold_lines: list[FoldLineOut]


class CrossingOut(BaseModel):
    speed_factor: float
    rpm: float | None
    apparent_hz: float
    alias_label: str
    alias_source: str
    crossed_label: str
    crossed_source: str
    alias_level: float | None
    crossed_level: float | None
    touching: bool


class RunUpOut(BaseModel):
    speed_factor: list[float]
    rpm: list[float] | None
    points_computed: int
    final_rate_hz: float
    tolerance_hz: float
    band_hz: tuple[float, float]
    lines: list[RunUpLineOut]
    fold_lines_total: int
    crossings: list[CrossingOut]
    crossings_total: int


class ConfirmRateOut(BaseModel):
    """A second sample rate to confirm the plan's aliases with a multi-rate test."""

    sample_rate_hz: float = Field(description="The additional rate, S/s, from the rates considered")
    separation_bins: float = Field(
        description="Smallest distance, in that capture's bins (same lines), between where "
        "an aliased tone and a real line at its apparent frequency would land"
    )
    tones: list[str] = Field(description="The aliased tones it tells from real lines")
    sentence: str


class PlanOut(BaseModel):
    band_hz: tuple[float, float]
    speed_range: dict[str, Any] = Field(description="Speeds planned for: factor and rpm")
    recommendation: RecommendationOut
    tones: list[ToneAliasOut]
    rejected: list[RejectedOut] = Field(description="Every cheaper option, in cost order")
    residual_risk: list[str]
    amplitude_basis: Literal[
        "known", "unknown_alias_as_strongest", "unknown_reference_as_weakest", "all_unknown"
    ] = Field(
        description=(
            "Which amplitude assumption set the answer. A tone without an amplitude is "
            "taken on the cautious side of each role: as strong as the strongest given "
            "amplitude where its alias counts, as weak as the weakest where it sets the "
            "allowed alias level"
        )
    )
    amplitude_basis_text: str = Field(description="The same as one sentence")
    runup: RunUpOut | None = None
    confirm_rate: ConfirmRateOut | None = Field(
        None,
        description="A second rate to confirm aliases: when tones alias into the band, "
        "the additional rate that best separates them from real lines (a capture at both "
        "rates is the multi-rate test of /api/v1/compare-rates); null when none alias",
    )
    caution: str
    computation_version: str
