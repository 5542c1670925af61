"""The saved-diagnosis store: engine setup, migrations and the repository calls.

Two backends, same behaviour:

* **SQLite** (default): one file, ``<data_dir>/foldwise.sqlite3``. WAL journal so readers
  never wait for a writer; ``synchronous=FULL`` so a save is on disk when ``create``
  returns. WAL with ``NORMAL`` already survives a killed process (the commit sits in the
  OS page cache), but may drop the last commits on power loss; saves are rare and small,
  so the extra fsync per commit costs nothing a user would notice and buys durability
  against power loss too. Every write starts with ``BEGIN IMMEDIATE`` and every
  connection waits up to ``busy_timeout`` for the lock, so several processes (uvicorn
  workers) can write to one file without "database is locked" errors.
* **PostgreSQL** through psycopg 3, for several app instances sharing one store. The pool
  pings each connection before use, so a server that restarted is picked up again
  without restarting the app.

Database failures surface as :class:`StoreUnavailable` (the API answers 503); invalid
input as ``ValueError`` (the API answers 4xx).
"""

from __future__ import annotations

import hashlib
import hmac
import json
import re
import secrets
import sqlite3
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal

import numpy as np
from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, Engine, create_engine, delete, event, select, text, update
from sqlalchemy import exc as sa_exc
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

from service.storage.models import JOB_STATES, KINDS, AuditJobRow, SavedDiagnosisRow
from service.storage.packing import pack_spectra, pack_spectrum, unpack_spectra

__all__ = [
    "DEFAULT_MAX_JSON_BYTES",
    "SQLITE_FILENAME",
    "AuditJob",
    "DeleteOutcome",
    "SavedDiagnosis",
    "Store",
    "StoreUnavailable",
]

SQLITE_FILENAME = "foldwise.sqlite3"
DEFAULT_MAX_JSON_BYTES = 16 * 1024 * 1024
SQLITE_BUSY_TIMEOUT_S = 30.0
PG_CONNECT_TIMEOUT_S = 5
MAX_TITLE_CHARS = 200
MAX_VERSION_CHARS = 64

# secrets.token_urlsafe(24) encodes 24 random bytes (192 bits) as 32 URL-safe characters.
_ID_BYTES = 24
_ID_PATTERN = re.compile(r"[A-Za-z0-9_-]{32}")
_TOKEN_BYTES = 32
_MAX_TOKEN_CHARS = 256
# Key for pg_advisory_xact_lock around migrations; any constant unique to this app.
_MIGRATION_LOCK_KEY = 0x466F6C6477697365  # "Foldwise" in ASCII
_MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"
_BEGIN_OPTION = "foldwise_sqlite_begin"

DeleteOutcome = Literal["deleted", "not_found", "forbidden"]

# Errors that mean "the database cannot be reached or cannot serve right now".
_UNAVAILABLE_ERRORS: tuple[type[Exception], ...] = (
    sa_exc.OperationalError,
    sa_exc.InterfaceError,
    sa_exc.DisconnectionError,
    sa_exc.TimeoutError,
)


class StoreUnavailable(RuntimeError):
    """The database cannot be reached or did not answer in time."""


@dataclass(frozen=True, slots=True)
class SavedDiagnosis:
    """A saved record as read back. The delete token (and its hash) is never included."""

    id: str
    kind: str
    created_at: datetime
    computation_version: str
    app_version: str
    request: dict[str, Any]
    result: dict[str, Any]
    spectrum: tuple[np.ndarray, np.ndarray] | None
    title: str | None
    #: Every stored spectrum (a comparison keeps one per capture); ``spectrum`` is the first.
    spectra: tuple[tuple[np.ndarray, np.ndarray], ...] = ()


@dataclass(frozen=True, slots=True)
class AuditJob:
    """An audit job as read back: its request, state, progress and saved summary."""

    id: str
    status: str
    created_at: datetime
    updated_at: datetime
    request: dict[str, Any]
    done: int
    total: int
    errors: int
    message: str | None
    summary: dict[str, Any] | None
    saved_id: str | None


def _utc(value: datetime) -> datetime:
    # SQLite hands back naive datetimes (they were written in UTC); PostgreSQL hands back
    # the session time zone.
    return (value.replace(tzinfo=UTC) if value.tzinfo is None else value).astimezone(UTC)


def _job(row: AuditJobRow) -> AuditJob:
    return AuditJob(
        id=row.id,
        status=row.status,
        created_at=_utc(row.created_at),
        updated_at=_utc(row.updated_at),
        request=row.request,
        done=row.done,
        total=row.total,
        errors=row.errors,
        message=row.message,
        summary=row.summary,
        saved_id=row.saved_id,
    )


#: Job fields :meth:`Store.update_job` may set.
_JOB_FIELDS = frozenset({"status", "done", "total", "errors", "message", "summary", "saved_id"})


def _hash_token(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def _is_valid_id(record_id: object) -> bool:
    return isinstance(record_id, str) and _ID_PATTERN.fullmatch(record_id) is not None


def _describe(exc: BaseException) -> str:
    cause = getattr(exc, "orig", None) or exc
    first_line = str(cause).strip().splitlines()[0] if str(cause).strip() else type(cause).__name__
    return first_line


def _check_json(doc: object, name: str, limit: int) -> None:
    if not isinstance(doc, dict):
        raise ValueError(f"{name} is a {type(doc).__name__}; it must be a JSON object (dict)")
    try:
        encoded = json.dumps(doc, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    except (TypeError, ValueError) as exc:
        # NaN/Infinity are not JSON and PostgreSQL rejects them; numpy scalars are not
        # serialisable. Either way the caller must convert first.
        raise ValueError(f"{name} is not plain JSON: {exc}") from exc
    size = len(encoded.encode("utf-8"))
    if size > limit:
        raise ValueError(f"{name} is {size} bytes as JSON; the limit is {limit} bytes")


def _check_text(value: object, name: str, limit: int, *, optional: bool = False) -> None:
    if value is None and optional:
        return
    if not isinstance(value, str):
        raise ValueError(f"{name}={value!r} must be a string")
    if not optional and not value:
        raise ValueError(f"{name} is empty; it must be 1 to {limit} characters")
    if len(value) > limit:
        raise ValueError(f"{name} has {len(value)} characters; the limit is {limit}")


class Store:
    """Saved diagnoses in SQLite or PostgreSQL.

    Build with :meth:`from_url`, call :meth:`migrate` once at start-up, then use
    :meth:`create`, :meth:`get`, :meth:`delete` and :meth:`ping`. All calls are
    synchronous and thread-safe (one pooled connection per call); an async web layer
    should run them in its thread pool.
    """

    def __init__(self, engine: Engine, *, max_json_bytes: int = DEFAULT_MAX_JSON_BYTES) -> None:
        if max_json_bytes <= 0:
            raise ValueError(f"max_json_bytes={max_json_bytes} must be > 0")
        self._engine = engine
        self._backend = engine.dialect.name
        self.max_json_bytes = max_json_bytes
        # Writes on SQLite take the write lock at BEGIN (see _install_sqlite_hooks).
        self._write_engine = engine.execution_options(**{_BEGIN_OPTION: "IMMEDIATE"})

    # ------------------------------------------------------------------ construction
    @classmethod
    def from_url(
        cls,
        url: str | None,
        data_dir: Path | None = None,
        *,
        max_json_bytes: int = DEFAULT_MAX_JSON_BYTES,
    ) -> Store:
        """Build a store from a database URL, or the default SQLite file.

        Parameters
        ----------
        url : str or None
            ``postgresql+psycopg://user@host:port/db`` (``postgresql://`` and
            ``postgres://`` are taken as psycopg 3), ``sqlite:///path/file``, or None/empty
            for ``<data_dir>/foldwise.sqlite3``. libpq options such as
            ``?options=-csearch_path%3Dmyschema`` pass through to the driver.
        data_dir : Path, optional
            Directory of the default SQLite file; created if missing. Required when
            ``url`` is empty.
        max_json_bytes : int
            Largest ``request`` or ``result`` accepted, bytes of compact UTF-8 JSON.

        Notes
        -----
        Nothing connects here; the first call that needs the database does.
        """
        if max_json_bytes <= 0:
            raise ValueError(f"max_json_bytes={max_json_bytes} must be > 0")
        if not url:
            if data_dir is None:
                raise ValueError("data_dir is required when no database URL is given")
            data_dir = Path(data_dir)
            data_dir.mkdir(parents=True, exist_ok=True)
            url = f"sqlite:///{(data_dir / SQLITE_FILENAME).resolve()}"
        parsed = make_url(url)
        if parsed.drivername in {"postgres", "postgresql"}:
            parsed = parsed.set(drivername="postgresql+psycopg")

        if parsed.get_backend_name() == "sqlite":
            engine = _sqlite_engine(parsed.render_as_string(hide_password=False))
        elif parsed.get_backend_name() == "postgresql":
            engine = _postgresql_engine(parsed.render_as_string(hide_password=False))
        else:
            raise ValueError(
                f"database URL scheme {parsed.drivername!r} is not supported; "
                "use sqlite:/// or postgresql+psycopg://"
            )
        return cls(engine, max_json_bytes=max_json_bytes)

    @property
    def backend(self) -> str:
        """``"sqlite"`` or ``"postgresql"``."""
        return self._backend

    @property
    def engine(self) -> Engine:
        """The SQLAlchemy engine (for tests and operational tooling)."""
        return self._engine

    def close(self) -> None:
        """Close pooled connections. The store reconnects if used again."""
        self._engine.dispose()

    # ------------------------------------------------------------------ health
    @contextmanager
    def _unavailable_as_error(self) -> Iterator[None]:
        try:
            yield
        except _UNAVAILABLE_ERRORS as exc:
            raise StoreUnavailable(
                f"{self._backend} database unavailable: {_describe(exc)}"
            ) from exc

    def ping(self) -> None:
        """Run ``SELECT 1``; raise :class:`StoreUnavailable` when that fails."""
        with self._unavailable_as_error(), self._engine.connect() as conn:
            conn.execute(text("SELECT 1"))

    # ------------------------------------------------------------------ migrations
    @staticmethod
    def _alembic_config() -> Config:
        # Alembic is imported only when migrating: it is slow to import and the request
        # path never needs it.
        cfg = Config()
        # ConfigParser interpolation treats '%' specially.
        cfg.set_main_option("script_location", str(_MIGRATIONS_DIR).replace("%", "%%"))
        cfg.set_main_option("path_separator", "os")
        return cfg

    def migrate(self) -> None:
        """Upgrade the schema to the newest revision.

        Idempotent, and safe when several processes start at once: the upgrade runs in
        one transaction that first takes a lock (``BEGIN IMMEDIATE`` on SQLite, a
        transaction-scoped advisory lock on PostgreSQL), so the second process waits and
        then finds nothing left to do.
        """
        cfg = self._alembic_config()
        with self._unavailable_as_error(), self._write_engine.begin() as conn:
            if self._backend == "postgresql":
                conn.execute(
                    text("SELECT pg_advisory_xact_lock(:key)"), {"key": _MIGRATION_LOCK_KEY}
                )
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, "head")

    def schema_revision(self) -> str | None:
        """The schema revision the database is at, or None before the first migration."""
        with self._unavailable_as_error(), self._engine.connect() as conn:
            return MigrationContext.configure(conn).get_current_revision()

    @staticmethod
    def head_revision() -> str:
        """The newest schema revision shipped with this code."""
        head = ScriptDirectory.from_config(Store._alembic_config()).get_current_head()
        assert head is not None
        return head

    # ------------------------------------------------------------------ repository
    def create(
        self,
        kind: str,
        request: dict[str, Any],
        result: dict[str, Any],
        computation_version: str,
        app_version: str,
        spectrum: tuple[np.ndarray, np.ndarray] | None = None,
        title: str | None = None,
        spectra: list[tuple[np.ndarray, np.ndarray]] | None = None,
    ) -> tuple[str, str]:
        """Save a record; return ``(id, delete_token)`` once it is committed.

        Parameters
        ----------
        kind : str
            One of ``"diagnose"``, ``"compare"``, ``"fold"``, ``"plan"``.
        request, result : dict
            JSON objects (no NaN/Infinity, no numpy scalars), each at most
            ``max_json_bytes`` bytes as compact UTF-8 JSON.
        computation_version, app_version : str
            1 to 64 characters each.
        spectrum : (ndarray, ndarray), optional
            Frequency (Hz) and amplitude arrays, stored with :func:`pack_spectrum`
            (float32 precision).
        title : str, optional
            At most 200 characters.
        spectra : list of (ndarray, ndarray), optional
            Several spectra instead of ``spectrum`` (a comparison's captures), each
            packed the same way, back to back (:func:`pack_spectra`).

        Returns
        -------
        id : str
            32 URL-safe characters carrying 192 random bits.
        delete_token : str
            43 URL-safe characters (256 random bits); only its SHA-256 is stored, so it
            cannot be shown again.

        Raises
        ------
        ValueError
            Invalid input; the message names the field and the limit.
        StoreUnavailable
            The database cannot be reached.
        """
        if kind not in KINDS:
            raise ValueError(f"kind={kind!r} must be one of {', '.join(KINDS)}")
        _check_json(request, "request", self.max_json_bytes)
        _check_json(result, "result", self.max_json_bytes)
        _check_text(computation_version, "computation_version", MAX_VERSION_CHARS)
        _check_text(app_version, "app_version", MAX_VERSION_CHARS)
        _check_text(title, "title", MAX_TITLE_CHARS, optional=True)
        blob = None
        if spectrum is not None:
            if not isinstance(spectrum, tuple | list) or len(spectrum) != 2:
                raise ValueError("spectrum must be a pair (freq_hz, amplitude)")
            blob = pack_spectrum(spectrum[0], spectrum[1])
        if spectra is not None:
            if blob is not None:
                raise ValueError("give spectrum or spectra, not both")
            if any(not isinstance(p, tuple | list) or len(p) != 2 for p in spectra):
                raise ValueError("spectra must be a list of pairs (freq_hz, amplitude)")
            blob = pack_spectra([(p[0], p[1]) for p in spectra])

        record_id = secrets.token_urlsafe(_ID_BYTES)
        token = secrets.token_urlsafe(_TOKEN_BYTES)
        row = SavedDiagnosisRow(
            id=record_id,
            delete_token_hash=_hash_token(token),
            kind=kind,
            created_at=datetime.now(UTC),
            computation_version=computation_version,
            app_version=app_version,
            request=request,
            result=result,
            spectrum=blob,
            title=title,
        )
        with self._unavailable_as_error(), Session(self._write_engine) as session:
            session.add(row)
            session.commit()
        return record_id, token

    def get(self, record_id: str) -> SavedDiagnosis | None:
        """The record with this id, or None when there is none (or the id is malformed).

        Raises
        ------
        StoreUnavailable
            The database cannot be reached.
        """
        if not _is_valid_id(record_id):
            return None
        with self._unavailable_as_error(), Session(self._engine) as session:
            row = session.get(SavedDiagnosisRow, record_id)
            if row is None:
                return None
            created = row.created_at
            # SQLite hands back naive datetimes (they were written in UTC); PostgreSQL
            # hands back the session time zone.
            created = created.replace(tzinfo=UTC) if created.tzinfo is None else created
            created = created.astimezone(UTC)
            spectra = () if row.spectrum is None else tuple(unpack_spectra(row.spectrum))
            return SavedDiagnosis(
                id=row.id,
                kind=row.kind,
                created_at=created,
                computation_version=row.computation_version,
                app_version=row.app_version,
                request=row.request,
                result=row.result,
                spectrum=spectra[0] if spectra else None,
                title=row.title,
                spectra=spectra,
            )

    def delete(self, record_id: str, token: str) -> DeleteOutcome:
        """Delete a record if ``token`` is the one returned by :meth:`create`.

        Returns
        -------
        ``"deleted"``, ``"not_found"`` (no such id, malformed id, or already deleted) or
        ``"forbidden"`` (the id exists, the token is wrong).

        Notes
        -----
        The SHA-256 of the presented token is compared with the stored hash by
        ``hmac.compare_digest``, in constant time.

        Raises
        ------
        StoreUnavailable
            The database cannot be reached.
        """
        if not _is_valid_id(record_id):
            return "not_found"
        well_formed = isinstance(token, str) and 0 < len(token) <= _MAX_TOKEN_CHARS
        presented = _hash_token(token) if well_formed else ""
        with self._unavailable_as_error(), Session(self._write_engine) as session:
            stored = session.scalar(
                select(SavedDiagnosisRow.delete_token_hash).where(SavedDiagnosisRow.id == record_id)
            )
            if stored is None:
                return "not_found"
            if not hmac.compare_digest(stored.encode("ascii"), presented.encode("ascii")):
                return "forbidden"
            outcome = session.execute(
                delete(SavedDiagnosisRow).where(
                    SavedDiagnosisRow.id == record_id,
                    SavedDiagnosisRow.delete_token_hash == stored,
                )
            )
            session.commit()
            # A concurrent delete may have won between the read and the delete.
            return "deleted" if getattr(outcome, "rowcount", 0) == 1 else "not_found"

    # ------------------------------------------------------------------ audit jobs
    def create_job(self, request: dict[str, Any]) -> str:
        """Record a queued audit job; return its id (192 random bits, like a saved id)."""
        _check_json(request, "request", self.max_json_bytes)
        now = datetime.now(UTC)
        job_id = secrets.token_urlsafe(_ID_BYTES)
        row = AuditJobRow(
            id=job_id,
            status="queued",
            created_at=now,
            updated_at=now,
            request=request,
            done=0,
            total=0,
            errors=0,
        )
        with self._unavailable_as_error(), Session(self._write_engine) as session:
            session.add(row)
            session.commit()
        return job_id

    def get_job(self, job_id: str) -> AuditJob | None:
        """The job with this id, or None (also for a malformed id)."""
        if not _is_valid_id(job_id):
            return None
        with self._unavailable_as_error(), Session(self._engine) as session:
            row = session.get(AuditJobRow, job_id)
            return None if row is None else _job(row)

    def update_job(self, job_id: str, **fields: Any) -> None:
        """Set some of a job's fields (status, done, total, errors, message, summary,
        saved_id) and its ``updated_at``."""
        bad = set(fields) - _JOB_FIELDS
        if bad:
            raise ValueError(f"audit job fields {sorted(bad)} cannot be set")
        if "status" in fields and fields["status"] not in JOB_STATES:
            raise ValueError(f"status={fields['status']!r} must be one of {', '.join(JOB_STATES)}")
        if fields.get("summary") is not None:
            _check_json(fields["summary"], "summary", self.max_json_bytes)
        with self._unavailable_as_error(), Session(self._write_engine) as session:
            session.execute(
                update(AuditJobRow)
                .where(AuditJobRow.id == job_id)
                .values(**fields, updated_at=datetime.now(UTC))
            )
            session.commit()

    def jobs_with_status(self, *statuses: str) -> list[AuditJob]:
        """Jobs in any of ``statuses``, oldest first (at start-up: what to resume)."""
        with self._unavailable_as_error(), Session(self._engine) as session:
            rows = session.scalars(
                select(AuditJobRow)
                .where(AuditJobRow.status.in_(statuses))
                .order_by(AuditJobRow.created_at)
            ).all()
            return [_job(r) for r in rows]


# ---------------------------------------------------------------------- engines
def _sqlite_engine(url: str) -> Engine:
    parsed = make_url(url)
    if parsed.database in (None, "", ":memory:") or "mode=memory" in url:
        raise ValueError(
            "an in-memory SQLite database is not shared between connections; give a file path"
        )
    Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
    engine = create_engine(
        url,
        connect_args={"timeout": SQLITE_BUSY_TIMEOUT_S, "check_same_thread": False},
        pool_pre_ping=True,
    )
    _install_sqlite_hooks(engine)
    return engine


def _use_wal(cursor: Any) -> None:
    """Switch the database to write-ahead logging, waiting out another process's switch.

    When several processes open a new database at once, all try the switch and a loser
    can get "database is locked" at once: SQLite's busy handler does not wait there
    (seen here, 2 connects in 120 with 4 processes). The mode is stored in the file, so
    once one switch is through the others read it back and have nothing to do.
    """
    deadline = time.monotonic() + SQLITE_BUSY_TIMEOUT_S
    while True:
        try:
            (mode,) = cursor.execute("PRAGMA journal_mode").fetchone()
            if str(mode).lower() != "wal":
                cursor.execute("PRAGMA journal_mode = WAL")
            return
        except sqlite3.OperationalError as exc:
            if "locked" not in str(exc) or time.monotonic() > deadline:
                raise
            time.sleep(0.02)


def _install_sqlite_hooks(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn: Any, _record: Any) -> None:
        # Let SQLAlchemy, not the sqlite3 module, decide when transactions begin, so
        # writes can use BEGIN IMMEDIATE (see _on_begin).
        dbapi_conn.isolation_level = None
        cursor = dbapi_conn.cursor()
        try:
            cursor.execute(f"PRAGMA busy_timeout = {int(SQLITE_BUSY_TIMEOUT_S * 1000)}")
            _use_wal(cursor)
            cursor.execute("PRAGMA synchronous = FULL")
            cursor.execute("PRAGMA foreign_keys = ON")
        finally:
            cursor.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn: Connection) -> None:
        # A deferred transaction that reads and then writes fails at once with
        # SQLITE_BUSY when another process committed in between, and the busy timeout
        # does not help; taking the write lock at BEGIN makes writers queue instead.
        mode = conn.get_execution_options().get(_BEGIN_OPTION, "DEFERRED")
        conn.exec_driver_sql(f"BEGIN {mode}")


def _postgresql_engine(url: str) -> Engine:
    parsed = make_url(url)
    connect_args: dict[str, Any] = {}
    if "connect_timeout" not in parsed.query:
        connect_args["connect_timeout"] = PG_CONNECT_TIMEOUT_S
    if "application_name" not in parsed.query:
        connect_args["application_name"] = "foldwise"
    return create_engine(
        url,
        connect_args=connect_args,
        pool_pre_ping=True,
        pool_size=5,
        max_overflow=10,
        pool_timeout=10,
        # Closes connections a firewall or proxy would drop silently after idling.
        pool_recycle=1800,
    )
