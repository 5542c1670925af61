"""Shared dependencies of the routers, as ``Annotated`` aliases."""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request

from ..config import Settings

__all__ = ["SettingsDep"]


async def _settings(request: Request) -> Settings:
    # async: FastAPI would run a plain function in a worker thread on every request.
    settings: Settings = request.app.state.settings
    return settings


SettingsDep = Annotated[Settings, Depends(_settings)]
