"""Shared field types of every request model: bounded numbers, labels, the strict base."""

from __future__ import annotations

from typing import Annotated

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["MAX_HZ", "Db", "Hz", "HzOrZero", "Label", "StrictModel"]

#: The largest frequency any field accepts: well above any machine or converter.
MAX_HZ = 1e10

Hz = Annotated[float, Field(gt=0, le=MAX_HZ, allow_inf_nan=False, description="Hz, > 0")]
HzOrZero = Annotated[float, Field(ge=0, le=MAX_HZ, allow_inf_nan=False, description="Hz, >= 0")]
Db = Annotated[float, Field(ge=-400, le=400, allow_inf_nan=False, description="dB")]
Label = Annotated[str, Field(min_length=1, max_length=200)]


class StrictModel(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, frozen=True)
