"""``foldwise plan``: the acquisition planner (and run-up) from the command line.

Same request and answer as POST /api/v1/plan: ``--request FILE`` takes an API request,
``--demo`` starts from the drive-unit bench, and a few options set the common fields
directly. ``--json`` prints the API's JSON; otherwise a readable summary.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

__all__ = ["build_plan_request", "register"]


def _pair(text: str, what: str, unit: str, form: str = "MIN:MAX") -> list[float]:
    try:
        lo, hi = (float(v) for v in text.split(":"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{what} {text!r}: write {form} in {unit}") from None
    return [lo, hi]


def _band(text: str) -> list[float]:
    return _pair(text, "--band", "Hz", "LOW:HIGH")


def _speed_range(text: str) -> list[float]:
    return _pair(text, "--speed-range", "rpm")


def _rates(text: str) -> list[float]:
    try:
        out = [float(v) for v in text.replace(" ", "").split(",") if v]
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"--rates {text!r}: write sample rates in Hz separated by commas"
        ) from None
    if not out:
        raise argparse.ArgumentTypeError("--rates: give at least one sample rate in Hz")
    return out


def _resolve(text: str) -> list[str]:
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 2 or not all(parts):
        raise argparse.ArgumentTypeError(
            f"--resolve {text!r}: write two tone labels separated by a comma"
        )
    return parts


def _source(text: str) -> dict[str, Any]:
    try:
        value = json.loads(text)
    except json.JSONDecodeError as exc:
        raise argparse.ArgumentTypeError(f"--source: not valid JSON ({exc})") from None
    if not isinstance(value, dict):
        raise argparse.ArgumentTypeError("--source: give one source as a JSON object")
    return value


def _tone(text: str) -> dict[str, Any]:
    # LABEL=HZ or LABEL=HZ@AMPLITUDE
    label, sep, rest = text.partition("=")
    freq, _, amp = rest.partition("@")
    try:
        if not sep or not label:
            raise ValueError
        tone: dict[str, Any] = {"label": label, "freq_hz": float(freq)}
        if amp:
            tone["amplitude"] = float(amp)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"--tone {text!r}: write LABEL=HZ or LABEL=HZ@AMPLITUDE"
        ) from None
    return tone


def _orders(text: str) -> list[str | float]:
    out: list[str | float] = []
    for part in (p.strip() for p in text.split(",")):
        if not part:
            continue
        try:
            out.append(float(part))
        except ValueError:
            out.append(part)
    return out


def register(subparsers: Any) -> argparse.ArgumentParser:
    """Add the ``plan`` sub-command to ``foldwise``'s sub-parsers."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "plan",
        help="choose the cheapest sample rate and anti-alias filter for given sources",
        description="Choose the cheapest sample rate and anti-alias filter that keep every "
        "alias out of the band or below the required level over the speed range; report "
        "lines, bin width, record length, why cheaper options fail and what risk remains.",
    )
    p.add_argument(
        "--request",
        metavar="FILE",
        help="a JSON request as POST /api/v1/plan takes it ('-': stdin)",
    )
    p.add_argument(
        "--demo",
        action="store_true",
        help="start from the demo drive-unit bench (1,000-12,000 rpm, 0-5 kHz, 60 dB)",
    )
    p.add_argument("--band", type=_band, metavar="LOW:HIGH", help="band of interest, Hz")
    req = p.add_mutually_exclusive_group()
    req.add_argument(
        "--rejection", type=float, metavar="DB", help="alias rejection, dB below the strongest tone"
    )
    req.add_argument("--floor", type=float, metavar="LEVEL", help="absolute alias limit, amplitude")
    rates = p.add_mutually_exclusive_group()
    rates.add_argument(
        "--rates", type=_rates, metavar="HZ,HZ,...", help="candidate sample rates, Hz"
    )
    rates.add_argument(
        "--rate-series", choices=["converter", "analyser"], help="a common series of rates"
    )
    p.add_argument(
        "--source",
        action="append",
        type=_source,
        metavar="JSON",
        help='a machine source as JSON, e.g. \'{"type":"shaft","label":"motor",'
        '"speed_rpm":12000}\' (repeatable)',
    )
    p.add_argument(
        "--tone", action="append", type=_tone, metavar="LABEL=HZ[@AMP]", help="a tone (repeatable)"
    )
    p.add_argument(
        "--nominal-rpm", type=float, metavar="RPM", help="speed the sources are given at"
    )
    speed = p.add_mutually_exclusive_group()
    speed.add_argument(
        "--speed-range", type=_speed_range, metavar="MIN:MAX", help="speeds to plan for, rpm"
    )
    speed.add_argument(
        "--speed-tolerance", type=float, metavar="PCT", help="± speed tolerance, %% of nominal"
    )
    p.add_argument(
        "--resolve", type=_resolve, metavar="LABEL,LABEL", help="two tones that must be resolved"
    )
    p.add_argument("--bin-width", type=float, metavar="HZ", help="required bin width, Hz")
    p.add_argument(
        "--window",
        choices=["rectangular", "hann", "hamming", "blackmanharris", "flattop"],
        help="analysis window (default hann)",
    )
    p.add_argument("--averages", type=int, help="records averaged")
    p.add_argument("--overlap", type=float, metavar="PCT", help="record overlap, %%")
    p.add_argument(
        "--runup",
        nargs="?",
        const="",
        type=_orders,
        metavar="ORDERS",
        help="include the run-up; optionally the lines of interest, comma-separated "
        "(tone labels or numeric orders)",
    )
    p.add_argument("--runup-speeds", type=int, metavar="N", help="run-up speed points")
    p.add_argument("--json", action="store_true", help="print the API's JSON instead of a summary")
    p.set_defaults(func=_cmd_plan)
    return p


def _load_json(arg: str) -> Any:
    text = sys.stdin.read() if arg == "-" else Path(arg).read_text(encoding="utf-8")
    return json.loads(text)


def build_plan_request(ns: argparse.Namespace) -> dict[str, Any]:
    """The API request the command line describes."""
    from ..demo import demo_plan_request

    if ns.request:
        req: dict[str, Any] = _load_json(ns.request)
        if not isinstance(req, dict):
            raise ValueError("--request: the file must hold one JSON object")
    elif ns.demo:
        req = demo_plan_request()
    else:
        req = {}
    if ns.band is not None:
        req["band_hz"] = ns.band
    if ns.rejection is not None:
        req.pop("floor", None)
        req["rejection_db"] = ns.rejection
    if ns.floor is not None:
        req.pop("rejection_db", None)
        req["floor"] = ns.floor
    if ns.rates is not None:
        req.pop("rate_series", None)
        req["rates_hz"] = ns.rates
    if ns.rate_series is not None:
        req.pop("rates_hz", None)
        req["rate_series"] = ns.rate_series
    if ns.source:
        req["sources"] = [*req.get("sources", []), *ns.source]
    if ns.tone:
        req["tones"] = [*req.get("tones", []), *ns.tone]
    if ns.nominal_rpm is not None:
        req["nominal_rpm"] = ns.nominal_rpm
    if ns.speed_range is not None:
        req.pop("speed_tolerance_pct", None)
        req["speed_range_rpm"] = ns.speed_range
    if ns.speed_tolerance is not None:
        req.pop("speed_range_rpm", None)
        req["speed_tolerance_pct"] = ns.speed_tolerance
    for key, value in (
        ("resolve", ns.resolve),
        ("bin_width_hz", ns.bin_width),
        ("window", ns.window),
        ("averages", ns.averages),
        ("overlap_pct", ns.overlap),
    ):
        if value is not None:
            req[key] = value
    if ns.runup is not None or ns.runup_speeds is not None:
        runup = dict(req.get("runup") or {})
        if ns.runup:
            runup["orders_of_interest"] = ns.runup
        if ns.runup_speeds is not None:
            runup["n_speeds"] = ns.runup_speeds
        req["runup"] = runup
    return req


# --------------------------------------------------------------------------- output


def _g(v: Any, spec: str = ".4g") -> str:
    return "–" if v is None else format(v, spec)


def _print_plan(out: dict[str, Any]) -> None:
    r = out["recommendation"]
    band = out["band_hz"]
    print(f"Recommendation: {r['sample_rate_hz']:g} S/s with {r['filter']['name']}")
    print(
        f"  band {band[0]:g}–{band[1]:g} Hz · span {r['span_hz']:.6g} Hz · {r['lines']} lines, "
        f"bin {r['bin_width_hz']:.4g} Hz · window {r['window']} "
        f"({r['mainlobe_bins']:g}-bin main lobe)"
    )
    print(
        f"  record {r['record_s']:.4g} s ({r['samples']} samples) × {r['averages']} "
        f"average(s), {r['overlap_pct']:g} % overlap → {r['total_s']:.4g} s"
    )
    margin = r["worst_margin_db"]
    print(
        "  worst alias margin "
        + (
            "– (no alias reaches the band)"
            if margin is None
            else f"{margin:.1f} dB below the limit"
        )
        + f" · band loss {r['band_loss_db']:.2f} dB · limit {r['limit_db']:.1f} dB re 1 input unit"
    )
    print("  chain: " + " → ".join(r["stages"]))
    hits = sorted((t for t in out["tones"] if t["aliases_into_band"]), key=lambda t: t["margin_db"])
    if hits:
        speed_col = "rpm" if out["speed_range"]["rpm"] is not None else "speed"
        print(f"\nAliases that reach the band ({len(hits)}), worst first:")
        head = (
            f"  {'tone':<24} {'source':<22} {'true Hz':>9} {'shows Hz':>9} {'zone':>4} "
            f"{speed_col:>7} {'level dB':>9} {'margin dB':>9}"
        )
        print(head)
        for t in hits[:25]:
            speed = t["rpm"] if t["rpm"] is not None else t["speed_factor"]
            flag = " (amplitude assumed)" if t["amplitude_assumed"] else ""
            print(
                f"  {t['label'][:24]:<24} {t['source'][:22]:<22} {t['true_hz']:>9.1f} "
                f"{t['apparent_hz']:>9.1f} {t['zone']:>4} {_g(speed, '.5g'):>7} "
                f"{t['level_db']:>9.1f} {t['margin_db']:>9.1f}{flag}"
            )
        if len(hits) > 25:
            print(f"  … and {len(hits) - 25} more (--json lists all)")
    else:
        print("\nNo tone's alias reaches the band.")
    if out["rejected"]:
        print(f"\nCheaper options that fail ({len(out['rejected'])}):")
        for rej in out["rejected"]:
            print(f"  - {rej['reason']}")
    if out.get("amplitude_basis_text"):
        print(f"\nAmplitudes: {out['amplitude_basis_text']}")
    if out["residual_risk"]:
        print("\nResidual risk:")
        for note in out["residual_risk"]:
            print(f"  - {note}")
    ru = out.get("runup")
    if ru:
        print(
            f"\nRun-up: {ru['points_computed']} speeds, {ru['fold_lines_total']} fold line(s), "
            f"{ru['crossings_total']} crossing(s) of a line of interest"
        )
        for c in ru["crossings"][:20]:
            where = f"{c['rpm']:.0f} rpm" if c["rpm"] is not None else f"× {c['speed_factor']:.3g}"
            how = "touches" if c["touching"] else "crosses"
            print(
                f"  at {where}: {c['alias_label']} ({c['alias_source']}) {how} "
                f"{c['crossed_label']} ({c['crossed_source']}) at {c['apparent_hz']:.1f} Hz"
            )
        if ru["crossings_total"] > 20:
            print(f"  … and {ru['crossings_total'] - 20} more (--json lists them)")
    print(f"\nCaution: {out['caution']}")


def _cmd_plan(ns: argparse.Namespace) -> int:
    from pydantic import ValidationError

    from ..config import get_settings
    from ..contract.plan import PlanIn
    from ..usecases.errors import InputError, PlanImpossibleError
    from ..usecases.plan import plan_payload

    try:
        req = PlanIn.model_validate(build_plan_request(ns))
        out = plan_payload(req, get_settings())
    except ValidationError as exc:
        for e in exc.errors(include_url=False):
            loc = ".".join(str(p) for p in e["loc"]) or "request"
            msg = str(e["msg"]).removeprefix("Value error, ")
            print(f"foldwise plan: {loc}: {msg}", file=sys.stderr)
        return 2
    except PlanImpossibleError as exc:
        print(f"foldwise plan: no setup meets the requirements: {exc}", file=sys.stderr)
        for tip in exc.suggestions:
            print(f"  - {tip}", file=sys.stderr)
        return 1
    except InputError as exc:
        print(f"foldwise plan: {exc.field + ': ' if exc.field else ''}{exc}", file=sys.stderr)
        return 2
    except (OSError, ValueError) as exc:  # unreadable file, bad JSON
        print(f"foldwise plan: {exc}", file=sys.stderr)
        return 2
    if ns.json:
        print(json.dumps(out, indent=2, ensure_ascii=False))
    else:
        _print_plan(out)
    return 0
