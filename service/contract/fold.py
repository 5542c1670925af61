"""Request and response models of the JSON API (``…In`` / ``…Out``), and their conversion
to the core's plain dataclasses. Field names here are a contract under /api/v1."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, Field, TypeAdapter, model_validator

from ..core import chain as ch
from ..core import stages
from ..core.filters import MAX_Q, MIN_Q
from .common import (
    BandHz,
    Hz,
    HzOrZero,
    Label,
    Rate,
    StrictModel,
    at_least_one,
    exactly_one,
    not_together,
    strict_with_rules,
)
from .filters import AnalogFilterIn
from .sources import SourceIn

__all__ = [
    "ChainIn",
    "FoldIn",
    "StageIn",
    "ToneIn",
    "chain_from_request",
    "chain_to_request",
]


class SensorStageIn(StrictModel):
    stage: Literal["sensor"]
    natural_hz: Hz = Field(description="Mounted resonance of the sensor, Hz")
    q: float = Field(ge=MIN_Q, le=MAX_Q, allow_inf_nan=False, description="Quality factor")

    def to_core(self) -> stages.SensorResonance:
        return stages.SensorResonance(natural_hz=self.natural_hz, q=self.q)


class AnalogStageIn(AnalogFilterIn):
    stage: Literal["analog_lowpass"]


class SampleStageIn(StrictModel):
    stage: Literal["sample"]
    rate_hz: Rate = Field(description="Converter sample rate, Hz (S/s)")

    def to_core(self) -> stages.Sample:
        return stages.Sample(rate_hz=self.rate_hz)


class DigitalStageIn(StrictModel):
    """A digital low-pass at the current rate: a design spec, or explicit coefficients."""

    model_config = strict_with_rules(
        [exactly_one("passband_hz", "b")],
        {
            "passband_hz": ["stopband_hz", "atten_db"],
            "stopband_hz": ["passband_hz", "atten_db"],
            "atten_db": ["passband_hz", "stopband_hz"],
            "a": ["b"],
        },
    )

    stage: Literal["digital_lowpass"]
    passband_hz: Hz | None = None
    stopband_hz: Hz | None = None
    atten_db: float | None = Field(None, ge=1, le=200, allow_inf_nan=False)
    b: list[Annotated[float, Field(allow_inf_nan=False)]] | None = Field(
        None, min_length=1, max_length=8192, description="Numerator coefficients"
    )
    a: list[Annotated[float, Field(allow_inf_nan=False)]] | None = Field(
        None, min_length=1, max_length=64, description="Denominator coefficients (IIR)"
    )

    @model_validator(mode="after")
    def _one_kind(self) -> DigitalStageIn:
        spec = (self.passband_hz, self.stopband_hz, self.atten_db)
        if self.b is not None:
            if any(v is not None for v in spec):
                raise ValueError("give either a design spec or coefficients b (and a), not both")
            return self
        if self.a is not None:
            raise ValueError("coefficients a need coefficients b")
        if any(v is None for v in spec):
            raise ValueError(
                "a digital low-pass needs passband_hz, stopband_hz and atten_db, or coefficients b"
            )
        return self

    def to_core(self) -> stages.DigitalLowpass:
        return stages.DigitalLowpass(
            passband_hz=self.passband_hz,
            stopband_hz=self.stopband_hz,
            atten_db=self.atten_db,
            b=tuple(self.b) if self.b is not None else None,
            a=tuple(self.a) if self.a is not None else None,
        )


class DecimateStageIn(StrictModel):
    stage: Literal["decimate"]
    factor: int = Field(ge=1, le=4096, description="Keep every factor-th sample")
    filter: Literal["fir", "iir", "none"] = Field(
        "fir",
        description="'fir' and 'iir' filter before slicing (as scipy.signal.decimate does); "
        "'none' is a bare slice x[::factor], so everything above the new Nyquist folds",
    )

    def to_core(self) -> stages.Decimate:
        return stages.Decimate(factor=self.factor, filter=self.filter)


StageIn = Annotated[
    SensorStageIn | AnalogStageIn | SampleStageIn | DigitalStageIn | DecimateStageIn,
    Field(discriminator="stage"),
]


#: A chain samples exactly once: the schema says so (the order of stages, sample before
#: decimate or digital stages, stays a validator).
ONE_SAMPLE_STAGE: dict[str, Any] = {
    "contains": {"properties": {"stage": {"const": "sample"}}, "required": ["stage"]},
    "minContains": 1,
    "maxContains": 1,
}


class ChainIn(StrictModel):
    """The acquisition chain: a shorthand (sample rate and optional anti-alias filter) or
    a full ordered list of stages."""

    sample_rate_hz: Rate | None = Field(None, description="Shorthand: the sample rate, Hz")
    anti_alias: AnalogFilterIn | None = Field(
        None, description="Shorthand: the analog anti-alias filter before the converter"
    )
    chain: list[StageIn] | None = Field(
        None,
        min_length=1,
        max_length=64,
        json_schema_extra=ONE_SAMPLE_STAGE,
    )

    @model_validator(mode="after")
    def _shorthand_or_chain(self) -> ChainIn:
        if self.chain is not None and self.sample_rate_hz is not None:
            raise ValueError(
                "give either sample_rate_hz (with optional anti_alias) or chain, not both"
            )
        if self.chain is None and self.sample_rate_hz is None:
            raise ValueError("give sample_rate_hz (with optional anti_alias) or a chain")
        if self.chain is not None and self.anti_alias is not None:
            raise ValueError(
                "anti_alias goes with sample_rate_hz; in a chain, add an "
                "analog_lowpass stage instead"
            )
        return self


def chain_from_request(req: ChainIn) -> ch.Chain:
    """The core chain a request describes (not yet validated for stage order)."""
    if req.chain is not None:
        return ch.Chain(stages=tuple(s.to_core() for s in req.chain))
    assert req.sample_rate_hz is not None
    aa = req.anti_alias.to_core() if req.anti_alias is not None else None
    return ch.Chain.shorthand(req.sample_rate_hz, aa)


_STAGES: TypeAdapter[list[StageIn]] = TypeAdapter(list[StageIn])


def chain_to_request(chain: ch.Chain) -> list[dict[str, Any]]:
    """A core chain written as the request's ``chain`` (stages say ``stage``), so a chain
    the service recommends can be sent back to ``/api/v1/fold`` as it is."""
    stages = []
    for d in chain.describe():
        body = {k: v for k, v in d.items() if k != "type"}
        stages.append({"stage": d["type"], **body})
    checked = _STAGES.validate_python(stages)
    return [{"stage": s.stage, **s.model_dump(mode="json", exclude_none=True)} for s in checked]


class ToneIn(StrictModel):
    label: Label
    freq_hz: HzOrZero
    amplitude: float | None = Field(
        None, gt=0, le=1e12, allow_inf_nan=False, description="Amplitude at the sensor, any unit"
    )


class FoldIn(ChainIn):
    """Predict where each tone lands after the acquisition chain."""

    model_config = strict_with_rules(
        [
            exactly_one("sample_rate_hz", "chain"),
            at_least_one("tones", "sources"),
            not_together("chain", "anti_alias"),
        ],
        {"anti_alias": ["sample_rate_hz"]},
    )

    tones: list[ToneIn] | None = Field(
        None, min_length=1, description="Explicit tones (label, freq_hz, optional amplitude)"
    )
    sources: list[SourceIn] | None = Field(
        None, min_length=1, max_length=500, description="Machine sources expanded into tones"
    )
    band_hz: BandHz | None = Field(
        None, description="Band of interest [low, high], Hz; default DC to final rate / 2.56"
    )
    lines: int | None = Field(
        None,
        ge=1,
        le=1_048_576,
        description="Analysis lines over final rate / 2.56 (bin numbers, collision "
        "tolerance); default 3200",
    )
    speed_tolerance_pct: float = Field(
        0.0,
        ge=0,
        le=50,
        allow_inf_nan=False,
        description="Machine speed uncertainty, %: speed-dependent tones become intervals",
    )
    collision_bins: float = Field(
        3.0,
        gt=0,
        le=1000,
        allow_inf_nan=False,
        description="An alias within this many bins of another line is a masking risk",
    )

    @model_validator(mode="after")
    def _something_to_fold(self) -> FoldIn:
        if not self.tones and not self.sources:
            raise ValueError("give at least one tone in tones or one source in sources")
        return self


class StageAttenuationOut(BaseModel):
    stage: str
    attenuation_db: float


class FoldToneOut(BaseModel):
    label: str = Field(description="What the tone is, e.g. 'BPFI 3×'")
    source: str = Field(description="Label of the source it came from")
    kind: str = Field(description="Source type")
    family: str | None = Field(None, description="Harmonic family, if any")
    harmonic: float | None = None
    freq_hz: float = Field(description="True frequency at the sensor, Hz")
    apparent_hz: float = Field(description="Where it shows up after sampling, Hz")
    apparent_low_hz: float = Field(description="Low end of the apparent interval (speed tolerance)")
    apparent_high_hz: float = Field(description="High end of the apparent interval")
    zone: int = Field(description="Nyquist zone of the final rate, from 1")
    inverted: bool = Field(description="Even zone: moves opposite to speed, sidebands swap")
    aliased: bool = Field(description="True frequency above the final Nyquist frequency")
    in_band: bool = Field(description="Lands (or may land) in the band of interest")
    attenuation_db: float = Field(description="Total attenuation through the chain, dB")
    stage_attenuation_db: list[float] = Field(description="Per stage, in chain order, dB")
    folded_at: str | None = Field(None, description="Stage at which the tone first folds")
    amplitude: float | None = Field(None, description="Amplitude at the sensor, if given")
    apparent_amplitude: float | None = Field(None, description="Predicted level in the capture")
    bin: int = Field(description="Bin index for the analysis lines")


class CollisionOut(BaseModel):
    alias: str = Field(description="Label of the aliased tone")
    alias_source: str
    alias_index: int = Field(description="Index of the aliased tone in `tones`")
    other: str = Field(description="Label of the line it lands on or near")
    other_source: str
    other_index: int
    other_aliased: bool
    apparent_hz: float
    separation_hz: float
    separation_bins: float


class FoldOut(BaseModel):
    nyquist_hz: float = Field(description="Nyquist frequency of the final rate, Hz")
    sample_rate_hz: float = Field(description="Converter sample rate, Hz")
    final_rate_hz: float = Field(description="Rate after all decimation, Hz")
    band_hz: tuple[float, float]
    lines: int
    bin_width_hz: float
    speed_tolerance_pct: float
    stages: list[str] = Field(description="The chain, one readable name per stage")
    notes: list[str] = Field(description="Warnings about the chain")
    tones: list[FoldToneOut]
    collisions: list[CollisionOut] = Field(description="Aliases that may mask other lines")
    collisions_total: int
    computation_version: str
