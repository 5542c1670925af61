"""The diagnose and compare forms: multipart form fields ↔ DiagnoseIn / CompareIn.

The chain, sources and tone list are the predict form's own fields (``forms``), so a
bench described once reads the same on every page. A pasted spectrum becomes an upload
named ``pasted.csv`` read as spectrum text, so pasted and uploaded spectra follow one path
(and one set of error messages) through ``service.usecases.diagnose``.
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from pydantic import ValidationError

from ..contract.diagnose import CompareIn, DiagnoseIn
from ..http.problems import Problem
from ..usecases.measure import Upload
from .forms import (
    FIELD_LABELS,
    NUMBER_KINDS,
    FormState,
    _build_request,
    _locate,
    _Origin,
    _problem_field,
    form_message,
    in_form_words,
    read_number,
)

__all__ = [
    "COMPARE_OPTIONS",
    "DIAGNOSE_LABELS",
    "READ_KINDS",
    "REQUIRED_SIDES",
    "SHARE_FIELDS_LIMIT",
    "SHARE_TEXT_LIMIT",
    "SIDES",
    "UNITS",
    "WINDOWS",
    "CompareForm",
    "DiagnoseForm",
    "attach_compare_problem",
    "attach_diagnose_problem",
    "blank_compare_form",
    "blank_diagnose_form",
    "parse_compare_form",
    "parse_diagnose_form",
    "read_share_fields",
    "share_fields",
]

READ_KINDS = [
    ("auto", "decide from the file"),
    ("spectrum", "spectrum (frequency, amplitude)"),
    ("time_record", "time record (samples)"),
]
UNITS = [("auto", "decide from the values"), ("linear", "linear"), ("db", "dB")]
WINDOWS = [
    ("hann", "Hann"),
    ("flattop", "flat top"),
    ("rectangular", "rectangular (none)"),
    ("hamming", "Hamming"),
    ("blackmanharris", "Blackman-Harris"),
    ("unknown", "unknown"),
]

#: Field words of the diagnose form that the predict form does not have.
DIAGNOSE_LABELS = {
    **FIELD_LABELS,
    "spectrum_text": "Pasted spectrum",
    "file": "File",
    "upload_kind": "File holds",
    "upload_channel": "Channel",
    "upload_sample_rate_hz": "Record sample rate",
    "upload_unit": "Amplitude unit",
    "upload_amplitude_column": "Amplitude column",
    "upload_window": "Window",
    "threshold_db": "Peak threshold",
    "lines": "Analysis lines (time records)",
    "share_title": "Title of the link",
}
_UPLOAD_FIELDS = ("channel", "sample_rate_hz", "unit", "amplitude_column", "window", "kind")

#: The form's choice of what the spectrum's values are -> the request's amplitude_kind.
FORM_KINDS = {"peak": "peak", "rms": "rms", "pp": "peak_to_peak"}


@dataclass
class DiagnoseForm:
    """A parsed diagnose form: the request (None when invalid), what to show, the input."""

    req: DiagnoseIn | None
    state: FormState
    origin: _Origin
    upload: Upload | None = None
    pasted: bool = False
    share: bool = False
    title: str | None = None


def blank_diagnose_form() -> FormState:
    st = FormState()
    st.values = {
        "sample_rate_hz": "",
        "aa_family": "",
        "threshold_db": "10",
        "upload_kind": "auto",
        "upload_unit": "auto",
        "upload_window": "hann",
        "upload_channel": "0",
    }
    return st


def _file_target(pasted: bool) -> str:
    return "spectrum_text" if pasted else "file"


def parse_diagnose_form(form: Mapping[str, str], upload: Upload | None) -> DiagnoseForm:
    """Validate the diagnose form. ``form`` holds the text fields, ``upload`` the file."""
    req_dict, st, origin = _build_request(form)
    text = form.get("spectrum_text", "")
    pasted = bool(text.strip())
    out = DiagnoseForm(None, st, origin, pasted=pasted)
    out.share = form.get("share", "") in ("1", "on", "true")
    out.title = form.get("share_title", "").strip()[:200] or None
    if pasted and upload is not None:
        st.add_error(
            "spectrum_text",
            DIAGNOSE_LABELS["spectrum_text"],
            "paste a spectrum or choose a file, not both (clear the text box to use the file)",
        )
    elif not pasted and upload is None:
        st.add_error(
            "spectrum_text",
            DIAGNOSE_LABELS["spectrum_text"],
            "paste a spectrum (frequency, amplitude per line) or choose a file",
        )
    if pasted:
        upload = Upload(data=text.encode("utf-8"), filename="pasted.csv")
    out.upload = upload
    read: dict[str, Any] = {}
    for key in _UPLOAD_FIELDS:
        fid = f"upload_{key}"
        raw = form.get(fid, "").strip()
        if fid in NUMBER_KINDS:
            raw = read_number(st, fid, DIAGNOSE_LABELS[fid]) or ""
        if raw:
            read[key] = raw
    if pasted:
        read["kind"] = "spectrum"
    # The unit and kind chosen on the form travel in the request, so a saved result
    # (and its CSV) keeps them.
    if form.get("amplitude_unit", "").strip():
        read["amplitude_unit"] = form["amplitude_unit"].strip()
    kind = FORM_KINDS.get(form.get("amplitude_kind", "").strip())
    if kind is not None:
        read["amplitude_kind"] = kind
    read.setdefault("channel", "0")
    req_dict["upload"] = read
    lines = req_dict.pop("lines", None)
    if lines is not None:
        req_dict["spectrum_options"] = {"lines": lines}
    threshold = read_number(st, "threshold_db", DIAGNOSE_LABELS["threshold_db"])
    if threshold:
        req_dict["threshold_db"] = threshold
    if st.summary:
        return out
    try:
        out.req = DiagnoseIn.model_validate(req_dict)
    except ValidationError as exc:
        for e in exc.errors():
            loc = [p for p in e.get("loc", ()) if not (isinstance(p, str) and "[" in p)]
            fid, words = _locate_diagnose(loc, origin, pasted)
            st.add_error(fid, words, _message(e))
    return out


def _message(e: Mapping[str, Any]) -> str:
    return form_message(e, DIAGNOSE_LABELS)


def _locate_diagnose(loc: Sequence[Any], origin: _Origin, pasted: bool) -> tuple[str | None, str]:
    head = loc[0] if loc else None
    if head == "upload":
        sub = loc[1] if len(loc) > 1 else None
        if sub in _UPLOAD_FIELDS:
            fid = f"upload_{sub}"
            return fid, DIAGNOSE_LABELS[fid]
        return _file_target(pasted), DIAGNOSE_LABELS[_file_target(pasted)]
    if head == "spectrum_options":
        return "lines", DIAGNOSE_LABELS["lines"]
    if head == "threshold_db":
        return "threshold_db", DIAGNOSE_LABELS["threshold_db"]
    if head in ("spectrum", "time_record", "file"):
        return _file_target(pasted), DIAGNOSE_LABELS[_file_target(pasted)]
    return _locate(loc, origin)


def attach_diagnose_problem(f: DiagnoseForm, p: Problem) -> None:
    """Put an error the computation raised next to the field it names."""
    name = p.field or ""
    head = re.split(r"[.\[]", name, maxsplit=1)[0]
    if head in ("file", "spectrum", "time_record"):
        fid = _file_target(f.pasted)
        words = DIAGNOSE_LABELS[fid]
        f.state.add_error(fid, words, in_form_words(p.detail, DIAGNOSE_LABELS))
        return
    if head in ("upload", "spectrum_options", "threshold_db"):
        loc: list[Any] = name.split(".")
        fid, words = _locate_diagnose(loc, f.origin, f.pasted)
        f.state.add_error(fid, words, in_form_words(p.detail, DIAGNOSE_LABELS))
        return
    fid2, words2 = _problem_field(p, f.origin)
    f.state.add_error(fid2, words2, in_form_words(p.detail, DIAGNOSE_LABELS))


# --------------------------------------------------------------------------- compare

#: Capture rows of the compare form: A and B always, C to F when filled in.
SIDES = ("a", "b", "c", "d", "e", "f")
REQUIRED_SIDES = ("a", "b")
_CAPTURE_FIELDS = {
    "spectrum_text": "pasted spectrum",
    "file": "file",
    "sample_rate_hz": "sample rate",
    "aa_family": "anti-alias filter",
    "aa_order": "filter order",
    "aa_cutoff_hz": "filter cutoff",
    "kind": "file holds",
    "unit": "amplitude unit",
}
COMPARE_LABELS = {
    **{f"{s}_{k}": f"Capture {s.upper()}, {v}" for s in SIDES for k, v in _CAPTURE_FIELDS.items()},
    "threshold_db": "Peak threshold",
    "max_true_hz": "Highest true frequency",
    "drift_pct": "Speed drift between captures",
    "settle_rates_hz": "Converter's available rates",
    "share_title": "Title of the link",
}
#: Analysis fields of the compare form, as the request names them.
COMPARE_OPTIONS = ("threshold_db", "max_true_hz", "drift_pct", "settle_rates_hz")


@dataclass
class CompareForm:
    req: CompareIn | None
    state: FormState
    uploads: dict[str, Upload] = field(default_factory=dict)
    pasted: dict[str, bool] = field(default_factory=dict)
    share: bool = False
    title: str | None = None
    #: The form row (a, b, ...) of each capture in the request, in order.
    rows: list[str] = field(default_factory=list)


def blank_compare_form() -> FormState:
    st = FormState()
    st.values = {"threshold_db": "10", "drift_pct": "0.5"}
    for s in SIDES:
        st.values.update({f"{s}_kind": "auto", f"{s}_unit": "auto", f"{s}_aa_family": ""})
    return st


def parse_compare_form(form: Mapping[str, str], files: Mapping[str, Upload]) -> CompareForm:
    """Validate the compare form; ``files`` maps ``a``/``b`` to their uploaded file."""
    st = FormState()
    st.values = dict(form)
    out = CompareForm(None, st)
    out.share = form.get("share", "") in ("1", "on", "true")
    out.title = form.get("share_title", "").strip()[:200] or None
    req: dict[str, Any] = {"captures": []}
    for s in SIDES:
        text = form.get(f"{s}_spectrum_text", "")
        pasted = bool(text.strip())
        out.pasted[s] = pasted
        rate = form.get(f"{s}_sample_rate_hz", "").strip()
        if s not in REQUIRED_SIDES and not pasted and s not in files and not rate:
            continue  # an optional row left empty
        fid = f"{s}_spectrum_text"
        if pasted and s in files:
            st.add_error(fid, COMPARE_LABELS[fid], "paste a spectrum or choose a file, not both")
        elif not pasted and s not in files:
            st.add_error(fid, COMPARE_LABELS[fid], "paste a spectrum or choose a file")
        up = Upload(text.encode("utf-8"), f"pasted-{s}.csv") if pasted else files.get(s)
        field_name = f"captures[{len(out.rows)}]"
        if up is not None:
            out.uploads[field_name] = up
        cap: dict[str, Any] = {"label": s.upper()}
        if rate:
            cap["sample_rate_hz"] = rate
        family = form.get(f"{s}_aa_family", "").strip()
        if family:
            aa = {"family": family}
            for key in ("order", "cutoff_hz"):
                raw = form.get(f"{s}_aa_{key}", "").strip()
                if raw:
                    aa[key] = raw
            cap["anti_alias"] = aa
        read: dict[str, Any] = {
            "kind": "spectrum" if pasted else (form.get(f"{s}_kind", "").strip() or "auto"),
            "unit": form.get(f"{s}_unit", "").strip() or "auto",
        }
        name = (up.filename if up else "").lower()
        if rate and not name.endswith((".wav", ".wave")):
            read["sample_rate_hz"] = rate
        cap["upload"] = read
        req["captures"].append(cap)
        out.rows.append(s)
    for key in COMPARE_OPTIONS:
        raw = form.get(key, "").strip()
        if raw and key == "settle_rates_hz":
            req[key] = [x for x in re.split(r"[\s,;]+", raw) if x]
        elif raw:
            req[key] = raw
    if st.summary:
        return out
    try:
        out.req = CompareIn.model_validate(req)
    except ValidationError as exc:
        for e in exc.errors():
            loc = [p for p in e.get("loc", ()) if not (isinstance(p, str) and "[" in p)]
            fid, words = _locate_compare(_row_loc(loc, out.rows), out.pasted)
            st.add_error(fid, words, _message(e))
    return out


def _row_loc(loc: Sequence[Any], rows: Sequence[str]) -> list[Any]:
    """A request location under ``captures[i]`` as the form row's (``b``, ...)."""
    loc = list(loc)
    if len(loc) > 1 and loc[0] == "captures" and isinstance(loc[1], int) and loc[1] < len(rows):
        return [rows[loc[1]], *loc[2:]]
    return loc


def _locate_compare(loc: Sequence[Any], pasted: Mapping[str, bool]) -> tuple[str | None, str]:
    if not loc:
        return None, "Inputs"
    head = loc[0]
    if head in SIDES:
        sub = loc[1] if len(loc) > 1 else None
        if sub == "anti_alias":
            leaf = next((p for p in loc[2:] if p in ("order", "cutoff_hz")), None)
            fid = f"{head}_aa_{leaf}" if leaf else f"{head}_aa_family"
        elif sub == "sample_rate_hz":
            fid = f"{head}_sample_rate_hz"
        elif sub == "upload" and len(loc) > 2 and loc[2] in ("kind", "unit"):
            fid = f"{head}_{loc[2]}"
        elif sub == "upload" and len(loc) > 2 and loc[2] == "sample_rate_hz":
            fid = f"{head}_sample_rate_hz"
        else:
            fid = f"{head}_spectrum_text" if pasted.get(head) else f"{head}_file"
        return fid, COMPARE_LABELS[fid]
    if head in COMPARE_OPTIONS:
        return head, f"{COMPARE_LABELS[head]} ({head})"
    return None, str(head)


def attach_compare_problem(f: CompareForm, p: Problem) -> None:
    loc: list[Any] = re.split(r"[.\[\]]+", p.field or "")
    loc = [int(x) if x.isdigit() else x for x in loc if x]
    loc = _row_loc(loc, f.rows)
    if loc and loc[0] in SIDES and len(loc) > 1 and loc[1] in ("file", "spectrum"):
        loc = [loc[0], "file"]
    fid, words = _locate_compare(loc, f.pasted)
    f.state.add_error(fid, words, p.detail)


# --------------------------------------------------------------------------- share after the fact

#: Pasted text (UTF-8 bytes, all boxes together) a result page carries back in its share
#: form. Above it, or for an uploaded file, the tick box before computing is the way to a
#: link: a huge spectrum must not double the weight of the result page.
SHARE_TEXT_LIMIT = 256 * 1024
#: The carried fields as JSON (characters): room for the escaped newlines and the other
#: fields, and a bound on the page whatever was pasted.
SHARE_FIELDS_LIMIT = 384 * 1024
#: Fields that say how to share, not what to compute.
_NOT_CARRIED = frozenset({"share", "share_title", "api_key"})


def share_fields(form: Mapping[str, str], text_fields: Sequence[str]) -> str | None:
    """The form's text fields as compact JSON for a hidden field of a share form, so the
    server can parse and compute the same request again; None when too large.

    ``text_fields`` names the boxes that hold pasted text (they count against
    :data:`SHARE_TEXT_LIMIT`)."""
    pasted = sum(len(form.get(name, "").encode("utf-8")) for name in text_fields)
    if pasted > SHARE_TEXT_LIMIT:
        return None
    carried = {k: v for k, v in form.items() if k not in _NOT_CARRIED}
    text = json.dumps(carried, separators=(",", ":"))
    return text if len(text) <= SHARE_FIELDS_LIMIT else None


def _is_text(v: object) -> bool:
    """A string a browser could have sent: JSON allows lone surrogates, UTF-8 does not."""
    if not isinstance(v, str):
        return False
    try:
        v.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


def read_share_fields(text: str, text_fields: Sequence[str]) -> dict[str, str]:
    """The fields :func:`share_fields` wrote, checked again (they came from the browser).

    Raises Problem 422 when the text is not a JSON object of strings, 413 when it is over
    the limits."""
    if len(text) > SHARE_FIELDS_LIMIT:
        raise Problem(
            413,
            f"the carried inputs are {len(text):,} characters; the limit is "
            f"{SHARE_FIELDS_LIMIT:,}: tick the share box before computing instead",
            field="inputs",
            limit=SHARE_FIELDS_LIMIT,
        )
    try:
        fields = json.loads(text)
    except (ValueError, RecursionError):
        fields = None
    if not isinstance(fields, dict) or not all(
        _is_text(k) and _is_text(v) for k, v in fields.items()
    ):
        raise Problem(
            422, "the carried inputs are not a JSON object of text fields", field="inputs"
        )
    pasted = sum(len(fields.get(name, "").encode("utf-8")) for name in text_fields)
    if pasted > SHARE_TEXT_LIMIT:
        raise Problem(
            413,
            f"the pasted text is {pasted:,} bytes; the limit for sharing after the fact is "
            f"{SHARE_TEXT_LIMIT:,}: tick the share box before computing instead",
            field="inputs",
            limit=SHARE_TEXT_LIMIT,
        )
    return {k: v for k, v in fields.items() if k not in _NOT_CARRIED}
