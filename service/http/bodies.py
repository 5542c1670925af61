"""JSON bodies read straight from the request bytes.

The busiest endpoints parse and validate the raw body with pydantic's JSON parser in one
step (no intermediate Python dict), and can answer a repeated identical request from a
small cache before any parsing. Errors still go through the same problem handler.
"""

from __future__ import annotations

from collections import OrderedDict
from typing import Any, TypeVar

from fastapi import Request
from fastapi.exceptions import RequestValidationError
from pydantic import BaseModel, ValidationError
from starlette.datastructures import UploadFile

from ..usecases.measure import Upload
from .problems import Problem

__all__ = [
    "ResponseCache",
    "body_openapi",
    "is_multipart",
    "parse_json_body",
    "read_body",
    "read_multipart",
    "refuse_declared_size",
    "register_models",
]

M = TypeVar("M", bound=BaseModel)


def refuse_declared_size(request: Request, limit: int, *, field: str, noun: str) -> None:
    """A 413 problem before reading, when the declared ``Content-Length`` is over ``limit``."""
    declared = request.headers.get("content-length")
    if declared is not None and declared.isdigit() and int(declared) > limit:
        raise Problem(
            413,
            f"the {noun} is {int(declared)} bytes; the limit is {limit}",
            field=field,
            value=int(declared),
            limit=limit,
        )


async def read_body(request: Request, limit: int) -> bytes:
    """The request body, refusing one larger than ``limit`` bytes before reading it all."""
    ctype = request.headers.get("content-type", "application/json").split(";")[0].strip()
    if ctype not in ("application/json", "") and not ctype.endswith("+json"):
        raise Problem(
            415,
            f"content-type {ctype!r} is not accepted; send application/json",
            field="content-type",
            value=ctype,
            limit="application/json",
        )
    refuse_declared_size(request, limit, field="body", noun="body")
    chunks = []
    size = 0
    async for chunk in request.stream():
        size += len(chunk)
        if size > limit:
            raise Problem(
                413, f"the body is over the limit of {limit} bytes", field="body", limit=limit
            )
        chunks.append(chunk)
    return b"".join(chunks)


def parse_json_body(model: type[M], raw: bytes) -> M:
    """Validate ``raw`` JSON against ``model``; errors read as FastAPI's would."""
    if not raw.strip():
        raise Problem(
            400,
            "the request body is empty; send a JSON object",
            field="body",
            title="Malformed JSON",
            kind="malformed-json",
        )
    try:
        return model.model_validate_json(raw)
    except ValidationError as exc:
        errors = []
        for e in exc.errors(include_url=False):
            e = dict(e)  # type: ignore[assignment]
            e["loc"] = ("body", *e["loc"])
            errors.append(e)
        raise RequestValidationError(errors) from None


class ResponseCache:
    """A bounded least-recently-used map from request bytes to response bytes.

    The computations behind it are pure functions of the request, so an identical body
    always gets an identical answer; a test-cell controller that repeats its question
    every cycle is answered without recomputing.
    """

    def __init__(self, entries: int, max_item_bytes: int = 256 * 1024) -> None:
        self.entries = entries
        self.max_item_bytes = max_item_bytes
        self._items: OrderedDict[bytes, bytes] = OrderedDict()
        self.hits = 0
        self.misses = 0

    def get(self, key: bytes) -> bytes | None:
        if self.entries <= 0:
            return None
        value = self._items.get(key)
        if value is None:
            self.misses += 1
            return None
        self._items.move_to_end(key)
        self.hits += 1
        return value

    def put(self, key: bytes, value: bytes) -> None:
        if self.entries <= 0 or len(value) > self.max_item_bytes or len(key) > self.max_item_bytes:
            return
        self._items[key] = value
        self._items.move_to_end(key)
        while len(self._items) > self.entries:
            self._items.popitem(last=False)


def body_openapi(model: type[BaseModel], examples: dict[str, Any]) -> dict[str, Any]:
    """``openapi_extra`` describing a JSON body of ``model`` with worked examples."""
    return {
        "requestBody": {
            "required": True,
            "content": {
                "application/json": {
                    "schema": {"$ref": f"#/components/schemas/{model.__name__}"},
                    "examples": examples,
                }
            },
        }
    }


def register_models(schema: dict[str, Any], models: list[type[BaseModel]]) -> None:
    """Add request models that no route declares as a parameter to the components."""
    comps = schema.setdefault("components", {}).setdefault("schemas", {})
    for model in models:
        js = model.model_json_schema(ref_template="#/components/schemas/{model}")
        for name, sub in js.pop("$defs", {}).items():
            comps.setdefault(name, sub)
        comps.setdefault(model.__name__, js)


async def read_multipart(
    request: Request, names: tuple[str, ...], max_bytes: int
) -> tuple[bytes, dict[str, Upload]]:
    """A multipart upload: the files ``names`` (each under ``max_bytes``, none empty)
    and the raw ``request`` JSON field (``{}`` when absent)."""
    refuse_declared_size(request, max_bytes, field="file", noun="upload")
    try:
        form = await request.form(max_files=len(names), max_fields=4, max_part_size=1024 * 1024)
    except Exception as exc:  # malformed multipart, too many parts, part too large
        raise Problem(400, f"the multipart form cannot be read: {exc}", field="body") from exc
    try:
        uploads: dict[str, Upload] = {}
        for key in form:
            if key not in (*names, "request"):
                raise Problem(
                    422,
                    f"unexpected form field {key!r}; expected {', '.join((*names, 'request'))}",
                    field=key,
                )
        for name in names:
            item = form.get(name)
            if item is None:
                continue
            if not isinstance(item, UploadFile):
                raise Problem(422, f"form field {name!r} must be a file", field=name)
            if item.size is not None and item.size > max_bytes:
                raise Problem(
                    413,
                    f"{name} is {item.size} bytes; the limit is {max_bytes}",
                    field=name,
                    value=item.size,
                    limit=max_bytes,
                )
            data = await item.read()
            if len(data) > max_bytes:
                raise Problem(
                    413,
                    f"{name} is over the limit of {max_bytes} bytes",
                    field=name,
                    limit=max_bytes,
                )
            if not data:
                raise Problem(422, f"{name} is empty", field=name)
            uploads[name] = Upload(data=data, filename=item.filename or name)
        raw = form.get("request")
        if isinstance(raw, UploadFile):
            raw_bytes = await raw.read()
        else:
            raw_bytes = (raw or "{}").encode()
        return raw_bytes, uploads
    finally:
        await form.close()


async def read_request_with_file(
    request: Request, model: type[M], settings: Any
) -> tuple[M, Upload | None]:
    """A request of ``model`` as a JSON body, or as multipart (``file`` plus the JSON
    ``request`` field); the upload, if any, with it."""
    upload = None
    if is_multipart(request):
        raw, files = await read_multipart(request, ("file",), settings.max_upload_bytes)
        upload = files.get("file")
        if upload is None:
            raise Problem(422, "the multipart form needs a file field 'file'", field="file")
    else:
        raw = await read_body(request, settings.max_body_bytes)
    return parse_json_body(model, raw), upload


def is_multipart(request: Request) -> bool:
    return request.headers.get("content-type", "").startswith("multipart/form-data")
