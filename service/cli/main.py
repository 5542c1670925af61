"""The ``foldwise`` command: the same computations as the API, and the server."""

from __future__ import annotations

import argparse
import json
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


def _chain_args(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("acquisition chain")
    g.add_argument("--sample-rate", type=float, metavar="HZ", help="sample rate, Hz")
    g.add_argument(
        "--filter",
        dest="family",
        metavar="FAMILY",
        choices=["butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel"],
        help="anti-alias filter family",
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


def _fmt(v: Any, spec: str = ".1f") -> str:
    return "–" if v is None else format(v, spec)


def _print_fold(out: dict[str, Any]) -> None:
    print(
        f"final rate {out['final_rate_hz']:g} S/s · Nyquist {out['nyquist_hz']:g} Hz · "
        f"band {out['band_hz'][0]:g}–{out['band_hz'][1]:g} Hz · "
        f"{out['lines']} lines, bin {out['bin_width_hz']:.3g} Hz"
    )
    print("chain: " + " → ".join(out["stages"]))
    for note in out["notes"]:
        print(f"note: {note}")
    head = (
        f"{'tone':<28} {'source':<22} {'true Hz':>10} {'shows Hz':>10} {'zone':>4} "
        f"{'atten dB':>9} {'level':>10}  flags"
    )
    print(head)
    print("-" * len(head))
    for t in sorted(out["tones"], key=lambda t: t["apparent_hz"]):
        flags = []
        if t["aliased"]:
            flags.append("ALIAS" + (" inverted" if t["inverted"] else ""))
        if t["in_band"]:
            flags.append("in band")
        print(
            f"{t['label'][:28]:<28} {t['source'][:22]:<22} {t['freq_hz']:>10.1f} "
            f"{t['apparent_hz']:>10.1f} {t['zone']:>4} {t['attenuation_db']:>9.1f} "
            f"{_fmt(t['apparent_amplitude'], '.3g'):>10}  {', '.join(flags)}"
        )
    if out["collisions"]:
        print(f"\n{out['collisions_total']} alias(es) land near another line:")
        for c in out["collisions"][:20]:
            print(
                f"  {c['alias']} ({c['alias_source']}) at {c['apparent_hz']:.1f} Hz is "
                f"{c['separation_bins']:.1f} bins from {c['other']} ({c['other_source']})"
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


def _report_errors(run: Any) -> int:
    """Run ``run()``; print input errors the way the API words them and return 2."""
    from pydantic import ValidationError

    from ..usecases.errors import InputError

    try:
        run()
    except ValidationError as exc:
        for e in exc.errors():
            loc = ".".join(str(p) for p in e["loc"])
            print(f"foldwise: {loc}: {e['msg']}", file=sys.stderr)
        return 2
    except InputError as exc:
        print(f"foldwise: {exc.field + ': ' if exc.field else ''}{exc}", file=sys.stderr)
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
    for note in out["notes"]:
        print(f"note: {note}")
    counts = ", ".join(f"{v} {k}" for k, v in sorted(out["counts"].items()))
    print(f"{s['peaks_found']} peaks: {counts}\n")
    head = f"{'peak Hz':>10} {'level dB':>9} {'verdict':<12} {'conf':>5} {'true Hz':>10}  why"
    print(head)
    print("-" * 100)
    for p in out["peaks"]:
        true = "–" if p["true_hz"] is None else f"{p['true_hz']:.1f}"
        print(
            f"{p['freq_hz']:>10.1f} {p['amplitude_db']:>9.1f} {p['verdict']:<12} "
            f"{p['confidence']:>5.2f} {true:>10}  {p['explanation']}"
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


def _cmd_compare(ns: argparse.Namespace) -> int:
    from ..config import get_settings
    from ..contract.diagnose import CompareIn
    from ..usecases.compare import compare_payload
    from ..usecases.measure import Upload

    def run() -> None:
        uploads = {}
        req: dict[str, Any] = {"a": {}, "b": {}}
        for side, file, rate in (("a", ns.file_a, ns.rate_a), ("b", ns.file_b, ns.rate_b)):
            path = Path(file)
            uploads[side] = Upload(data=path.read_bytes(), filename=path.name)
            req[side] = {"sample_rate_hz": rate}
        out, _ = compare_payload(CompareIn.model_validate(req), get_settings(), uploads)
        if ns.json:
            print(json.dumps(out, indent=2, ensure_ascii=False))
            return
        for side in ("a", "b"):
            cap = out[side]
            print(f"capture {side.upper()} at {cap['sample_rate_hz']:g} S/s ({cap['input']})")
            for p in cap["peaks"]:
                print(f"  {p['freq_hz']:>10.1f} Hz  {p['verdict']:<10} {p['explanation']}")
        print(f"\nCaution: {out['caution']}")

    return _report_errors(run)


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
        "--record-rate", type=float, metavar="HZ", help="sample rate of a .npy or text time record"
    )
    d.add_argument("--channel", type=int, help="channel of a multichannel file, from 0")
    d.add_argument("--unit", choices=["auto", "linear", "db"], help="spectrum values")
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

    c = sub.add_parser("compare", help="two captures at different rates: what stays, what moves")
    c.add_argument("file_a")
    c.add_argument("file_b")
    c.add_argument("--rate-a", type=float, metavar="HZ", help="sample rate of the first")
    c.add_argument("--rate-b", type=float, metavar="HZ", help="sample rate of the second")
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
