"""The one settings object. Read from the environment (prefix ``FOLDWISE_``) and nowhere else."""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from pydantic import Field
from pydantic_settings import BaseSettings, SettingsConfigDict

__all__ = ["Settings", "get_settings"]


class Settings(BaseSettings):
    model_config = SettingsConfigDict(env_prefix="FOLDWISE_", extra="ignore")

    host: str = "127.0.0.1"
    port: int = Field(8000, ge=1, le=65535)
    data_dir: Path = Path("data")
    #: Empty: an SQLite file in ``data_dir``. Otherwise a SQLAlchemy URL, for example
    #: ``postgresql+psycopg://foldwise@db:5432/foldwise``.
    database_url: str = ""

    max_tones: int = Field(100_000, ge=1)
    max_body_bytes: int = Field(64 * 1024 * 1024, ge=1024)
    max_upload_bytes: int = Field(64 * 1024 * 1024, ge=1024)
    max_spectrum_lines: int = Field(2_000_000, ge=16)
    max_time_samples: int = Field(50_000_000, ge=16)
    #: Above this many tones a fold request runs in a worker thread, not on the event loop.
    inline_tone_limit: int = Field(2_000, ge=1)
    #: Identical fold requests answered from memory; 0 turns the cache off.
    fold_cache_entries: int = Field(512, ge=0)

    #: Comma-separated API keys; when set, write endpoints need ``X-API-Key``.
    api_keys: str = ""
    #: Comma-separated origins allowed by CORS; empty means closed.
    cors_origins: str = ""
    #: Requests per minute per client on the API; 0 turns the limit off.
    rate_limit_per_minute: int = Field(0, ge=0)
    log_level: str = "info"

    #: The folder under which ``POST /api/v1/audits`` may read manifests, libraries and
    #: recordings. Unset: the endpoint is off (403); a request never names a path outside.
    audit_root: Path | None = None
    #: Address of an existing Dask scheduler for submitted audits; empty: a local cluster.
    audit_scheduler: str = ""
    #: Size of the local cluster a submitted audit starts (one process, one thread each).
    audit_workers: int = Field(1, ge=1, le=64)
    #: Audits waiting behind the one running; a submission beyond answers 503.
    audit_queue: int = Field(4, ge=0, le=1000)

    @property
    def api_key_set(self) -> frozenset[str]:
        return frozenset(k.strip() for k in self.api_keys.split(",") if k.strip())

    @property
    def cors_origin_list(self) -> list[str]:
        return [o.strip() for o in self.cors_origins.split(",") if o.strip()]


@lru_cache
def get_settings() -> Settings:
    return Settings()
