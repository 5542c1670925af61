"""Request and response models of a run-up recording (contract under /api/v1/run-up).

The chain is given as everywhere else (``sample_rate_hz`` with ``anti_alias``, or a full
``chain``: the same base as :class:`~service.contract.diagnose.DiagnoseIn`), the known
sources with the one source-model family, and the record either as JSON arrays or as a
multipart upload whose channels ``upload`` names.
"""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BaseModel, Field, model_validator

from .common import StrictModel, not_together, strict_with_rules
from .diagnose import Finite, _ChainOptional
from .fold import ToneIn
from .saved import SavedLinkOut
from .sources import SourceIn

__all__ = [
    "RunUpRecordIn",
    "RunUpRecordLineOut",
    "RunUpRecordOut",
    "RunUpUploadIn",
    "SpeedTraceIn",
]

Rpm = Annotated[float, Field(ge=0, le=1e7, allow_inf_nan=False)]
Seconds = Annotated[float, Field(ge=0, le=1e7, allow_inf_nan=False)]
#: A channel of an uploaded file: its index from 0, or its column name (CSV).
Channel = Annotated[int, Field(ge=0, le=1023)] | Annotated[str, Field(min_length=1, max_length=200)]


class SpeedTraceIn(StrictModel):
    """The controller's speed against time (interpolated between the values)."""

    time_s: list[Seconds] = Field(min_length=2, description="Times, s, strictly increasing")
    rpm: list[Rpm] = Field(min_length=2, description="Shaft speed at each time, rpm")

    @model_validator(mode="after")
    def _same_length(self) -> SpeedTraceIn:
        if len(self.time_s) != len(self.rpm):
            raise ValueError(
                f"time_s has {len(self.time_s)} values but rpm has {len(self.rpm)}; they must match"
            )
        return self


class RunUpUploadIn(StrictModel):
    """How to read an uploaded run-up record (multipart only)."""

    vibration_channel: Channel = Field(
        0, description="Vibration channel: index from 0, or the column name of a CSV"
    )
    tacho_channel: Channel | None = Field(
        None, description="Tacho channel (index or column name); leave out with a speed_trace"
    )
    sample_rate_hz: float | None = Field(
        None,
        gt=0,
        le=1e10,
        allow_inf_nan=False,
        description="Rate of a .npy or text record (WAV files carry their own)",
    )


_RUNUP_RULES = strict_with_rules(
    [
        not_together("vibration", "upload"),
        not_together("tacho", "speed_trace"),
        not_together("nperseg", "bin_width_hz"),
        not_together("chain", "sample_rate_hz"),
        not_together("chain", "anti_alias"),
    ]
)


class RunUpRecordIn(_ChainOptional):
    """A run-up record: which lines of the frequency × speed map are folded, and from where.

    A JSON body carries ``vibration`` and either ``tacho`` (with ``pulses_per_rev``) or
    ``speed_trace``; with a multipart upload the file takes the place of the arrays and
    ``upload`` names its channels.
    """

    model_config = _RUNUP_RULES

    vibration: list[Finite] | None = Field(
        None, min_length=64, description="Vibration samples, any unit (JSON only)"
    )
    tacho: list[Finite] | None = Field(
        None, min_length=64, description="Tacho samples, same rate and length (JSON only)"
    )
    pulses_per_rev: int = Field(1, ge=1, le=1024, description="Tacho pulses per revolution")
    speed_trace: SpeedTraceIn | None = None
    upload: RunUpUploadIn | None = Field(
        None, description="Multipart only: which channels of the file to read"
    )
    sources: list[SourceIn] | None = Field(
        None, min_length=1, max_length=500, description="Known sources, matched to the lines"
    )
    tones: list[ToneIn] | None = Field(
        None, min_length=1, description="Known fixed frequencies (carriers), Hz"
    )
    nominal_rpm: float | None = Field(
        None,
        gt=0,
        le=1e7,
        allow_inf_nan=False,
        description="Shaft speed the sources are described at, rpm; sets each tone's order",
    )
    nperseg: int | None = Field(
        None, ge=64, le=65_536, description="Frame length, samples; default 1024"
    )
    bin_width_hz: float | None = Field(
        None,
        gt=0,
        le=1e9,
        allow_inf_nan=False,
        description="Resolution as a bin width, Hz (frame length = sample rate / bin width)",
    )
    max_order: float = Field(
        64.0, gt=0, le=4096, allow_inf_nan=False, description="Top of the order spectrum"
    )

    @model_validator(mode="after")
    def _check(self) -> RunUpRecordIn:
        if self.chain is not None and (self.sample_rate_hz is not None or self.anti_alias):
            raise ValueError("give either sample_rate_hz (with optional anti_alias) or chain")
        if self.tacho is not None and self.speed_trace is not None:
            raise ValueError("give either tacho or speed_trace, not both")
        if self.nperseg is not None and self.bin_width_hz is not None:
            raise ValueError("give either nperseg or bin_width_hz, not both")
        return self


class ZoneSpanOut(BaseModel):
    zone: int = Field(description="Nyquist zone of the true frequency (1 = below fs/2)")
    inverted: bool = Field(description="Even zone: the line runs down as speed rises")
    rpm_from: float
    rpm_to: float


class RunUpRecordLineOut(BaseModel):
    kind: str = Field(
        description="order, folded_order, fixed, fixed_alias, sideband, resonance or unexplained"
    )
    label: str
    known: bool = Field(description="Matched to a known source or tone")
    order: float | None = Field(description="Speed-proportional part, per revolution")
    fixed_hz: float | None = Field(description="Fixed part of the true frequency, Hz")
    aliased: bool = Field(description="Some part lies above the Nyquist frequency")
    zones: list[ZoneSpanOut]
    rpm_range: tuple[float, float] = Field(description="Speed range the line covers, rpm")
    apparent_hz_range: tuple[float, float] = Field(description="Where it shows, Hz")
    true_hz_range: tuple[float, float] | None = Field(description="Its true frequency, Hz")
    sweep: float = Field(description="Share of the record's speed range covered")
    residual_hz: float | None = Field(description="RMS fit error of the inliers, Hz")
    level_db_max: float = Field(description="Highest level along the line, dB re 1 unit")
    confidence: float = Field(description="0 to 1")
    sentence: str


class RunUpRecordOut(BaseModel):
    input: str = Field(description="What was read: the file, its format and channels")
    speed: dict[str, Any] = Field(description="Source, range, duration, pulses repaired")
    map: dict[str, Any] = Field(description="Sample rate, Nyquist, bin width, frames")
    counts: dict[str, int]
    lines: list[RunUpRecordLineOut]
    predicted: list[dict[str, Any]] = Field(
        description="The chain's folded lines for the known (or found) orders"
    )
    order_spectrum: dict[str, Any] = Field(description="Computed order tracking summary")
    display: dict[str, Any] = Field(description="Decimated map, lines and order spectrum")
    stages: list[str]
    notes: list[str]
    caution: str
    computation_version: str
    saved: SavedLinkOut | None = Field(None, description="With `?save=true`: the link")
