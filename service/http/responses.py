"""A JSON response rendered with orjson: numpy scalars and arrays go straight through and
NaN becomes ``null``, which is what an unknown amplitude should read as in JSON."""

from __future__ import annotations

from typing import Any

import orjson
from starlette.responses import JSONResponse

__all__ = ["FastJSON", "json_bytes"]


def json_bytes(content: Any) -> bytes:
    """``content`` as JSON bytes, the way every route sends it."""
    return orjson.dumps(content, option=orjson.OPT_SERIALIZE_NUMPY)


class FastJSON(JSONResponse):
    media_type = "application/json"

    def render(self, content: Any) -> bytes:
        return json_bytes(content)
