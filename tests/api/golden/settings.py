"""The settings the golden answers are recorded and replayed with."""

from __future__ import annotations

from pathlib import Path

from service.config import Settings


def golden_settings(tmp: Path) -> Settings:
    # A small body limit makes the 413 case cheap.
    return Settings(data_dir=tmp / "data", max_tones=5000, max_body_bytes=200_000)
