"""The diagnose and compare pages, and saving any result under a link.

Both pages compute through ``service.usecases.diagnose`` (the JSON API's own functions), in a
worker thread. A result is shown, and saved, from the API payload plus the measured
spectrum; a saved page is rendered from the stored record alone, so a link shows the
same verdicts after a restart or an upgrade.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping, Sequence
from typing import Any
from urllib.parse import quote

import numpy as np
from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse
from pydantic import ValidationError
from starlette.concurrency import run_in_threadpool

from ..config import Settings
from ..contract.diagnose import CompareIn, DiagnoseIn
from ..contract.fold import FoldIn, chain_from_request
from ..core.chain import Chain
from ..core.spectrum import noise_floor
from ..demo import demo_compare_request, demo_diagnose_request
from ..http.bodies import PAGE_FORM, read_form
from ..http.keys import require_api_key
from ..http.problems import ANSWERABLE, Problem, as_problem
from ..http.store_access import StoreAccess
from ..usecases.compare import compare_payload
from ..usecases.diagnose import diagnose_payload, headline, is_aliased
from ..usecases.fold import fold_payload
from ..usecases.measure import Measured, Upload
from ..usecases.save import SaveParts, measured_spectra, saved_parts, stored_request
from . import figures
from .diagnose_forms import (
    COMPARE_LABELS,
    DIAGNOSE_LABELS,
    REQUIRED_SIDES,
    SIDES,
    attach_compare_problem,
    attach_diagnose_problem,
    blank_compare_form,
    blank_diagnose_form,
    parse_compare_form,
    parse_diagnose_form,
    read_share_fields,
    share_fields,
)
from .exports import level_words, peaks_csv, request_rows
from .forms import FormState, form_from_request
from .rendering import render

__all__ = [
    "compare_result_context",
    "diagnose_result_context",
    "error_page",
    "read_page_form",
    "recompute_shared",
    "request_json",
    "router",
    "save_result",
]

router = APIRouter(include_in_schema=False)

#: Form fields the diagnose and compare forms may send (sources add a few per row).
#: Peaks listed in the table; the rest stay on the plot (a page must stay light).
MAX_TABLE_PEAKS = 400
#: Verdicts that mean "folded back": drawn and counted as aliases.
ALIAS_KEYS = ("alias", "family_alias", "mirror")
#: The demo bench's accelerometers read in g (DESIGN.md §6; the amplitudes are invented).
DEMO_AMPLITUDE_UNIT = "g"
#: Pasted text (characters) a result page shows again in its box.
MAX_KEPT_TEXT = 2_000_000
#: The boxes of pasted text on each page (counted against the share-after limit).
DIAGNOSE_TEXTS = ("spectrum_text",)
COMPARE_TEXTS = tuple(f"{s}_spectrum_text" for s in SIDES)


def _render(
    request: Request, name: str, ctx: dict[str, Any], status_code: int = 200
) -> HTMLResponse:
    return render(request, name, ctx, status_code=status_code)


def error_page(request: Request, p: Problem) -> HTMLResponse:
    """A problem as an HTML page with its status (e.g. 503 when the store is away)."""
    headers = dict(p.headers or {})
    response = _render(
        request,
        "error.html",
        {"active": "", "status": p.status, "title": p.title, "detail": p.detail},
        status_code=p.status,
    )
    response.headers.update(headers)
    return response


# --------------------------------------------------------------------------- reading forms


async def _read_form(
    request: Request, files: tuple[str, ...]
) -> tuple[dict[str, str], dict[str, Upload]]:
    """The page's form (text fields, files) through the one form reader."""
    settings: Settings = request.app.state.settings
    return await read_form(request, files, settings.max_upload_bytes, PAGE_FORM)


# --------------------------------------------------------------------------- saving


async def save_result(
    request: Request, kind: str, parts: SaveParts, title: str | None
) -> dict[str, str]:
    """Save a result as the JSON API does; returns the link and the delete token.

    Raises Problem 401 when the install needs an API key (the form's ``api_key``) and it
    is missing or wrong, 503 when the store does not answer, 413 when the result is too
    large.
    """
    await require_api_key(request)
    access: StoreAccess = request.app.state.store_access
    link = await access.save(kind, parts, title)
    # The page shows the link a colleague can open: absolute, on this host.
    base = str(request.base_url).rstrip("/")
    return {
        "id": link["id"],
        "token": link["delete_token"],
        "url": base + link["url"],
        "path": link["url"],
    }


# --------------------------------------------------------------------------- diagnose view


def _db(values: np.ndarray) -> np.ndarray:
    out: np.ndarray = 20.0 * np.log10(np.maximum(np.asarray(values, dtype=np.float64), 1e-300))
    return out


def _gain_curve(request_dict: Mapping[str, Any], out: Mapping[str, Any]) -> Any:
    """The chain's gain for the folding diagram, from the stored request (None if the
    chain cannot be rebuilt, e.g. a rate that came from a WAV header with no filter)."""
    try:
        req = DiagnoseIn.model_validate(request_dict)
        if req.chain is not None or req.sample_rate_hz is not None:
            chain = chain_from_request(req)  # type: ignore[arg-type]
        else:
            aa = req.anti_alias.to_core() if req.anti_alias is not None else None
            chain = Chain.shorthand(float(out["final_rate_hz"]), aa)
        rate = float(out["final_rate_hz"])
        tops = [p["true_hz"] for p in out["peaks"] if p.get("true_hz") is not None]
        top = max([*tops, rate])
        x_max = figures.fold_axis_end_hz(top, rate)
        return figures.chain_gain_curve(chain, x_max)
    except (ValueError, ValidationError, TypeError, KeyError):
        return None


def _headline(out: Mapping[str, Any], sources_given: bool) -> dict[str, Any]:
    """The counts beside the headline; the sentence is the answer's own
    (``summary.headline``), or for a result saved before it existed the same use-case
    wording computed from its peaks."""
    peaks = out["peaks"]
    keys = [figures.display_verdict(p) for p in peaks]
    aliases = [p for p in peaks if is_aliased(p)]
    summary = out.get("summary", {})
    said = (
        {"headline": summary["headline"], "status": summary["status"]}
        if "headline" in summary
        else headline(peaks, sources_given)
    )
    return {
        "text": said["headline"],
        "status": said["status"],
        "peaks": len(peaks),
        "aliases": len(aliases),
        "real": sum(1 for k in keys if k in ("direct", "family")),
        "unexplained": sum(1 for k in keys if k == "unexplained"),
    }


def _peak_rows(out: Mapping[str, Any]) -> list[dict[str, Any]]:
    rows = []
    for i, p in enumerate(out["peaks"]):
        key = figures.display_verdict(p)
        rows.append(
            {
                **p,
                "index": i,
                "key": key,
                "verdict_text": figures.VERDICT_STYLES[key][0],
                "is_alias": key in ALIAS_KEYS,
            }
        )
    # Aliases first, the most confident first: what the engineer came to see.
    rows.sort(key=lambda r: (not r["is_alias"], -r["confidence"], r["freq_hz"]))
    return rows


def diagnose_result_context(
    out: dict[str, Any],
    spectrum: tuple[np.ndarray, np.ndarray] | None,
    request_dict: Mapping[str, Any],
    unit: str = "",
    kind: str = "",
    csv_path: str | None = None,
) -> dict[str, Any]:
    """Everything the result part of the diagnose page shows, from the API payload and
    the spectrum (frequency, Hz; linear amplitude) it was computed from.

    ``unit`` and ``kind`` label the amplitudes (:func:`service.web.exports.level_words`);
    ``csv_path`` is the address of the peak table as CSV (None: the page carries it)."""
    words = level_words(out, unit, kind)
    peaks_fig = [
        {
            "freq_hz": p["freq_hz"],
            "level_db": p["amplitude_db"],
            "verdict": figures.display_verdict(p),
            "explanation": p["explanation"],
            "index": i,
        }
        for i, p in enumerate(out["peaks"])
    ]
    marks = {
        "nyquist_hz": out["nyquist_hz"],
        # Results saved before the span was named so carry it as "protected_edge_hz".
        "span_hz": out.get("span_hz", out.get("protected_edge_hz")),
        "band_hz": out.get("band_hz"),
    }
    if spectrum is not None:
        freq, amp = (np.asarray(x, dtype=np.float64) for x in spectrum)
        floor = _db(noise_floor(amp))
        spectrum_fig = figures.measured_spectrum(
            freq, _db(amp), floor_db=floor, peaks=peaks_fig, **marks
        )
    else:
        spectrum_fig = figures.measured_spectrum(
            [p["freq_hz"] for p in peaks_fig],
            [p["level_db"] for p in peaks_fig],
            peaks=peaks_fig,
            title="Measured peaks (the spectrum itself was not kept)",
            **marks,
        )
        spectrum_fig["data"][0]["mode"] = "markers"
        spectrum_fig["data"][0]["marker"] = {"size": 1, "color": figures.COLOURS["spectrum"]}
    spectrum_fig["layout"]["yaxis"]["title"]["text"] = words["axis"]
    rows = _peak_rows(out)
    if csv_path is None:
        csv_path = "data:text/csv;charset=utf-8," + quote(peaks_csv(out, words))
    return {
        "words": words,
        "csv_href": csv_path,
        "inputs": request_rows(request_dict),
        "out": out,
        "headline": _headline(out, bool(request_dict.get("sources") or request_dict.get("tones"))),
        "rows": rows[:MAX_TABLE_PEAKS],
        "rows_total": len(rows),
        "spectrum_fig": spectrum_fig,
        "fold_fig": figures.diagnosis_folding_diagram(out, _gain_curve(request_dict, out)),
        "has_spectrum": spectrum is not None,
        # Set by the page that computed it: the inputs its share form carries back.
        "share_inputs": None,
    }


def _demo_request() -> DiagnoseIn:
    return DiagnoseIn.model_validate(demo_diagnose_request())


def _demo_form() -> FormState:
    st = form_from_request(demo_diagnose_request())
    st.values.pop("lines", None)
    for key, value in blank_diagnose_form().values.items():
        if not st.values.get(key):
            st.values[key] = value
    return st


def _compute_demo(settings: Settings) -> tuple[DiagnoseIn, dict[str, Any], Measured]:
    req = _demo_request()
    out, m = diagnose_payload(req, settings, None)
    return req, out, m


async def _diagnose_page(
    request: Request,
    state: FormState,
    result: dict[str, Any] | None,
    status_code: int = 200,
    demo: bool = False,
    saved: dict[str, str] | None = None,
) -> HTMLResponse:
    ctx = {
        "active": "diagnose",
        "form": state,
        "result": result,
        "demo": demo,
        "saved": saved,
    }
    return _render(request, "diagnose.html", ctx, status_code=status_code)


@router.get("/diagnose", response_class=HTMLResponse)
async def diagnose_form(request: Request, demo: str | None = None) -> HTMLResponse:
    if demo in (None, "", "0"):
        return await _diagnose_page(request, blank_diagnose_form(), None)
    settings: Settings = request.app.state.settings
    req, out, m = await run_in_threadpool(_compute_demo, settings)
    ctx = await run_in_threadpool(
        diagnose_result_context,
        out,
        (m.freq_hz, m.amplitude),
        stored_request("diagnose", req),
        DEMO_AMPLITUDE_UNIT,
    )
    return await _diagnose_page(request, _demo_form(), ctx, demo=True)


@router.post("/diagnose", response_class=HTMLResponse)
async def diagnose_submit(request: Request) -> HTMLResponse:
    settings: Settings = request.app.state.settings
    try:
        form, files = await _read_form(request, ("file",))
    except ANSWERABLE as exc:
        p = as_problem(exc)
        st = blank_diagnose_form()
        st.add_error("file", DIAGNOSE_LABELS["file"], p.detail)
        return await _diagnose_page(request, st, None, status_code=p.status)
    f = parse_diagnose_form(form, files.get("file"))
    if f.req is None:
        return await _diagnose_page(request, f.state, None, status_code=422)
    try:
        out, m = await run_in_threadpool(diagnose_payload, f.req, settings, f.upload)
    except ANSWERABLE as exc:
        p = as_problem(exc)
        attach_diagnose_problem(f, p)
        return await _diagnose_page(request, f.state, None, status_code=422)
    stored = stored_request("diagnose", f.req)
    ctx = await run_in_threadpool(
        diagnose_result_context,
        out,
        (m.freq_hz, m.amplitude),
        stored,
        form.get("amplitude_unit", ""),
        form.get("amplitude_kind", "peak"),
    )
    saved = None
    if f.share:
        try:
            parts = SaveParts(stored, out, (m.freq_hz, m.amplitude))
            saved = await save_result(request, "diagnose", parts, f.title)
        except ANSWERABLE as exc:
            p = as_problem(exc)
            return error_page(request, p)
    elif f.pasted:
        ctx["share_inputs"] = share_fields(form, DIAGNOSE_TEXTS)
    _keep_pasted(f.state, DIAGNOSE_TEXTS)
    return await _diagnose_page(request, f.state, ctx, saved=saved)


def _keep_pasted(state: FormState, names: tuple[str, ...]) -> None:
    """Send the pasted text back with the result, so a correction needs no second paste;
    above :data:`MAX_KEPT_TEXT` it is left out (a page must stay light) and the form says
    so."""
    for name in names:
        text = state.values.get(name, "")
        if len(text) > MAX_KEPT_TEXT:
            state.values[name] = ""
            state.notes[name] = (
                f"The pasted text ({len(text):,} characters) was diagnosed but is too long to "
                "show again here; paste it again, or upload it as a file, to change a setting."
            )


# --------------------------------------------------------------------------- compare view


def _compare_groups(out: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The groups as the page shows them: verdict words and each capture's label."""
    labels = [c["label"] for c in out["captures"]]
    rows = []
    for g in out["groups"]:
        rows.append(
            {
                **g,
                "verdict_text": figures.COMPARE_STYLES[g["verdict"]][0],
                "seen": [
                    (labels[k], f, lv)
                    for k, (f, lv) in enumerate(zip(g["freq_hz"], g["level_db"], strict=True))
                    if f is not None
                ],
            }
        )
    # Moving and ambiguous groups first: they are what the test is for.
    order = {"alias": 0, "ambiguous": 1, "unmatched": 2, "real": 3}
    rows.sort(key=lambda r: (order[r["verdict"]], min(f for _, f, _ in r["seen"])))
    return rows[:MAX_TABLE_PEAKS]


def compare_result_context(
    out: dict[str, Any], spectra: Sequence[tuple[np.ndarray, np.ndarray]] | None
) -> dict[str, Any]:
    """The result part of the compare page; ``spectra`` holds each capture's (Hz,
    linear) in order, or None to draw the peaks only."""
    shown = (
        [(np.asarray(f, dtype=np.float64), _db(a)) for f, a in spectra]
        if spectra and len(spectra) == len(out["captures"])
        else None
    )
    counts = out["counts"]
    return {
        "out": out,
        "fig": figures.compare_spectra(out, shown),
        "groups": _compare_groups(out),
        "labels": [c["label"] for c in out["captures"]],
        "moved": counts.get("alias", 0) + counts.get("ambiguous", 0),
        "aliases": counts.get("alias", 0),
        "ambiguous": counts.get("ambiguous", 0),
        "stayed": counts.get("real", 0),
        "unmatched": counts.get("unmatched", 0),
        "has_spectrum": shown is not None,
        # Set by the page that computed it: its share form, or the hint to tick the box.
        "share_inputs": None,
        "share_hint": False,
        "demo": False,
    }


async def _compare_page(
    request: Request,
    state: FormState,
    result: dict[str, Any] | None,
    status_code: int = 200,
    saved: dict[str, str] | None = None,
) -> HTMLResponse:
    ctx = {
        "active": "compare",
        "form": state,
        "result": result,
        "saved": saved,
        "sides": SIDES,
        "required_sides": REQUIRED_SIDES,
    }
    return _render(request, "compare.html", ctx, status_code=status_code)


def _compute_compare_demo(settings: Settings) -> tuple[CompareIn, dict[str, Any], list[Measured]]:
    req = CompareIn.model_validate(demo_compare_request())
    out, measured = compare_payload(req, settings)
    return req, out, measured


@router.get("/compare", response_class=HTMLResponse)
async def compare_form(request: Request, demo: str | None = None) -> HTMLResponse:
    if demo in (None, "", "0"):
        return await _compare_page(request, blank_compare_form(), None)
    settings: Settings = request.app.state.settings
    _, out, measured = await run_in_threadpool(_compute_compare_demo, settings)
    spectra = [(m.freq_hz, m.amplitude) for m in measured]
    ctx = await run_in_threadpool(compare_result_context, out, spectra)
    ctx["demo"] = True
    return await _compare_page(request, blank_compare_form(), ctx)


@router.post("/compare", response_class=HTMLResponse)
async def compare_submit(request: Request) -> HTMLResponse:
    settings: Settings = request.app.state.settings
    try:
        form, files = await _read_form(request, tuple(f"{s}_file" for s in SIDES))
    except ANSWERABLE as exc:
        p = as_problem(exc)
        st = blank_compare_form()
        st.add_error("a_file", COMPARE_LABELS["a_file"], p.detail)
        return await _compare_page(request, st, None, status_code=p.status)
    f = parse_compare_form(form, {k[0]: v for k, v in files.items()})
    if f.req is None:
        return await _compare_page(request, f.state, None, status_code=422)
    try:
        out, measured = await run_in_threadpool(compare_payload, f.req, settings, f.uploads)
    except ANSWERABLE as exc:
        p = as_problem(exc)
        attach_compare_problem(f, p)
        return await _compare_page(request, f.state, None, status_code=422)
    spectra = [(m.freq_hz, m.amplitude) for m in measured]
    ctx = await run_in_threadpool(compare_result_context, out, spectra)
    saved = None
    if f.share:
        try:
            parts = saved_parts("compare", f.req, out, **measured_spectra("compare", measured))
            saved = await save_result(request, "compare", parts, f.title)
        except ANSWERABLE as exc:
            p = as_problem(exc)
            return error_page(request, p)
    else:
        if f.rows and all(f.pasted[r] for r in f.rows):
            ctx["share_inputs"] = share_fields(form, COMPARE_TEXTS)
        ctx["share_hint"] = ctx["share_inputs"] is None
    _keep_pasted(f.state, COMPARE_TEXTS)
    return await _compare_page(request, f.state, ctx, saved=saved)


# --------------------------------------------------------------------------- share


def _share_fold(body: str, settings: Settings) -> tuple[dict[str, Any], dict[str, Any]]:
    req = FoldIn.model_validate_json(body)
    return req.model_dump(mode="json", exclude_none=True), fold_payload(req, settings)


def _invalid_inputs(state: FormState) -> Problem:
    _, words, message = state.summary[0]
    return Problem(422, f"the carried inputs are not valid: {words}: {message}", field="inputs")


async def _share_pasted(
    request: Request, kind: str, inputs: str, title: str | None
) -> dict[str, str]:
    """Save a diagnosis or comparison of pasted text after the fact: the page's own form
    fields come back, go through the page's parser and are computed again here, so what
    is saved is what this server computes, never a result the browser sent."""
    settings: Settings = request.app.state.settings
    if kind == "diagnose":
        f = parse_diagnose_form(read_share_fields(inputs, DIAGNOSE_TEXTS), None)
        if f.req is None:
            raise _invalid_inputs(f.state)
        out, m = await run_in_threadpool(diagnose_payload, f.req, settings, f.upload)
        spectrum = (m.freq_hz, m.amplitude)
        return await save_result(request, kind, saved_parts(kind, f.req, out, spectrum), title)
    c = parse_compare_form(read_share_fields(inputs, COMPARE_TEXTS), {})
    if c.req is None:
        raise _invalid_inputs(c.state)
    out, measured = await run_in_threadpool(compare_payload, c.req, settings, c.uploads)
    parts = saved_parts(kind, c.req, out, **measured_spectra(kind, measured))
    return await save_result(request, kind, parts, title)


@router.post("/share", response_class=HTMLResponse)
async def share(request: Request) -> HTMLResponse:
    """Save a result the page can recompute from a small request: a prediction (its
    request JSON travels in the form), a diagnosis or comparison of pasted text (the
    page's form fields travel in the form) or the demo diagnosis (made by the app)."""
    settings: Settings = request.app.state.settings
    try:
        form = await read_page_form(request)
        kind = str(form.get("kind", ""))
        title = str(form.get("title", "")).strip()[:200] or None
        if kind == "fold":
            parts = await recompute_shared(_share_fold, str(form.get("request", "")), settings)
            saved = await save_result(request, "fold", parts, title)
        elif kind in ("diagnose", "compare"):
            saved = await _share_pasted(request, kind, str(form.get("inputs", "")), title)
        elif kind == "compare_demo":
            creq, cout, cm = await run_in_threadpool(_compute_compare_demo, settings)
            saved = await save_result(
                request,
                "compare",
                saved_parts("compare", creq, cout, **measured_spectra("compare", cm)),
                title or "Demo bench comparison",
            )
        elif kind == "diagnose_demo":
            req, out, m = await run_in_threadpool(_compute_demo, settings)
            saved = await save_result(
                request,
                "diagnose",
                saved_parts("diagnose", req, out, (m.freq_hz, m.amplitude)),
                title or "Demo bench diagnosis",
            )
        else:
            raise Problem(422, f"kind={kind!r} cannot be shared from this form", field="kind")
    except ANSWERABLE as exc:
        p = as_problem(exc)
        return error_page(request, p)
    return _render(request, "shared.html", {"active": "", "saved": saved, "kind": kind})


async def read_page_form(request: Request) -> dict[str, str]:
    """A page's form without files (text fields only); 400 when it cannot be read."""
    settings: Settings = request.app.state.settings
    text, _ = await read_form(request, (), settings.max_body_bytes, PAGE_FORM)
    return text


async def recompute_shared(
    compute: Callable[[str, Settings], tuple[dict[str, Any], dict[str, Any]]],
    text: str,
    settings: Settings,
) -> SaveParts:
    """Recompute a shared request (the form carries it as JSON) for saving."""
    try:
        stored, result = await run_in_threadpool(compute, text, settings)
    except ValidationError as exc:
        msg = exc.errors()[0]["msg"]
        raise Problem(422, f"the saved request is not valid: {msg}") from None
    return SaveParts(stored, result)


def request_json(req: Any) -> str:
    """A request as compact JSON for a hidden form field."""
    return json.dumps(req.model_dump(mode="json", exclude_none=True), separators=(",", ":"))
