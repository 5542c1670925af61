"""JSON bodies read straight from the request bytes.

The busiest endpoints parse and validate the raw body with pydantic's JSON parser in one
step (no intermediate Python dict), and can answer a repeated identical request from a
small cache before any parsing. Errors still go through the same problem handler.
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import Any, TypeVar

from fastapi import Request
from fastapi.exceptions import RequestValidationError
from pydantic import BaseModel, ValidationError
from starlette.datastructures import UploadFile

from ..usecases.measure import Upload
from .problems import Problem

__all__ = [
    "API_UPLOAD",
    "PAGE_FORM",
    "FormRules",
    "ResponseCache",
    "body_openapi",
    "is_multipart",
    "parse_json_body",
    "read_body",
    "read_form",
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


@dataclass(frozen=True)
class FormRules:
    """What a form may hold and how the reader's messages name it.

    The API's multipart upload and a page's form go through the one reader,
    :func:`read_form`; this is the only thing that differs between them.
    """

    #: How messages name the body ("multipart form" for the API, "form" for a page).
    noun: str
    #: The text fields allowed (the API's ``request``); None: any (a page form's fields).
    text_fields: tuple[str, ...] | None
    #: A named part that is not a file, or an empty file, is a 422 (the API); on a page
    #: an empty file input means "no file".
    strict_files: bool
    max_fields: int = 4


#: The JSON API's upload: the named files and one ``request`` field of JSON.
API_UPLOAD = FormRules("multipart form", ("request",), strict_files=True)
#: A page's form: any number of text fields, file inputs that may be left empty.
PAGE_FORM = FormRules("form", None, strict_files=False, max_fields=2000)


async def read_form(
    request: Request, files: tuple[str, ...], max_bytes: int, rules: FormRules
) -> tuple[dict[str, str], dict[str, Upload]]:
    """A multipart or urlencoded form: its text fields and the files ``files`` (each
    under ``max_bytes``), read under ``rules``. A declared ``Content-Length`` over the
    limit is refused before reading (413); an unreadable form is a 400."""
    refuse_declared_size(request, max_bytes, field=files[0] if files else "body", noun="upload")
    try:
        form = await request.form(
            max_files=len(files), max_fields=rules.max_fields, max_part_size=max_bytes
        )
    except Exception as exc:  # malformed multipart, too many parts, part too large
        raise Problem(400, f"the {rules.noun} cannot be read: {exc}", field="body") from exc
    try:
        if rules.text_fields is not None:
            expected = (*files, *rules.text_fields)
            for key in form:
                if key not in expected:
                    raise Problem(
                        422,
                        f"unexpected form field {key!r}; expected {', '.join(expected)}",
                        field=key,
                    )
        uploads: dict[str, Upload] = {}
        for name in files:
            upload = await _read_file(form.get(name), name, max_bytes, rules.strict_files)
            if upload is not None:
                uploads[name] = upload
        text: dict[str, str] = {}
        for key, value in form.items():
            if key in files:
                continue
            if isinstance(value, UploadFile):
                value = (await value.read()).decode("utf-8", errors="replace")
            text[key] = value
        return text, uploads
    finally:
        await form.close()


async def read_multipart(
    request: Request, names: tuple[str, ...], max_bytes: int
) -> tuple[bytes, dict[str, Upload]]:
    """The API's upload (:data:`API_UPLOAD`): the raw ``request`` JSON (``{}`` when
    absent) and the files ``names``."""
    text, uploads = await read_form(request, names, max_bytes, API_UPLOAD)
    return (text.get("request") or "{}").encode(), uploads


async def _read_file(
    item: UploadFile | str | None, name: str, max_bytes: int, strict: bool
) -> Upload | None:
    """One file part, or None when it is absent (or, leniently, empty)."""
    if item is None:
        return None
    if not isinstance(item, UploadFile) or (not strict and not item.filename):
        if strict:
            raise Problem(422, f"form field {name!r} must be a file", field=name)
        return None
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
            413, f"{name} is over the limit of {max_bytes} bytes", field=name, limit=max_bytes
        )
    if not data:
        if strict:
            raise Problem(422, f"{name} is empty", field=name)
        return None
    return Upload(data=data, filename=item.filename or name)


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
