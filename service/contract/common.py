"""Shared field types of every request model: bounded numbers, labels, the strict base."""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "MAX_HZ",
    "UNION_TAG_PREFIX",
    "Db",
    "Hz",
    "HzOrZero",
    "Label",
    "Rate",
    "StrictModel",
    "at_least_one",
    "by_json_type",
    "exactly_one",
    "not_together",
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

#: Union members are tagged ``as-…`` so a value is checked against the member its JSON
#: type picks, and the error names that member's rule (an error path skips the tag).
UNION_TAG_PREFIX = "as-"


def by_json_type(value: Any) -> str:
    """The member a number-or-text union checks ``value`` against."""
    return "as-text" if isinstance(value, str) else "as-number"


class StrictModel(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, frozen=True)


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
    extra: dict[str, Any] = {"allOf": rules}
    if depends:
        extra["dependentRequired"] = depends
    return ConfigDict(extra="forbid", allow_inf_nan=False, frozen=True, json_schema_extra=extra)
