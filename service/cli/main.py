"""The ``foldwise`` command: the same computations as the API, and the server."""

from __future__ import annotations

import argparse
import json
import math
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

__all__ = ["main"]


def _load_json(arg: str) -> Any:
    text = sys.stdin.read() if arg == "-" else Path(arg).read_text(encoding="utf-8")
    return json.loads(text)


def _parse_tone(text: str) -> dict[str, Any]:
    # LABEL=HZ or LABEL=HZ@AMPLITUDE
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"--tone {text!r}: write LABEL=HZ or LABEL=HZ@AMPLITUDE")
    label, rest = text.split("=", 1)
    freq, _, amp = rest.partition("@")
    try:
        tone: dict[str, Any] = {"label": label, "freq_hz": float(freq)}
        if amp:
            tone["amplitude"] = float(amp)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"--tone {text!r}: {exc}") from None
    return tone


def _parse_band(text: str) -> list[float]:
    try:
        lo, hi = (float(v) for v in text.split(":"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"--band {text!r}: write LOW:HIGH in Hz") from None
    return [lo, hi]


#: The analog anti-alias families (the contract's FilterFamily less the measured table).
FILTER_FAMILIES = ["butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel"]


def _db_text(amplitude: float | None) -> str:
    """A level in dB re 1 input unit, as the pages print it ("–" without an amplitude)."""
    if amplitude is None or not amplitude > 0:
        return "–"
    return f"{20 * math.log10(amplitude):.1f}"


def _chain_args(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("acquisition chain")
    g.add_argument("--sample-rate", type=float, metavar="HZ", help="sample rate, Hz")
    _filter_args(g)


def _filter_args(g: Any) -> None:
    """The anti-alias filter options (read by :func:`_chain_fields`)."""
    g.add_argument(
        "--filter",
        dest="family",
        metavar="FAMILY",
        choices=FILTER_FAMILIES,
        help="anti-alias filter family: " + ", ".join(FILTER_FAMILIES),
    )
    g.add_argument("--order", type=int, help="anti-alias filter order")
    g.add_argument("--cutoff", type=float, metavar="HZ", help="anti-alias filter cutoff, Hz")
    g.add_argument("--ripple", type=float, metavar="DB", help="passband ripple, dB")
    g.add_argument("--stop-atten", type=float, metavar="DB", help="stopband attenuation, dB")


def _chain_fields(ns: argparse.Namespace) -> dict[str, Any]:
    out: dict[str, Any] = {}
    if ns.sample_rate is not None:
        out["sample_rate_hz"] = ns.sample_rate
    if ns.family:
        aa = {
            "family": ns.family,
            "order": ns.order,
            "cutoff_hz": ns.cutoff,
            "ripple_db": ns.ripple,
            "stop_atten_db": ns.stop_atten,
        }
        out["anti_alias"] = {k: v for k, v in aa.items() if v is not None}
    return out


def _fold_request(ns: argparse.Namespace) -> dict[str, Any]:
    from ..demo import demo_fold_request

    if ns.request:
        req: dict[str, Any] = _load_json(ns.request)
    elif ns.demo:
        req = demo_fold_request()
    else:
        req = {}
    req.update(_chain_fields(ns))
    if ns.tone:
        req["tones"] = [*req.get("tones", []), *ns.tone]
    if ns.source:
        req["sources"] = [*req.get("sources", []), *(json.loads(s) for s in ns.source)]
    for key, value in (
        ("band_hz", ns.band),
        ("lines", ns.lines),
        ("speed_tolerance_pct", ns.speed_tolerance),
    ):
        if value is not None:
            req[key] = value
    return req


def _print_fold(out: dict[str, Any]) -> None:
    print(
        f"final rate {out['final_rate_hz']:g} S/s · Nyquist {out['nyquist_hz']:g} Hz · "
        f"band {out['band_hz'][0]:g}–{out['band_hz'][1]:g} Hz · "
        f"{out['lines']} lines, bin {out['bin_width_hz']:.3g} Hz"
    )
    print("chain: " + " → ".join(out["stages"]))
    for note in out["notes"]:
        print(f"note: {note}")
    print("levels: dB re 1 input unit (20·log10 of the predicted amplitude)")
    head = (
        f"{'tone':<28} {'source':<22} {'true Hz':>10} {'shows Hz':>10} {'zone':>4} "
        f"{'atten dB':>9} {'level dB':>9}  verdict"
    )
    print(head)
    print("-" * len(head))
    for t in sorted(out["tones"], key=lambda t: t["apparent_hz"]):
        if t["aliased"]:
            words = "alias" + (", inverted (even zone)" if t["inverted"] else "")
        else:
            words = "real (direct)"
        words += ", in band" if t["in_band"] else ", out of band"
        print(
            f"{t['label'][:28]:<28} {t['source'][:22]:<22} {t['freq_hz']:>10.1f} "
            f"{t['apparent_hz']:>10.1f} {t['zone']:>4} {t['attenuation_db']:>9.1f} "
            f"{_db_text(t['apparent_amplitude']):>9}  {words}"
        )
    if out["collisions"]:
        print(f"\n{out['collisions_total']} alias(es) land near another line:")
        from ..web.exports import collision_rows

        for c in collision_rows(out)[:20]:
            where = "in band" if c["in_band"] else "outside the band"
            print(
                f"  {c['alias']} ({c['alias_source']}) at {c['apparent_hz']:.1f} Hz, {where}, "
                f"near {c['other']} ({c['other_source']}): {c['why']}"
            )


def _cmd_fold(ns: argparse.Namespace) -> int:
    from ..config import get_settings
    from ..contract.fold import FoldIn
    from ..usecases.fold import fold_payload

    def run() -> None:
        req = FoldIn.model_validate(_fold_request(ns))
        out = fold_payload(req, get_settings())
        if ns.json:
            print(json.dumps(out, indent=2, ensure_ascii=False))
        else:
            _print_fold(out)

    return _report_errors(run)


#: Request fields and the command-line options that set them (errors name the option).
OPTION_WORDS = {
    "sample_rate_hz": "--sample-rate",
    "anti_alias.family": "--filter",
    "anti_alias.order": "--order",
    "anti_alias.cutoff_hz": "--cutoff",
    "anti_alias.ripple_db": "--ripple",
    "anti_alias.stop_atten_db": "--stop-atten",
    "band_hz": "--band",
    "lines": "--lines",
    "speed_tolerance_pct": "--speed-tolerance",
    "threshold_db": "--threshold",
    "upload.sample_rate_hz": "--record-rate",
    "upload.channel": "--channel",
    "upload.unit": "--unit",
    "upload.window": "--window",
    "upload.kind": "--kind",
    "spectrum_options.lines": "--lines",
    "tones": "--tone",
    "sources": "--source",
}


def _option(loc: str) -> str:
    """A request field path as the option that sets it (``anti_alias.order`` → ``--order``,
    ``tones.2.freq_hz`` → ``--tone (3rd)``)."""
    if loc in OPTION_WORDS:
        return OPTION_WORDS[loc]
    parts = loc.replace("[", ".").replace("]", "").split(".")
    for n in range(len(parts), 0, -1):
        head = ".".join(parts[:n])
        if head in OPTION_WORDS:
            rest = parts[n:]
            if rest and rest[0].isdigit():
                return f"{OPTION_WORDS[head]} number {int(rest[0]) + 1}"
            return OPTION_WORDS[head]
    return loc


def _report_errors(run: Any) -> int:
    """Run ``run()``; print input errors the way the API words them and return 2."""
    from pydantic import ValidationError

    from ..usecases.errors import InputError
    from ..web.forms import form_message

    try:
        run()
    except ValidationError as exc:
        for e in exc.errors():
            loc = ".".join(str(p) for p in e["loc"] if not (isinstance(p, str) and "[" in p))
            print(f"foldwise: {_option(loc)}: {form_message(e, OPTION_WORDS)}", file=sys.stderr)
        return 2
    except InputError as exc:
        where = f"{_option(exc.field)}: " if exc.field else ""
        print(f"foldwise: {where}{exc}", file=sys.stderr)
        return 2
    except (OSError, json.JSONDecodeError, ValueError) as exc:
        print(f"foldwise: {exc}", file=sys.stderr)
        return 2
    return 0


def _diagnose_request(ns: argparse.Namespace) -> dict[str, Any]:
    req: dict[str, Any] = _load_json(ns.request) if ns.request else {}
    req.update(_chain_fields(ns))
    if ns.source:
        req["sources"] = [*req.get("sources", []), *(json.loads(s) for s in ns.source)]
    if ns.tone:
        req["tones"] = [*req.get("tones", []), *ns.tone]
    upload = dict(req.get("upload", {}))
    for key, value in (
        ("kind", ns.kind),
        ("channel", ns.channel),
        ("sample_rate_hz", ns.record_rate),
        ("unit", ns.unit),
        ("amplitude_column", ns.amplitude_column),
        ("window", ns.window),
    ):
        if value is not None:
            upload[key] = value
    req["upload"] = upload
    opts = dict(req.get("spectrum_options", {}))
    if ns.lines is not None:
        opts["lines"] = ns.lines
    if ns.window is not None and ns.window != "unknown":
        opts["window"] = ns.window
    req["spectrum_options"] = opts
    for key, value in (
        ("threshold_db", ns.threshold),
        ("speed_tolerance_pct", ns.speed_tolerance),
        ("speed_search_pct", ns.speed_search),
    ):
        if value is not None:
            req[key] = value
    return req


#: The answer's verdict counts in the pages' words.
_VERDICT_COUNT_WORDS = {
    "direct": "real (direct)",
    "family": "harmonic-family members",
    "alias": "alias",
    "mirror": "mirror near fs/2",
    "unexplained": "unexplained",
}


def _print_diagnosis(out: dict[str, Any]) -> None:
    s = out["summary"]
    print(s["headline"])
    print(f"{s['input']}")
    print(
        f"bin {s['bin_width_hz']:.4g} Hz · Nyquist {out['nyquist_hz']:g} Hz · analysed span "
        f"{out['span_hz']:g} Hz (chain rejects {out['rejection_at_span_edge_db']:.1f} dB at "
        f"its edge, {out['rejection_at_fold_of_span_edge_db']:.1f} dB at fs − span) · values "
        f"read as {s['unit']} ({s['unit_reason']})"
    )
    print("chain: " + " → ".join(out["stages"]))
    for note in s.get("input_notes", []):
        print(f"input: {note}")
    for note in out["notes"]:
        print(f"note: {note}")
    counts = ", ".join(
        f"{v} {_VERDICT_COUNT_WORDS.get(k, k)}" for k, v in sorted(out["counts"].items())
    )
    print(f"{s['peaks_found']} peaks: {counts}\n")
    from ..web.figures import VERDICT_STYLES, display_verdict

    unit = s.get("amplitude_unit") or "input unit"
    print(f"levels: dB re 1 {unit} (20·log10 of the amplitude)")
    head = f"{'peak Hz':>10} {'level dB':>9} {'verdict':<24} {'conf':>5} {'true Hz':>10}  why"
    print(head)
    print("-" * 100)
    for p in out["peaks"]:
        true = "–" if p["true_hz"] is None else f"{p['true_hz']:.1f}"
        words = VERDICT_STYLES[display_verdict(p)][0]
        print(
            f"{p['freq_hz']:>10.1f} {p['amplitude_db']:>9.1f} {words:<24} "
            f"{100 * p['confidence']:>4.0f}% {true:>10}  {p['explanation']}"
        )
    print(f"\nCaution: {out['caution']}")


def _cmd_diagnose(ns: argparse.Namespace) -> int:
    from ..config import get_settings
    from ..contract.diagnose import DiagnoseIn
    from ..usecases.diagnose import diagnose_payload
    from ..usecases.measure import Upload

    def run() -> None:
        path = Path(ns.file)
        upload = Upload(data=path.read_bytes(), filename=path.name)
        req = DiagnoseIn.model_validate(_diagnose_request(ns))
        out, _ = diagnose_payload(req, get_settings(), upload)
        if ns.json:
            print(json.dumps(out, indent=2, ensure_ascii=False))
        else:
            _print_diagnosis(out)

    return _report_errors(run)


def _parse_capture(text: str) -> tuple[str, float | None, dict[str, Any] | None]:
    """``FILE@RATE[:FAMILY/ORDER/CUTOFF]`` (rate and filter optional) as its parts."""
    path, _, rest = text.rpartition("@") if "@" in text else (text, "", "")
    if not path:
        path, rest = text, ""
    rate_text, _, filt = rest.partition(":")
    try:
        rate = float(rate_text) if rate_text else None
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r}: the sample rate after @ must be a number (FILE@RATE[:FAMILY/ORDER/CUTOFF])"
        ) from None
    aa = None
    if filt:
        parts = filt.split("/")
        if len(parts) != 3:
            raise argparse.ArgumentTypeError(
                f"{text!r}: give the filter as FAMILY/ORDER/CUTOFF, e.g. butterworth/2/5000"
            )
        try:
            aa = {"family": parts[0], "order": int(parts[1]), "cutoff_hz": float(parts[2])}
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{text!r}: the filter's order and cutoff must be numbers (FAMILY/ORDER/CUTOFF)"
            ) from None
    return path, rate, aa


def _compare_request(ns: argparse.Namespace) -> tuple[dict[str, Any], dict[str, Any]]:
    """The compare request and its files, from --request, --demo, --capture or FILE_A FILE_B."""
    from ..demo import demo_compare_request
    from ..usecases.measure import Upload

    if ns.demo:
        req: dict[str, Any] = json.loads(json.dumps(demo_compare_request()))
    elif ns.request:
        req = _load_json(ns.request)
    else:
        req = {}
    given = list(ns.capture or [])
    if ns.file_a or ns.file_b:
        if given or not (ns.file_a and ns.file_b):
            raise ValueError("give two files (FILE_A FILE_B) or repeated --capture, not both")
        given = [(ns.file_a, ns.rate_a, None), (ns.file_b, ns.rate_b, None)]
    uploads: dict[str, Any] = {}
    if given:
        shared = _chain_fields(ns).get("anti_alias")
        caps = []
        for k, (file, rate, aa) in enumerate(given):
            path = Path(file)
            uploads[f"captures[{k}]"] = Upload(data=path.read_bytes(), filename=path.name)
            cap: dict[str, Any] = {}
            if rate is not None:
                cap["sample_rate_hz"] = rate
                if not path.name.lower().endswith((".wav", ".wave")):
                    cap["upload"] = {"sample_rate_hz": rate}
            if aa or shared:
                cap["anti_alias"] = aa or shared
            caps.append(cap)
        req.pop("a", None)
        req.pop("b", None)
        req["captures"] = caps
    options = {
        "threshold_db": ns.threshold,
        "max_true_hz": ns.max_true,
        "drift_pct": ns.drift,
        "level_tolerance_db": ns.level_tolerance,
        "full_scale_db": ns.full_scale,
        "prior_weight": ns.prior_weight,
        "settle_rates_hz": ns.settle_rates,
    }
    req.update({k: v for k, v in options.items() if v is not None})
    return req, uploads


def _cmd_compare(ns: argparse.Namespace) -> int:
    from ..config import get_settings
    from ..contract.diagnose import CompareIn
    from ..usecases.compare import compare_payload

    def run() -> None:
        req, uploads = _compare_request(ns)
        out, _ = compare_payload(CompareIn.model_validate(req), get_settings(), uploads)
        if ns.json:
            print(json.dumps(out, indent=2, ensure_ascii=False))
            return
        for cap in out["captures"]:
            print(f"capture {cap['label']} at {cap['sample_rate_hz']:g} S/s ({cap['input']})")
        print(f"\n{out['sentence']}\n")
        words = {
            "real": "stays: real",
            "alias": "moves: alias",
            "ambiguous": "ambiguous",
            "unmatched": "one capture only",
        }
        for g in out["groups"]:
            print(f"  {words[g['verdict']]:<17} {g['sentence']}")
            if g["verdict"] == "ambiguous":
                listed = ", ".join(f"{c['true_hz']:g}" for c in g["candidates"][:6])
                print(f"  {'':<17} candidates, Hz: {listed}")
        print(f"\nCaution: {out['caution']}")

    return _report_errors(run)


def _rates(text: str) -> list[float]:
    try:
        return [float(x) for x in text.replace(";", ",").split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r}: give the rates as numbers separated by commas, e.g. 25600,51200"
        ) from None


def _cmd_serve(ns: argparse.Namespace) -> int:
    from ..config import get_settings
    from ..serving import serve

    settings = get_settings()
    serve(
        host=ns.host or settings.host,
        port=ns.port or settings.port,
        workers=ns.workers,
        log_level=settings.log_level,
        loop=ns.loop,
    )
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="foldwise",
        description="Predict, find and explain aliases in machine spectra.",
    )
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("fold", help="predict where tones land through an acquisition chain")
    p.add_argument(
        "--request",
        metavar="FILE",
        help="a JSON request as POST /api/v1/fold takes it ('-' for stdin)",
    )
    p.add_argument("--demo", action="store_true", help="start from the demo drive-unit bench")
    _chain_args(p)
    p.add_argument(
        "--tone",
        action="append",
        type=_parse_tone,
        metavar="LABEL=HZ[@AMP]",
        help="a tone to fold (repeatable)",
    )
    p.add_argument(
        "--source",
        action="append",
        metavar="JSON",
        help='a machine source as JSON, e.g. \'{"type":"shaft","label":"motor",'
        '"speed_rpm":9000}\' (repeatable)',
    )
    p.add_argument("--band", type=_parse_band, metavar="LOW:HIGH", help="band of interest, Hz")
    p.add_argument("--lines", type=int, help="analysis lines")
    p.add_argument("--speed-tolerance", type=float, metavar="PCT", help="speed uncertainty, %%")
    p.add_argument("--json", action="store_true", help="print the API's JSON instead of a table")
    p.set_defaults(func=_cmd_fold)

    from .plan import register as register_plan

    register_plan(sub)
    from .runup import register as register_runup

    register_runup(sub)

    from .audit import register as register_audit

    register_audit(sub)

    d = sub.add_parser("diagnose", help="which peaks of a spectrum or record are aliases")
    d.add_argument(
        "file",
        help="spectrum text (CSV/TSV/whitespace) or time record (WAV, .npy, one-column text)",
    )
    d.add_argument(
        "--request",
        metavar="FILE",
        help="a JSON request as POST /api/v1/diagnose takes it (without the data)",
    )
    _chain_args(d)
    d.add_argument(
        "--source",
        action="append",
        metavar="JSON",
        help="a machine source as JSON (repeatable); without sources a blind family search runs",
    )
    d.add_argument(
        "--tone",
        action="append",
        type=_parse_tone,
        metavar="LABEL=HZ[@AMP]",
        help="a known tone (repeatable)",
    )
    d.add_argument(
        "--kind",
        choices=["auto", "spectrum", "time_record"],
        help="how to read the file (default: by its type)",
    )
    d.add_argument(
        "--record-rate",
        type=float,
        metavar="HZ",
        help="sample rate of a .npy or text time record (--sample-rate serves too)",
    )
    d.add_argument("--channel", type=int, help="channel of a multichannel file, from 0")
    d.add_argument("--unit", choices=["auto", "linear", "db"], help="spectrum values")
    d.add_argument(
        "--amplitude-column",
        metavar="NAME|N",
        help="amplitude column of a spectrum file with several value columns (name or from 0)",
    )
    d.add_argument(
        "--window",
        choices=["hann", "flattop", "rectangular", "hamming", "blackmanharris", "unknown"],
        help="window",
    )
    d.add_argument("--lines", type=int, help="analysis lines for a time record")
    d.add_argument("--threshold", type=float, metavar="DB", help="peak threshold over floor")
    d.add_argument("--speed-tolerance", type=float, metavar="PCT", help="speed uncertainty")
    d.add_argument(
        "--speed-search",
        type=float,
        metavar="PCT",
        help="search the running speed within ± PCT of the speeds given (default 4; 0: off)",
    )
    d.add_argument("--json", action="store_true", help="print the API's JSON")
    d.set_defaults(func=_cmd_diagnose)

    c = sub.add_parser(
        "compare",
        help="2 to 6 captures at different rates: what stays, what moves, true frequencies",
    )
    c.add_argument("file_a", nargs="?", help="first capture (two-capture form)")
    c.add_argument("file_b", nargs="?", help="second capture (two-capture form)")
    c.add_argument("--rate-a", type=float, metavar="HZ", help="sample rate of the first")
    c.add_argument("--rate-b", type=float, metavar="HZ", help="sample rate of the second")
    c.add_argument(
        "--capture",
        action="append",
        type=_parse_capture,
        metavar="FILE@RATE[:FAMILY/ORDER/CUTOFF]",
        help="a capture, its sample rate and its anti-alias filter, e.g. "
        "a.csv@12800:butterworth/2/5000 (repeat 2 to 6 times)",
    )
    c.add_argument("--request", metavar="FILE", help="a JSON request as the API takes it")
    c.add_argument("--demo", action="store_true", help="the demo bench at 12.8 and 16 kS/s")
    _filter_args(c.add_argument_group("anti-alias filter of every capture without its own"))
    c.set_defaults(sample_rate=None)
    a = c.add_argument_group("analysis")
    a.add_argument(
        "--threshold", type=float, metavar="DB", help="peak threshold above the floor, dB"
    )
    a.add_argument(
        "--max-true",
        type=float,
        metavar="HZ",
        help="highest true frequency (the sensor's bandwidth); default 10x the highest rate",
    )
    a.add_argument("--drift", type=float, metavar="PCT", help="speed drift between captures, %%")
    a.add_argument("--level-tolerance", type=float, metavar="DB", help="spread of a peak level, dB")
    a.add_argument("--full-scale", type=float, metavar="DB", help="converter full scale, dB")
    a.add_argument(
        "--prior-weight", type=float, metavar="W", help="lower-frequency prior, log10 units (0 off)"
    )
    a.add_argument(
        "--settle-rates",
        type=_rates,
        metavar="HZ,HZ,...",
        help="the converter's available rates, for the rate that would settle an ambiguity",
    )
    c.add_argument("--json", action="store_true", help="print the API's JSON")
    c.set_defaults(func=_cmd_compare)

    s = sub.add_parser("serve", help="start the web service")
    s.add_argument("--host", help="address to listen on (default 127.0.0.1)")
    s.add_argument("--port", type=int, help="port (default 8000)")
    s.add_argument("--workers", type=int, default=1, help="worker processes")
    s.add_argument(
        "--loop",
        choices=("asyncio", "uvloop"),
        default="asyncio",
        help="event loop (default asyncio: steadier latency under load, see service/serving.py)",
    )
    s.set_defaults(func=_cmd_serve)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    ns = build_parser().parse_args(argv)
    code: int = ns.func(ns)
    return code
