"""Where the pages' files live, and Plotly's JavaScript served from the installed package.

Plotly's bundle comes from the ``plotly`` Python package itself (``package_data``), so
the pages work offline and never load code from another site.
"""

from __future__ import annotations

import importlib.resources
from functools import cache
from pathlib import Path

import plotly
from fastapi import APIRouter, Request
from fastapi.responses import Response

__all__ = ["PLOTLY_URL", "PLOTLY_VERSION", "plotly_js_path", "router", "web_dir"]

PLOTLY_VERSION: str = plotly.__version__
#: The version in the query makes a new bundle a new URL, so a year of caching is safe.
PLOTLY_URL = f"/assets/plotly.min.js?v={PLOTLY_VERSION}"
CACHE_FOREVER = "public, max-age=31536000, immutable"

_REPO_ROOT = Path(__file__).resolve().parents[2]


def web_dir(name: str) -> Path:
    """The ``templates`` or ``static`` folder: inside an installed wheel
    (``service/_web/<name>``) or at the top of a source checkout."""
    packaged = Path(__file__).resolve().parents[1] / "_web" / name
    if packaged.is_dir():
        return packaged
    return _REPO_ROOT / name


@cache
def plotly_js_path() -> Path:
    res = importlib.resources.files("plotly").joinpath("package_data", "plotly.min.js")
    path = Path(str(res))
    if not path.is_file():
        raise FileNotFoundError(f"plotly.min.js not found in the plotly package at {path}")
    return path


@cache
def _plotly_js() -> bytes:
    return plotly_js_path().read_bytes()


router = APIRouter(include_in_schema=False)


@router.get("/assets/plotly.min.js")
def plotly_js(request: Request) -> Response:
    etag = f'"plotly-{PLOTLY_VERSION}"'
    headers = {"Cache-Control": CACHE_FOREVER, "ETag": etag}
    if request.headers.get("if-none-match") == etag:
        return Response(status_code=304, headers=headers)
    return Response(_plotly_js(), media_type="text/javascript; charset=utf-8", headers=headers)
