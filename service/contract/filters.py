"""The one anti-alias filter model.

:class:`FilterFields` holds what every analog low-pass shares (family, order, cutoff,
ripple, stopband attenuation, measured table). :class:`AnalogFilterIn` is a filter in a
chain (``anti_alias``, an ``analog_lowpass`` stage); :class:`FilterIn` is a filter the
planner may choose, which may also be "none" and may follow the sample rate
(``cutoff_fraction``). Both convert to the core's ``AnalogLowpass``.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import Field, ValidationInfo, field_validator, model_validator

from ..core import stages
from ..core.filters import MIN_CUTOFF_HZ, MIN_RIPPLE_DB, MIN_STOP_ATTEN_DB
from .common import MAX_HZ, Db, Hz, StrictModel, exactly_one, not_together, strict_with_rules

__all__ = ["AnalogFilterIn", "FilterFamily", "FilterFields", "FilterIn", "PlanFilterFamily"]

FilterFamily = Literal["butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel"]
PlanFilterFamily = Literal[
    "none", "butterworth", "bessel", "chebyshev1", "chebyshev2", "elliptic", "table"
]


DESIGN_FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel")


#: A filter's cutoff, Hz: the core designs from MIN_CUTOFF_HZ (see service.core.filters).
Cutoff = Annotated[float, Field(ge=MIN_CUTOFF_HZ, le=MAX_HZ, allow_inf_nan=False)]


def _needs_when(families: tuple[str, ...], member: str) -> dict[str, Any]:
    """JSON Schema: a filter of one of ``families`` must give ``member``."""
    return {
        "if": {"properties": {"family": {"enum": list(families)}}, "required": ["family"]},
        "then": {"required": [member]},
    }


def _forbids_when(families: tuple[str, ...], member: str) -> dict[str, Any]:
    """JSON Schema: a filter of one of ``families`` must leave ``member`` out."""
    return {
        "if": {"properties": {"family": {"enum": list(families)}}, "required": ["family"]},
        "then": {"not": {"required": [member]}},
    }


#: Ripple belongs to chebyshev1 and elliptic, stopband attenuation to chebyshev2 and
#: elliptic; the core refuses either where it does not belong.
_RIPPLE_AND_STOP = [
    _needs_when(("chebyshev1", "elliptic"), "ripple_db"),
    _needs_when(("chebyshev2", "elliptic"), "stop_atten_db"),
    _forbids_when(("butterworth", "bessel", "chebyshev2", "none", "table"), "ripple_db"),
    _forbids_when(("butterworth", "bessel", "chebyshev1", "none", "table"), "stop_atten_db"),
]


class FilterFields(StrictModel):
    """The fields every analog low-pass shares; ``family``, ``order`` and ``cutoff_hz``
    are narrowed by each use."""

    family: str | None = None
    order: int | None = None
    cutoff_hz: Cutoff | None = None
    # The core's lower bounds (see service.core.filters): below them scipy's prototypes
    # divide by a ripple factor that rounds to zero (found by fuzzing).
    ripple_db: float | None = Field(
        None,
        ge=MIN_RIPPLE_DB,
        le=6,
        allow_inf_nan=False,
        description="Passband ripple, dB (chebyshev1, elliptic)",
    )
    stop_atten_db: float | None = Field(
        None,
        ge=MIN_STOP_ATTEN_DB,
        le=200,
        allow_inf_nan=False,
        description="Stopband attenuation, dB (chebyshev2, elliptic)",
    )
    table_hz: list[Hz] | None = Field(
        None, min_length=2, max_length=10_000, description="Measured response: frequencies, Hz"
    )
    table_gain_db: list[Db] | None = Field(
        None, min_length=2, max_length=10_000, description="Measured response: gain, dB"
    )


class AnalogFilterIn(FilterFields):
    """An analog low-pass: a named family design, or a measured response table."""

    model_config = strict_with_rules(
        [
            exactly_one("family", "table_hz"),
            *_RIPPLE_AND_STOP,
        ],
        {
            "family": ["order", "cutoff_hz"],
            "table_hz": ["table_gain_db"],
            "table_gain_db": ["table_hz"],
        },
    )

    family: FilterFamily | None = Field(
        None,
        description="Design family. The cutoff is the -3 dB frequency for butterworth and "
        "bessel, the passband (ripple) edge for chebyshev1 and elliptic, and the stopband "
        "edge for chebyshev2.",
    )
    order: int | None = Field(None, ge=1, le=20, description="Filter order, 1 to 20")
    cutoff_hz: Cutoff | None = None

    @model_validator(mode="after")
    def _one_kind(self) -> AnalogFilterIn:
        has_table = self.table_hz is not None or self.table_gain_db is not None
        if has_table and self.family is not None:
            raise ValueError("give either a filter family or a measured table, not both")
        if has_table:
            if self.table_hz is None or self.table_gain_db is None:
                raise ValueError("a measured table needs both table_hz and table_gain_db")
            if len(self.table_hz) != len(self.table_gain_db):
                raise ValueError(
                    f"table_hz has {len(self.table_hz)} points but table_gain_db has "
                    f"{len(self.table_gain_db)}; they must match"
                )
            return self
        if self.family is None:
            raise ValueError(
                "give a filter family (butterworth, chebyshev1, chebyshev2, "
                "elliptic, bessel) or a measured table"
            )
        if self.order is None or self.cutoff_hz is None:
            raise ValueError(f"a {self.family} filter needs order and cutoff_hz")
        if self.family in ("chebyshev1", "elliptic") and self.ripple_db is None:
            raise ValueError(f"a {self.family} filter needs ripple_db")
        if self.family in ("chebyshev2", "elliptic") and self.stop_atten_db is None:
            raise ValueError(f"a {self.family} filter needs stop_atten_db")
        return self

    def to_core(self) -> stages.AnalogLowpass:
        return stages.AnalogLowpass(
            family=self.family,
            order=self.order,
            cutoff_hz=self.cutoff_hz,
            ripple_db=self.ripple_db,
            stop_atten_db=self.stop_atten_db,
            table_hz=tuple(self.table_hz) if self.table_hz else None,
            table_gain_db=tuple(self.table_gain_db) if self.table_gain_db else None,
        )


class FilterIn(FilterFields):
    """One analog anti-alias filter the planner may choose."""

    model_config = strict_with_rules(
        [
            not_together("cutoff_hz", "cutoff_fraction"),
            _needs_when(DESIGN_FAMILIES, "order"),
            {  # a designed filter has an order of at least 1 (0 is "no filter")
                "if": {
                    "properties": {"family": {"enum": list(DESIGN_FAMILIES)}},
                    "required": ["family"],
                },
                "then": {"properties": {"order": {"minimum": 1}}},
            },
            _needs_when(("table",), "table_hz"),
            _forbids_when(("none", "table"), "order"),
            # No filter has no cutoff, and a measured table's response is fixed.
            _forbids_when(("none", "table"), "cutoff_hz"),
            _forbids_when(("none", "table"), "cutoff_fraction"),
            _forbids_when((*DESIGN_FAMILIES, "none"), "table_hz"),
            *_RIPPLE_AND_STOP,
        ],
        {"table_hz": ["table_gain_db"], "table_gain_db": ["table_hz"]},
    )

    family: PlanFilterFamily = Field(
        description="'none' (no filter), a design family, or 'table' (a measured response)"
    )
    order: int | None = Field(
        None,
        ge=0,
        le=20,
        validate_default=True,
        description="Order, 1 to 20 for a design family; 0 or absent otherwise",
    )
    cutoff_hz: Hz | None = Field(
        None, description="A fixed cutoff, Hz (does not follow the sample rate)"
    )
    cutoff_fraction: float | None = Field(
        None,
        gt=0,
        le=0.5,
        allow_inf_nan=False,
        description="Cutoff as a fraction of the sample rate, e.g. 0.390625 for fs/2.56. With "
        "neither cutoff the cutoff sits at the band's upper edge",
    )
    name: str = Field("", max_length=200, description="Display name (for a measured table)")

    @field_validator("order")
    @classmethod
    def _order_needed(cls, v: int | None, info: ValidationInfo) -> int | None:
        fam = info.data.get("family")
        if fam in ("none", "table"):
            if v not in (None, 0):
                raise ValueError(f"order={v} does not apply to family {fam!r}; leave it out")
        elif fam is not None and not v:
            raise ValueError(f"a {fam} filter needs an order between 1 and 20")
        return v

    @field_validator("cutoff_fraction")
    @classmethod
    def _one_cutoff(cls, v: float | None, info: ValidationInfo) -> float | None:
        if v is not None and info.data.get("cutoff_hz") is not None:
            raise ValueError("give cutoff_hz or cutoff_fraction, not both")
        return v
