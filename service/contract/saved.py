"""Saved results: the save request, the link answer and the stored record."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["SaveIn", "SavedLinkOut", "SavedOut", "SavedRecordOut"]


class SaveIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    kind: Literal["fold", "diagnose", "compare", "plan", "run-up"] = Field(
        description="Which computation: the request is what that endpoint takes"
    )
    request: dict[str, Any] = Field(description="The request body of that endpoint")
    title: str | None = Field(None, max_length=200, description="A short title for the link")


class SavedLinkOut(BaseModel):
    """The one link shape of every saved kind."""

    id: str = Field(description="Unguessable id (192 random bits)")
    delete_token: str = Field(description="Keep this: it is the only way to delete the result")
    url: str = Field(description="Page a colleague can open")
    api_url: str = Field(description="The saved result in the JSON API")


class SavedOut(SavedLinkOut):
    kind: str
    computation_version: str
    result: dict[str, Any]


class SavedRecordOut(BaseModel):
    id: str
    kind: str
    title: str | None
    created_at: str
    computation_version: str = Field(description="Version of the computation that made it")
    app_version: str
    current_computation_version: str
    request: dict[str, Any]
    result: dict[str, Any]
    spectrum: dict[str, list[float]] | None = Field(
        None, description="The measured spectrum, if the result has one (freq_hz, amplitude)"
    )
    spectra: list[dict[str, list[float]]] | None = Field(
        None,
        description="A comparison's spectra, one per capture in order (freq_hz, amplitude)",
    )
