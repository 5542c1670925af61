"""The predict form: HTML form fields ↔ the JSON request of POST /api/v1/fold.

The form keeps the common case simple (a sample rate and one anti-alias filter, a few rows
per source type, a pasted tone list) and leaves the rest to two JSON boxes (a full chain,
more sources). Validation is the API's own: the form becomes a dict, ``FoldIn`` checks it,
and each error is sent back to the form field it came from.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, get_args, get_origin

from pydantic import ValidationError

from ..contract.fold import FoldIn
from ..contract.sources import SOURCE_MODELS
from ..http.problems import Problem
from .numbers import parse_quantity

__all__ = [
    "FILTER_FAMILIES",
    "SOURCE_FORMS",
    "FormState",
    "SourceField",
    "form_from_request",
    "form_message",
    "in_form_words",
    "parse_fold_form",
]

FILTER_FAMILIES = [
    ("", "none (no analog filter)"),
    ("butterworth", "Butterworth"),
    ("chebyshev1", "Chebyshev type I"),
    ("chebyshev2", "Chebyshev type II"),
    ("elliptic", "elliptic (Cauer)"),
    ("bessel", "Bessel"),
]
SPEED_UNITS = [("rpm", "rpm"), ("hz", "Hz"), ("cpm", "cpm")]


@dataclass(frozen=True)
class SourceField:
    name: str
    label: str
    kind: str = "number"  # number | int | text | list | speed
    hint: str = ""


def _kind(annotation: Any) -> str:
    """How a form box reads a contract field: a list, a whole number or a number."""
    seen: list[Any] = []
    todo = [annotation]
    while todo:
        t = todo.pop()
        seen.append(get_origin(t) or t)
        todo += list(get_args(t))
    if list in seen:
        return "list"
    return "int" if int in seen else "number"


def _field(source_type: str, name: str, label: str, hint: str = "") -> SourceField:
    """A form box for ``name`` of a source type, its kind read from the contract model
    (a name the model does not have fails at import, not in a user's face)."""
    model = SOURCE_MODELS[source_type]
    return SourceField(name, label, _kind(model.model_fields[name].annotation), hint)


_LABEL = SourceField("label", "Name", "text", "what it is, e.g. motor shaft")
_SPEED = SourceField("speed", "Speed", "speed", "shaft speed")
_AMP = SourceField("amplitude", "Amplitude", "number", "at the sensor, any unit")

#: One small form per source type: (type, heading, fields).
SOURCE_FORMS: list[tuple[str, str, list[SourceField]]] = [
    (
        "shaft",
        "Shaft speed and orders",
        [_LABEL, _SPEED, _field("shaft", "orders", "Orders", "e.g. 1, 2, 3, 0.5"), _AMP],
    ),
    (
        "gear_mesh",
        "Gear mesh",
        [
            _LABEL,
            _SPEED,
            _field("gear_mesh", "teeth", "Teeth", "on the gear whose speed is given"),
            _field("gear_mesh", "harmonics", "Harmonics"),
            _field("gear_mesh", "sidebands", "Sidebands", "± shaft speed, per harmonic"),
            _AMP,
        ],
    ),
    (
        "bearing",
        "Rolling bearing",
        [
            _LABEL,
            _SPEED,
            _field("bearing", "n_elements", "Rolling elements"),
            _field("bearing", "element_diameter", "Element diameter", "any length unit"),
            _field("bearing", "pitch_diameter", "Pitch diameter", "same unit"),
            _field("bearing", "contact_angle_deg", "Contact angle, °"),
            _field("bearing", "harmonics", "Harmonics"),
            _AMP,
        ],
    ),
    (
        "blade_pass",
        "Blade or vane pass",
        [
            _LABEL,
            _SPEED,
            _field("blade_pass", "blades", "Blades"),
            _field("blade_pass", "harmonics", "Harmonics"),
            _AMP,
        ],
    ),
    (
        "line",
        "Supply line harmonics",
        [
            _LABEL,
            _field("line", "line_hz", "Line frequency, Hz"),
            _field("line", "harmonics", "Harmonics", "a count, or a list: 1, 3, 5, 7"),
            _AMP,
        ],
    ),
    (
        "pwm",
        "Inverter PWM",
        [
            _LABEL,
            _field("pwm", "carrier_hz", "Carrier (switching), Hz"),
            _field("pwm", "fundamental_hz", "Fundamental f1, Hz", "or pole pairs + rpm"),
            _field("pwm", "pole_pairs", "Pole pairs"),
            _field("pwm", "speed_rpm", "Speed, rpm"),
            _field("pwm", "carrier_multiples", "Carrier multiples"),
            _field("pwm", "sidebands", "Sidebands", "± n·f1 per multiple"),
            _AMP,
        ],
    ),
]
SOURCE_TYPES = [t for t, _, _ in SOURCE_FORMS]
_FIELDS = {t: fields for t, _, fields in SOURCE_FORMS}
_SPEED_KEYS = {"speed_hz": "hz", "speed_rpm": "rpm", "speed_cpm": "cpm"}

#: Top-level form fields and the words shown for them in error messages.
FIELD_LABELS = {
    "sample_rate_hz": "Sample rate",
    "aa_family": "Filter family",
    "aa_order": "Filter order",
    "aa_cutoff_hz": "Filter cutoff",
    "aa_ripple_db": "Passband ripple",
    "aa_stop_atten_db": "Stopband attenuation",
    "chain_json": "Full chain (JSON)",
    "tone_list": "Tone list",
    "sources_json": "More sources (JSON)",
    "band_low_hz": "Band of interest, low",
    "band_high_hz": "Band of interest, high",
    "lines": "Analysis lines",
    "speed_tolerance_pct": "Speed tolerance",
}
_SIMPLE = ["sample_rate_hz", "lines", "speed_tolerance_pct"]

#: How each number box of the pages reads what is typed (service.web.numbers kinds):
#: the one table for the predict, diagnose and plan forms.
NUMBER_KINDS = {
    "sample_rate_hz": "rate",
    "upload_sample_rate_hz": "rate",
    "aa_order": "count",
    "aa_cutoff_hz": "freq",
    "aa_ripple_db": "db",
    "aa_stop_atten_db": "db",
    "lines": "count",
    "upload_channel": "count",
    "speed_tolerance_pct": "percent",
    "band_low_hz": "freq",
    "band_high_hz": "freq",
    "threshold_db": "db",
    "nominal_rpm": "speed",
    "speed_min_rpm": "speed",
    "speed_max_rpm": "speed",
    "rejection_db": "db",
    "bin_width_hz": "freq",
    "max_band_loss_db": "db",
    "averages": "count",
    "overlap_pct": "percent",
    "n_speeds": "count",
    "max_true_hz": "freq",
}
_AA = ["order", "cutoff_hz", "ripple_db", "stop_atten_db"]


@dataclass
class FormState:
    """What the form shows: raw values by field name, source rows, errors by field."""

    values: dict[str, str] = field(default_factory=dict)
    rows: dict[str, list[dict[str, str]]] = field(default_factory=dict)
    errors: dict[str, list[str]] = field(default_factory=dict)
    #: (field id or None, field words, message), in the order they were found.
    summary: list[tuple[str | None, str, str]] = field(default_factory=list)
    #: Notes beside a field that are not errors (e.g. pasted text too long to show again).
    notes: dict[str, str] = field(default_factory=dict)

    def add_error(self, field_id: str | None, words: str, message: str) -> None:
        if field_id is not None:
            self.errors.setdefault(field_id, []).append(message)
        self.summary.append((field_id, words, message))

    def kind_has_errors(self, kind: str) -> bool:
        return any(k.startswith(kind + "-") for k in self.errors)

    def rows_for_display(self, kind: str) -> list[dict[str, str]]:
        """The filled rows and one blank row, so each type can be entered without JS."""
        return [*self.rows.get(kind, []), {}]


# --------------------------------------------------------------------------- to the form


def _num(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float) and math.isfinite(v) and v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    return str(v)


def read_number(st: FormState, fid: str, words: str, kind: str | None = None) -> str | None:
    """The number typed in box ``fid`` as plain digits for the contract (``12.8k`` →
    ``12800``), "" when empty, None (with the error beside the box) when unreadable.
    A speed typed in a unit other than rpm is refused in an rpm-only box."""
    raw = st.values.get(fid, "").strip()
    if not raw:
        return ""
    kind = kind or NUMBER_KINDS.get(fid, "plain")
    try:
        q = parse_quantity(raw, kind)
    except ValueError as exc:
        st.add_error(fid, words, str(exc))
        return None
    if kind == "speed" and q.unit not in (None, "rpm") and fid.endswith("_rpm"):
        st.add_error(fid, words, f"{raw!r}: give this speed in rpm")
        return None
    return _num(q.value)


def _source_row(src: Mapping[str, Any]) -> dict[str, str] | None:
    kind = src.get("type")
    if kind not in _FIELDS:
        return None
    allowed = {f.name for f in _FIELDS[kind]}
    row: dict[str, str] = {}
    for key, value in src.items():
        if key == "type":
            continue
        if key in _SPEED_KEYS and "speed" in allowed:
            row["speed"] = _num(value)
            row["speed_unit"] = _SPEED_KEYS[key]
        elif key in allowed:
            if isinstance(value, list):
                row[key] = ", ".join(_num(v) for v in value)
            else:
                row[key] = _num(value)
        else:
            return None  # a field the small form does not have: keep it in the JSON box
    return row


def form_from_request(req: Mapping[str, Any]) -> FormState:
    """The form filled in from a fold request dict (e.g. the demo request)."""
    st = FormState()
    for key in _SIMPLE:
        st.values[key] = _num(req.get(key))
    aa = req.get("anti_alias") or {}
    if aa.get("table_hz") is not None:
        st.values["chain_json"] = json.dumps({"anti_alias": aa}, indent=2)
    else:
        st.values["aa_family"] = aa.get("family") or ""
        for key in _AA:
            st.values[f"aa_{key}"] = _num(aa.get(key))
    if req.get("chain") is not None:
        st.values["chain_json"] = json.dumps(req["chain"], indent=2)
    band = req.get("band_hz")
    if band:
        st.values["band_low_hz"], st.values["band_high_hz"] = _num(band[0]), _num(band[1])
    extra = []
    for src in req.get("sources") or []:
        row = _source_row(src)
        if row is None:
            extra.append(src)
        else:
            st.rows.setdefault(src["type"], []).append(row)
    if extra:
        st.values["sources_json"] = json.dumps(extra, indent=2)
    lines = []
    for t in req.get("tones") or []:
        parts = [str(t["label"]), _num(t["freq_hz"])]
        if t.get("amplitude") is not None:
            parts.append(_num(t["amplitude"]))
        lines.append(", ".join(parts))
    st.values["tone_list"] = "\n".join(lines)
    return st


# --------------------------------------------------------------------------- from the form

_ROW_KEY = re.compile(r"^(?P<kind>[a-z_]+)-(?P<index>\d{1,4})-(?P<name>[a-z_]+)$")


def _split_list(text: str) -> list[str]:
    return [p for p in re.split(r"[,;\s]+", text.strip()) if p]


def _read_rows(form: Mapping[str, str]) -> dict[str, list[dict[str, str]]]:
    found: dict[str, dict[int, dict[str, str]]] = {}
    for key, value in form.items():
        m = _ROW_KEY.match(key)
        if m and m["kind"] in _FIELDS:
            found.setdefault(m["kind"], {}).setdefault(int(m["index"]), {})[m["name"]] = value
    rows: dict[str, list[dict[str, str]]] = {}
    for kind in SOURCE_TYPES:
        for _, row in sorted(found.get(kind, {}).items()):
            if any(v.strip() for k, v in row.items() if k != "speed_unit"):
                rows.setdefault(kind, []).append({k: v.strip() for k, v in row.items()})
    return rows


def _row_number(st: FormState, fid: str, words: str, raw: str, kind: str) -> Any:
    """A number of a source row through the one reader (None: error shown)."""
    try:
        q = parse_quantity(raw, kind)
    except ValueError as exc:
        st.add_error(fid, words, str(exc))
        return None
    return q


def _row_to_source(
    kind: str, row: Mapping[str, str], st: FormState | None = None, prefix: str = ""
) -> dict[str, Any]:
    out: dict[str, Any] = {"type": kind}
    heading = next(h for t, h, _ in SOURCE_FORMS if t == kind)
    for f in _FIELDS[kind]:
        raw = row.get(f.name, "")
        if not raw:
            continue
        row_no = int(prefix.rsplit("-", 1)[1]) + 1 if prefix else 1
        fid, words = f"{prefix}-{f.name}", f"{heading}, row {row_no}: {f.label}"
        if f.kind in ("speed", "number", "int") and st is not None:
            nkind = {"speed": "speed", "int": "count"}.get(f.kind, "plain")
            if f.name.endswith("_hz"):
                nkind = "freq"
            elif f.name == "speed_rpm":
                nkind = "speed"
            q = _row_number(st, fid, words, raw, nkind)
            if q is None:
                continue
            if f.name == "speed_rpm" and q.unit not in (None, "rpm"):
                st.add_error(fid, words, f"{raw!r}: give this speed in rpm")
                continue
            raw = _num(q.value)
            if f.kind == "speed" and q.unit is not None:
                out[f"speed_{q.unit}"] = raw
                continue
        if f.kind == "speed":
            unit = row.get("speed_unit", "rpm")
            out[f"speed_{unit if unit in ('hz', 'rpm', 'cpm') else 'rpm'}"] = raw
        elif f.kind == "list":
            parts = _split_list(raw)
            # Line harmonics: a bare number is a count, anything else a list.
            if f.name == "harmonics" and len(parts) == 1 and "," not in raw:
                out[f.name] = parts[0]
            else:
                out[f.name] = parts
        else:
            out[f.name] = raw
    return out


def _parse_tone_list(text: str, st: FormState) -> tuple[list[dict[str, Any]], list[int]]:
    """``label, frequency[, amplitude]`` per line; returns tones and their line numbers."""
    tones: list[dict[str, Any]] = []
    line_no: list[int] = []
    for n, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        parts = [p.strip() for p in line.split(",")]
        nums: list[float] = []
        # Numbers are taken from the right, so a label may itself contain commas.
        while len(parts) > 1 and len(nums) < 2:
            try:
                nums.insert(0, float(parts[-1]))
            except ValueError:
                break
            parts.pop()
        label = ", ".join(parts)
        if not nums or not label:
            st.add_error(
                "tone_list",
                f"Tone list, line {n}",
                f"write 'label, frequency in Hz' or 'label, frequency, amplitude' (got {line!r})",
            )
            continue
        tone: dict[str, Any] = {"label": label, "freq_hz": nums[0]}
        if len(nums) == 2:
            tone["amplitude"] = nums[1]
        tones.append(tone)
        line_no.append(n)
    return tones, line_no


def json_field(st: FormState, name: str, label: str) -> tuple[bool, Any]:
    """The JSON in a text box: (False, None) when empty or unreadable (the error is put
    beside the box), else (True, value)."""
    text = st.values.get(name, "").strip()
    if not text:
        return False, None
    try:
        return True, json.loads(text)
    except json.JSONDecodeError as exc:
        st.add_error(name, label, f"not valid JSON: {exc.msg} at character {exc.pos}")
        return False, None


def _json_box(st: FormState, name: str, want: type) -> Any:
    ok, value = json_field(st, name, FIELD_LABELS[name])
    if not ok:
        return None
    if not isinstance(value, want):
        st.add_error(
            name, FIELD_LABELS[name], f"must be a JSON {'list' if want is list else 'object'}"
        )
        return None
    return value


@dataclass
class _Origin:
    """Where each source and tone of the request came from in the form."""

    sources: list[tuple[str, str]] = field(default_factory=list)  # (field id, words)
    tone_lines: list[int] = field(default_factory=list)


def _build_request(form: Mapping[str, str]) -> tuple[dict[str, Any], FormState, _Origin]:
    st = FormState()
    st.values = {k: v for k, v in form.items() if not _ROW_KEY.match(k)}
    st.rows = _read_rows(form)
    origin = _Origin()
    req: dict[str, Any] = {}

    chain = _json_box(st, "chain_json", object)
    if isinstance(chain, dict) and "chain" not in chain and "anti_alias" not in chain:
        chain = None
        st.add_error("chain_json", FIELD_LABELS["chain_json"], "give a list of stages")
    if isinstance(chain, list):
        req["chain"] = chain
    elif isinstance(chain, dict):
        req.update({k: chain[k] for k in ("chain", "anti_alias", "sample_rate_hz") if k in chain})
    if "chain" not in req:
        rate = read_number(st, "sample_rate_hz", FIELD_LABELS["sample_rate_hz"])
        if rate:
            req.setdefault("sample_rate_hz", rate)
        family = st.values.get("aa_family", "").strip()
        if family and "anti_alias" not in req:
            aa: dict[str, Any] = {"family": family}
            for key in _AA:
                raw = read_number(st, f"aa_{key}", FIELD_LABELS[f"aa_{key}"])
                if raw:
                    aa[key] = raw
            req["anti_alias"] = aa
    for key in ("lines", "speed_tolerance_pct"):
        raw = read_number(st, key, FIELD_LABELS[key])
        if raw:
            req[key] = raw
    lo = read_number(st, "band_low_hz", FIELD_LABELS["band_low_hz"])
    hi = read_number(st, "band_high_hz", FIELD_LABELS["band_high_hz"])
    if lo is None or hi is None:
        lo = hi = ""
    if lo or hi:
        if lo and hi:
            req["band_hz"] = [lo, hi]
        else:
            missing = "band_high_hz" if lo else "band_low_hz"
            st.add_error(missing, FIELD_LABELS[missing], "give both ends of the band, or neither")

    sources: list[dict[str, Any]] = []
    for kind in SOURCE_TYPES:
        for i, row in enumerate(st.rows.get(kind, [])):
            sources.append(_row_to_source(kind, row, st, f"{kind}-{i}"))
            heading = next(h for t, h, _ in SOURCE_FORMS if t == kind)
            origin.sources.append((f"{kind}-{i}", f"{heading}, row {i + 1}"))
    extra = _json_box(st, "sources_json", list)
    for j, src in enumerate(extra or []):
        sources.append(src)
        origin.sources.append(("sources_json", f"More sources (JSON), item {j + 1}"))
    if sources:
        req["sources"] = sources
    tones, origin.tone_lines = _parse_tone_list(st.values.get("tone_list", ""), st)
    if tones:
        req["tones"] = tones
    return req, st, origin


def _row_field(prefix: str, kind: str, name: Any) -> str:
    if name in _SPEED_KEYS:
        return f"{prefix}-speed"
    if isinstance(name, str) and any(f.name == name for f in _FIELDS.get(kind, [])):
        return f"{prefix}-{name}"
    return prefix


def _locate(loc: Sequence[Any], origin: _Origin) -> tuple[str | None, str]:
    """Form field id and words for a pydantic error location in the request."""
    if not loc:
        return None, "Inputs"
    head = loc[0]
    if head in ("sample_rate_hz", "lines", "speed_tolerance_pct"):
        return head, FIELD_LABELS[head]
    if head == "anti_alias":
        sub = next((p for p in loc[1:] if isinstance(p, str) and p in _AA), None)
        fid = f"aa_{sub}" if sub else "aa_family"
        return fid, FIELD_LABELS[fid]
    if head == "chain":
        return "chain_json", FIELD_LABELS["chain_json"]
    if head == "band_hz":
        fid = "band_high_hz" if len(loc) > 1 and loc[1] == 1 else "band_low_hz"
        return fid, FIELD_LABELS[fid]
    if head == "tones" and len(loc) > 1 and isinstance(loc[1], int):
        i = loc[1]
        line = origin.tone_lines[i] if i < len(origin.tone_lines) else i + 1
        return "tone_list", f"Tone list, line {line}"
    if head == "sources" and len(loc) > 1 and isinstance(loc[1], int):
        i = loc[1]
        if i < len(origin.sources):
            prefix, words = origin.sources[i]
            if prefix == "sources_json":
                return prefix, words
            kind = prefix.rsplit("-", 1)[0]
            name = loc[3] if len(loc) > 3 else None
            fid = _row_field(prefix, kind, name)
            label = next((f.label for f in _FIELDS[kind] if fid.endswith("-" + f.name)), None)
            return fid, f"{words}: {label}" if label else words
    return None, str(head)


def _problem_field(p: Problem, origin: _Origin) -> tuple[str | None, str]:
    if not p.field:
        return None, "Inputs"
    m = re.match(r"^(\w+)(?:\[(\d+)\])?", p.field)
    if not m:
        return None, p.field
    loc: list[Any] = [m[1]]
    if m[2] is not None:
        loc.append(int(m[2]))
    return _locate(loc, origin)


def parse_fold_form(form: Mapping[str, str]) -> tuple[FoldIn | None, FormState, _Origin]:
    """Validate the form as a fold request.

    Returns the request (None when something is wrong), the form state to show again,
    with every error attached to its field, and where each source and tone came from.
    """
    req, st, origin = _build_request(form)
    if st.summary:
        return None, st, origin
    try:
        return FoldIn.model_validate(req), st, origin
    except ValidationError as exc:
        for e in exc.errors():
            loc = [p for p in e.get("loc", ()) if not (isinstance(p, str) and "[" in p)]
            fid, words = _locate(loc, origin)
            st.add_error(fid, words, form_message(e))
        return None, st, origin


def _bound(v: Any) -> str:
    return _num(v) if isinstance(v, int | float) else str(v)


def form_message(e: Mapping[str, Any], labels: Mapping[str, str] | None = None) -> str:
    """A validation error in the form's words: the bound and what to do, never the
    validation library's own sentence or a request field name."""
    kind = str(e.get("type", ""))
    ctx = e.get("ctx") or {}
    value = e.get("input")
    got = f" (got {value})" if isinstance(value, str | int | float) and value != "" else ""
    if kind == "missing":
        return "this is needed: fill it in"
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        word = {
            "greater_than": "more than",
            "greater_than_equal": "at least",
            "less_than": "less than",
            "less_than_equal": "at most",
        }[kind]
        bound = next(iter(ctx.values()), "")
        return f"must be {word} {_bound(bound)}{got}"
    if kind in ("float_parsing", "float_type", "int_parsing", "int_type", "finite_number"):
        return f"write a number, e.g. 12800, 12.8k or 12,800{got}"
    if kind == "int_from_float":
        return f"write a whole number{got}"
    if kind in ("literal_error", "enum"):
        return f"choose one of {ctx.get('expected', 'the listed choices')}{got}"
    if kind in ("too_short", "too_long"):
        bound = ctx.get("min_length" if kind == "too_short" else "max_length", "")
        word = "at least" if kind == "too_short" else "at most"
        return f"give {word} {bound} item{'s' if bound != 1 else ''}"
    if kind == "extra_forbidden":
        return "this entry is not one this form knows; remove it"
    if kind in ("list_type", "dict_type", "model_type"):
        return "not in the expected shape; see the hint beside the box"
    # Our own validators' sentences (value_error) say what to do; only the request's
    # field names in them are put in the form's words.
    return in_form_words(str(e.get("msg", "invalid")).removeprefix("Value error, "), labels) + got


#: Request fields that are not one form box, in the form's words.
_REQUEST_WORDS = {
    "band_hz": "Band of interest",
    "speed_range_rpm": "Speed range",
    "anti_alias": "Filter",
    "chain": "Full chain",
    "spectrum_options": "Analysis lines",
    "sample_rate_hz": "Sample rate",
}


def in_form_words(text: str, labels: Mapping[str, str] | None = None) -> str:
    """``text`` with each request field name (``rejection_db``) replaced by the form's
    label for it ("Alias rejection")."""
    words = {**_REQUEST_WORDS, **(labels or FIELD_LABELS)}
    names = sorted((k for k in words if "_" in k or k in _REQUEST_WORDS), key=len, reverse=True)
    if not names:
        return text
    pattern = re.compile(r"(?<![\w.])(" + "|".join(map(re.escape, names)) + r")(?![\w])")
    return pattern.sub(lambda m: f"'{words[m[1]]}'", text)


def attach_problem(st: FormState, origin: _Origin, p: Problem) -> None:
    """Show an error the computation raised (e.g. a chain in the wrong order) on the form."""
    fid, words = _problem_field(p, origin)
    st.add_error(fid, words, in_form_words(p.detail))
