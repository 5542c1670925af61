"""Shared field types of every request model: bounded numbers, labels, the strict base."""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import AfterValidator, BaseModel, ConfigDict, Field

__all__ = [
    "MAX_HZ",
    "UNION_TAG_PREFIX",
    "BandHz",
    "Db",
    "Hz",
    "HzOrZero",
    "Label",
    "Rate",
    "StrictModel",
    "at_least_one",
    "band_order",
    "by_json_type",
    "exactly_one",
    "not_together",
    "omit_nulls",
    "strict_with_rules",
]

#: The largest frequency any field accepts: well above any machine or converter.
MAX_HZ = 1e10

Hz = Annotated[float, Field(gt=0, le=MAX_HZ, allow_inf_nan=False, description="Hz, > 0")]
HzOrZero = Annotated[float, Field(ge=0, le=MAX_HZ, allow_inf_nan=False, description="Hz, >= 0")]
Db = Annotated[float, Field(ge=-400, le=400, allow_inf_nan=False, description="dB")]
Label = Annotated[str, Field(min_length=1, max_length=200)]
#: A sample rate: at least 1 S/s (the slowest the core follows through decimation) and
#: at most MAX_HZ, so a tone's Nyquist zone (f / (fs/2) <= 2e10) stays a plain integer.
Rate = Annotated[
    float, Field(ge=1, le=MAX_HZ, allow_inf_nan=False, description="Sample rate, S/s, >= 1")
]


def band_order(v: tuple[float, float]) -> tuple[float, float]:
    """A band's two edges, low first. Given high first they name the same band, so they
    are put in order (the answer echoes the band it used); the same edge twice is no band."""
    low, high = sorted(v)
    if low == high:
        raise ValueError(
            f"band_hz={list(v)} gives the same edge twice; a band needs two different edges"
        )
    return (low, high)


#: A band of interest: its two edges, Hz, each >= 0, low first (high first is read as the
#: same band). The schema says all of it: two different numbers (``uniqueItems``), so the
#: higher one is > 0.
BandHz = Annotated[
    tuple[HzOrZero, HzOrZero],
    AfterValidator(band_order),
    Field(
        description="Band of interest [low, high], Hz (given high first, read as the same band)",
        json_schema_extra={"uniqueItems": True},
    ),
]

#: Union members are tagged ``as-…`` so a value is checked against the member its JSON
#: type picks, and the error names that member's rule (an error path skips the tag).
UNION_TAG_PREFIX = "as-"


def by_json_type(value: Any) -> str:
    """The member a number-or-text union checks ``value`` against."""
    return "as-text" if isinstance(value, str) else "as-number"


def omit_nulls(schema: dict[str, Any]) -> None:
    """Publish optional request members as "leave it out", not "send null".

    The server still reads a null as absent; saying so in the schema lets the
    ``required``-based rules (``oneOf``, ``dependentRequired``) mean what they say."""
    for prop in schema.get("properties", {}).values():
        branches = prop.get("anyOf")
        if "default" in prop and prop["default"] is None and branches:
            rest = [b for b in branches if b != {"type": "null"}]
            if len(rest) < len(branches):
                del prop["anyOf"], prop["default"]
                if len(rest) == 1:  # the member's own words win over the type's
                    for key, value in rest[0].items():
                        prop.setdefault(key, value)
                else:
                    prop["anyOf"] = rest


class StrictModel(BaseModel):
    model_config = ConfigDict(
        extra="forbid", allow_inf_nan=False, frozen=True, json_schema_extra=omit_nulls
    )


def exactly_one(*names: str) -> dict[str, Any]:
    """JSON Schema: exactly one of ``names`` is given."""
    return {"oneOf": [{"required": [n]} for n in names]}


def at_least_one(*names: str) -> dict[str, Any]:
    """JSON Schema: at least one of ``names`` is given."""
    return {"anyOf": [{"required": [n]} for n in names]}


def not_together(*names: str) -> dict[str, Any]:
    """JSON Schema: ``names`` are not all given together."""
    return {"not": {"required": list(names)}}


def strict_with_rules(
    rules: list[dict[str, Any]], depends: dict[str, list[str]] | None = None
) -> ConfigDict:
    """The strict model config plus cross-field rules written into the published schema
    (``allOf`` of the rules, ``dependentRequired``), so clients and schema-driven tools
    see them; the validators in code still give the messages."""

    def extra(schema: dict[str, Any]) -> None:
        omit_nulls(schema)
        schema["allOf"] = rules
        if depends:
            schema["dependentRequired"] = depends

    return ConfigDict(extra="forbid", allow_inf_nan=False, frozen=True, json_schema_extra=extra)
