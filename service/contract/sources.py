"""Request models for machine sources, one per source type, told apart by ``type``."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from ..core import sources as src
from .common import (
    MAX_HZ,
    Hz,
    Label,
    exactly_one,
    not_together,
    omit_nulls,
    strict_with_rules,
)

__all__ = ["SOURCE_MODELS", "SourceIn", "source_to_core"]

#: Shaft speeds from 0.001 rpm (a slow kiln) to 6,000,000 rpm: below, the machine is
#: standing still and the tones' arithmetic turns to denormals (found by fuzzing).
Rpm = Annotated[float, Field(ge=1e-3, le=6e6, allow_inf_nan=False)]
SpeedHz = Annotated[float, Field(ge=1e-3 / 60, le=1e5, allow_inf_nan=False)]
#: An amplitude, in any unit: > 0 (a tone of no amplitude is left out; a level in dB
#: needs a positive amplitude) and at most 1e12.
Amplitude = Annotated[float, Field(gt=0, le=1e12, allow_inf_nan=False)]
Harmonics = Annotated[int, Field(ge=1, le=100, description="Number of harmonics, 1 to 100")]


class _SourceBase(BaseModel):
    model_config = ConfigDict(
        extra="forbid", allow_inf_nan=False, frozen=True, json_schema_extra=omit_nulls
    )

    label: Label
    amplitude: Amplitude | None = Field(
        None, description="Amplitude of the main line at the sensor, any unit"
    )


class _WithHarmonicAmplitudes(BaseModel):
    harmonic_amplitudes: list[Amplitude] | None = Field(
        None,
        max_length=200,
        description="Amplitude of each harmonic (or listed order) in turn, instead of "
        "`amplitude`; missing ones are unknown",
    )


_SPEEDS = ("speed_hz", "speed_rpm", "speed_cpm")


class _Speed(_SourceBase):
    model_config = strict_with_rules(
        [exactly_one(*_SPEEDS), not_together("amplitude", "harmonic_amplitudes")]
    )

    speed_hz: SpeedHz | None = Field(None, description="Shaft speed, Hz (give one of the three)")
    speed_rpm: Rpm | None = None
    speed_cpm: Rpm | None = None

    @model_validator(mode="after")
    def _one_speed(self) -> _Speed:
        given = [n for n in ("speed_hz", "speed_rpm", "speed_cpm") if getattr(self, n) is not None]
        if len(given) != 1:
            raise ValueError(
                f"give exactly one of speed_hz, speed_rpm, speed_cpm (got {given or 'none'})"
            )
        return self


class ShaftIn(_Speed, _WithHarmonicAmplitudes):
    type: Literal["shaft"]
    orders: list[Annotated[float, Field(gt=0, le=1000, allow_inf_nan=False)]] = Field(
        default_factory=lambda: [1.0, 2.0, 3.0],
        min_length=1,
        max_length=200,
        description="Orders (multiples of shaft speed); fractional orders allowed; each once",
        json_schema_extra={"uniqueItems": True},
    )


class GearMeshIn(_Speed, _WithHarmonicAmplitudes):
    model_config = strict_with_rules(
        [
            exactly_one(*_SPEEDS),
            not_together("amplitude", "harmonic_amplitudes"),
            not_together("mating_speed_hz", "mating_speed_rpm"),
        ]
    )

    type: Literal["gear_mesh"]
    teeth: int = Field(ge=1, le=10_000, description="Teeth on the gear whose shaft speed is given")
    harmonics: Harmonics = 3
    sidebands: int = Field(2, ge=0, le=50, description="± shaft-speed sidebands per harmonic")
    mating_speed_hz: SpeedHz | None = Field(
        None, description="Mating shaft speed, Hz, for its sidebands"
    )
    mating_speed_rpm: Rpm | None = None


class BearingIn(_Speed, _WithHarmonicAmplitudes):
    type: Literal["bearing"]
    n_elements: int = Field(ge=3, le=1000, description="Number of rolling elements")
    element_diameter: float = Field(
        gt=0, le=1e4, allow_inf_nan=False, description="Any length unit"
    )
    pitch_diameter: float = Field(ge=1e-6, le=1e5, allow_inf_nan=False, description="Same unit")
    contact_angle_deg: float = Field(0.0, ge=0, lt=90, allow_inf_nan=False)
    harmonics: Harmonics = 3
    defects: list[Literal["FTF", "BPFO", "BPFI", "BSF"]] | None = Field(
        None,
        min_length=1,
        max_length=4,
        description="Which defect frequencies, each once; default all",
        json_schema_extra={"uniqueItems": True},
    )


class BladePassIn(_Speed, _WithHarmonicAmplitudes):
    type: Literal["blade_pass"]
    blades: int = Field(ge=1, le=1000)
    harmonics: Harmonics = 3


class LineIn(_SourceBase, _WithHarmonicAmplitudes):
    model_config = strict_with_rules([not_together("amplitude", "harmonic_amplitudes")])

    type: Literal["line"]
    line_hz: Hz = 50.0
    harmonics: Harmonics | list[Annotated[int, Field(ge=1, le=10_000)]] = Field(
        default_factory=lambda: [1, 2, 3, 5, 7],
        description="How many harmonics (1..N), or which ones",
    )


class PwmIn(_SourceBase):
    model_config = strict_with_rules(
        [
            exactly_one("fundamental_hz", "pole_pairs"),
            {"if": {"required": ["pole_pairs"]}, "then": exactly_one(*_SPEEDS)},
            {
                "if": {"required": ["fundamental_hz"]},
                "then": {"not": {"anyOf": [{"required": [n]} for n in _SPEEDS]}},
            },
        ]
    )

    type: Literal["pwm"]
    carrier_hz: Hz = Field(description="Switching (carrier) frequency, Hz")
    fundamental_hz: Annotated[float, Field(gt=0, le=MAX_HZ, allow_inf_nan=False)] | None = Field(
        None, description="Electrical output frequency f1, Hz (or give pole_pairs and a speed)"
    )
    pole_pairs: int | None = Field(None, ge=1, le=1000)
    speed_cpm: Rpm | None = None
    speed_hz: SpeedHz | None = None
    speed_rpm: Rpm | None = None
    carrier_multiples: int = Field(3, ge=1, le=50)
    sidebands: int = Field(4, ge=0, le=50)
    line_to_line: bool = Field(
        False, description="Line-to-line voltage of a three-phase bridge: triplen sidebands cancel"
    )

    @model_validator(mode="after")
    def _fundamental(self) -> PwmIn:
        speeds = [s for s in (self.speed_hz, self.speed_rpm, self.speed_cpm) if s is not None]
        if self.fundamental_hz is not None:
            if self.pole_pairs is not None or speeds:
                raise ValueError("give fundamental_hz, or pole_pairs with a speed, not both")
        elif self.pole_pairs is None or len(speeds) != 1:
            raise ValueError("give fundamental_hz, or pole_pairs with one of speed_hz, speed_rpm")
        return self


class ResonanceIn(_SourceBase):
    type: Literal["resonance"]
    freq_hz: Hz


class TonesIn(_SourceBase):
    model_config = strict_with_rules([not_together("amplitude", "amplitudes")])

    type: Literal["tones"]
    freq_hz: list[Hz] = Field(min_length=1, max_length=100_000)
    tone_labels: list[Label] | None = Field(None, max_length=100_000)
    amplitudes: list[Amplitude] | None = Field(None, max_length=100_000)
    scales_with_speed: bool = Field(False, description="The tones move with machine speed")


SourceIn = Annotated[
    ShaftIn | GearMeshIn | BearingIn | BladePassIn | LineIn | PwmIn | ResonanceIn | TonesIn,
    Field(discriminator="type"),
]


#: JSON ``type`` → model: the one description of every source type, from which the page
#: forms take their fields.
SOURCE_MODELS: dict[str, type[BaseModel]] = {
    m.model_fields["type"].annotation.__args__[0]: m  # type: ignore[union-attr]
    for m in (ShaftIn, GearMeshIn, BearingIn, BladePassIn, LineIn, PwmIn, ResonanceIn, TonesIn)
}


def source_to_core(s: Any) -> Any:
    """The core source dataclass for one validated request source."""
    return src.source_from_dict(s.model_dump(exclude_none=True))
