"""What stands between a client and the routes: headers, keys, CORS, rate and size limits.

``install_security(app, settings)`` adds, outermost first:

* security headers on every response, errors and pages included (a strict
  Content-Security-Policy: scripts only from this origin, never inline);
* CORS, only when ``settings.cors_origins`` names origins (closed otherwise);
* a per-client rate limit on ``/api/`` when ``settings.rate_limit_per_minute`` > 0;
* optional API keys for the endpoints that write (``settings.api_keys``);
* a body size limit enforced before any route reads the body;
* the API documentation (Swagger UI at ``/docs``) served from a local copy (the
  ``fastapi-offline`` package's files), so it works offline and under the same CSP as
  every page;
* uploads spooled to ``<data_dir>/tmp``, never elsewhere and never under a name the
  client chose.

The rate limit and the spool folder are per process: with several workers each one
counts its own clients, so the effective limit is the setting times the worker count.
"""

from __future__ import annotations

from fastapi import FastAPI
from starlette.middleware.cors import CORSMiddleware

from ..config import Settings
from .asgi import wrap_outermost
from .docs import document_problems, install_local_docs
from .headers import CSP, SECURITY_HEADERS, SecurityHeaders
from .keys import API_KEY_HEADER, ApiKeyGuard, key_matches, needs_api_key, require_api_key
from .limits import BodyLimit, RateLimit, install_upload_spool

__all__ = [
    "API_KEY_HEADER",
    "CSP",
    "SECURITY_HEADERS",
    "ApiKeyGuard",
    "BodyLimit",
    "RateLimit",
    "SecurityHeaders",
    "document_problems",
    "install_security",
    "key_matches",
    "needs_api_key",
    "require_api_key",
]


def install_security(app: FastAPI, settings: Settings) -> None:
    """Add the headers, CORS, rate limit, API keys, body limit, local docs and the
    upload spool folder to ``app`` (see the module docstring for the order)."""
    # add_middleware puts each new one outside the previous: innermost first.
    app.add_middleware(
        BodyLimit,  # type: ignore[arg-type]
        body_limit=settings.max_body_bytes,
        upload_limit=settings.max_upload_bytes,
    )
    if settings.api_key_set:
        app.add_middleware(ApiKeyGuard, keys=settings.api_key_set)  # type: ignore[arg-type]
    if settings.rate_limit_per_minute > 0:
        app.add_middleware(RateLimit, per_minute=settings.rate_limit_per_minute)  # type: ignore[arg-type]
    if settings.cors_origin_list:
        app.add_middleware(
            CORSMiddleware,
            allow_origins=settings.cors_origin_list,
            allow_methods=["GET", "POST", "DELETE"],
            allow_headers=["Content-Type", API_KEY_HEADER, "X-Delete-Token", "X-Request-ID"],
            expose_headers=["Location", "Retry-After", "X-Request-ID", "X-Foldwise-Cache"],
            max_age=600,
        )
    wrap_outermost(app, SecurityHeaders)
    install_local_docs(app)
    install_upload_spool(app, settings)
    document_problems(app)
