"""``foldwise run-up``: a run-up record's lines and their folding verdicts.

The options map onto :class:`~service.contract.runup.RunUpRecordIn` (and its ``upload``); the
answer is the API's, from the same use-case. Heavy imports stay inside the command so
``foldwise --help`` stays fast.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

__all__ = ["build_runup_request", "register"]

#: Files larger than this (about 40 s of two 16-bit channels at 51.2 kS/s) get a progress
#: bar on a terminal; shorter ones finish before a bar says anything.
PROGRESS_BYTES = 8 << 20


def _channel(text: str) -> int | str:
    return int(text) if text.strip().isdigit() else text


def register(subparsers: Any) -> argparse.ArgumentParser:
    """Add the ``run-up`` sub-command to ``foldwise``'s sub-parsers."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "run-up",
        help="a run-up record: which lines of the frequency × speed map are folded",
        description="Read a record taken while the speed sweeps (vibration and tacho "
        "channels of a WAV, .npy or CSV), map frequency against speed, and classify each "
        "line: real order, folded order (zones, speed ranges), fixed-frequency alias, "
        "sideband, resonance or unexplained.",
    )
    p.add_argument("file", nargs="?", help="the record (multi-channel WAV, .npy, CSV)")
    p.add_argument(
        "--request",
        metavar="FILE",
        help="a JSON request as POST /api/v1/run-up takes it (without the data)",
    )
    p.add_argument(
        "--demo",
        action="store_true",
        help="analyse the invented e-drive run-up (0-12,000 rpm, 12.8 kS/s), generated now",
    )
    p.add_argument(
        "--vibration-channel", type=_channel, metavar="N|NAME", help="index from 0 or name"
    )
    p.add_argument("--tacho-channel", type=_channel, metavar="N|NAME", help="index or name")
    p.add_argument("--ppr", type=int, metavar="N", help="tacho pulses per revolution")
    p.add_argument("--sample-rate", type=float, metavar="HZ", help="rate of a .npy/CSV record")
    p.add_argument("--anti-alias", metavar="JSON", help="the analog filter as JSON")
    p.add_argument("--nperseg", type=int, help="frame length, samples (bin width = fs/nperseg)")
    p.add_argument(
        "--source", action="append", metavar="JSON", help="a known source as JSON (repeatable)"
    )
    p.add_argument("--nominal-rpm", type=float, help="speed the sources are described at, rpm")
    p.add_argument("--json", action="store_true", help="print the API's JSON")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(func=_cmd_runup)
    return p


def build_runup_request(ns: argparse.Namespace) -> dict[str, Any]:
    """The request the options describe (a ``--request`` file first, options over it)."""
    body: dict[str, Any] = {}
    if ns.request:
        text = sys.stdin.read() if ns.request == "-" else Path(ns.request).read_text("utf-8")
        body = json.loads(text)
    upload = dict(body.get("upload") or {})
    if ns.vibration_channel is not None:
        upload["vibration_channel"] = ns.vibration_channel
    if ns.tacho_channel is not None:
        upload["tacho_channel"] = ns.tacho_channel
    if ns.sample_rate is not None:
        upload["sample_rate_hz"] = ns.sample_rate
    if upload and not ns.demo:
        body["upload"] = upload
    if ns.ppr is not None:
        body["pulses_per_rev"] = ns.ppr
    if ns.anti_alias:
        body["anti_alias"] = json.loads(ns.anti_alias)
    if ns.nperseg is not None:
        body["nperseg"] = ns.nperseg
    if ns.source:
        body["sources"] = [json.loads(s) for s in ns.source]
    if ns.nominal_rpm is not None:
        body["nominal_rpm"] = ns.nominal_rpm
    return body


def _print(out: dict[str, Any]) -> None:
    sp, mp = out["speed"], out["map"]
    print(out["input"])
    print(
        f"Speed from the {sp['source']}: {sp['rpm_min']:.0f} to {sp['rpm_max']:.0f} rpm over "
        f"{sp['duration_s']:.3g} s"
        + (
            f"; {sp['missing_pulses_repaired']} missing and {sp['extra_pulses_repaired']} "
            "extra pulse(s) repaired"
            if sp["source"] == "tacho"
            else ""
        )
    )
    print(
        f"Sample rate {mp['sample_rate_hz']:g} S/s (Nyquist {mp['nyquist_hz']:g} Hz), bin "
        f"width {mp['bin_width_hz']:.3g} Hz, {mp['frames']} frames\n"
    )
    print(f"{'verdict':<13} {'order':>8} {'fixed Hz':>9} {'zones':<10} {'conf':>5}  sentence")
    for ln in out["lines"]:
        order = "" if ln["order"] is None else f"{ln['order']:.2f}"
        fixed = "" if ln["fixed_hz"] is None else f"{ln['fixed_hz']:.0f}"
        zones = ",".join(str(z["zone"]) for z in ln["zones"])
        print(
            f"{ln['kind']:<13} {order:>8} {fixed:>9} {zones:<10} {ln['confidence']:>5.2f}  "
            f"{ln['sentence']}"
        )
    for note in out["notes"]:
        print(f"Note: {note}")
    print(f"\nCaution: {out['caution']}")


def _cmd_runup(ns: argparse.Namespace) -> int:
    from pydantic import ValidationError
    from tqdm import tqdm

    from ..config import get_settings
    from ..contract.runup import RunUpRecordIn
    from ..usecases.errors import InputError
    from ..usecases.measure import Upload
    from ..usecases.runup import demo_recording, demo_request, runup_payload

    bar: Any = None

    def progress(done: float) -> None:
        nonlocal bar
        if bar is None:
            bar = tqdm(total=100, unit="%", desc="map", file=sys.stderr, leave=False)
        bar.n = round(100 * done)
        bar.refresh()

    try:
        if ns.demo:
            base = demo_request().model_dump(mode="json", exclude_none=True)
            req = RunUpRecordIn.model_validate({**base, **build_runup_request(ns)})
            recording, upload = demo_recording(), None
        else:
            if not ns.file:
                print("foldwise run-up: give a FILE, or --demo", file=sys.stderr)
                return 2
            req = RunUpRecordIn.model_validate(build_runup_request(ns))
            recording = None
            upload = Upload(Path(ns.file).read_bytes(), Path(ns.file).name)
        long = upload is not None and len(upload.data) > PROGRESS_BYTES
        show = long and not ns.no_progress and sys.stderr.isatty()
        out = runup_payload(
            req,
            get_settings(),
            upload,
            recording=recording,
            progress=progress if show else None,
        )
    except ValidationError as exc:
        for e in exc.errors(include_url=False):
            loc = ".".join(str(p) for p in e["loc"]) or "request"
            msg = str(e["msg"]).removeprefix("Value error, ")
            print(f"foldwise run-up: {loc}: {msg}", file=sys.stderr)
        return 2
    except InputError as exc:
        remedy = f" {exc.remedy}." if exc.remedy else ""
        where = f"{exc.field}: " if exc.field else ""
        print(f"foldwise run-up: {where}{exc}{remedy}", file=sys.stderr)
        return 2
    except (OSError, ValueError) as exc:  # unreadable file, bad JSON
        print(f"foldwise run-up: {exc}", file=sys.stderr)
        return 2
    finally:
        if bar is not None:
            bar.close()
    if ns.json:
        print(json.dumps(out, ensure_ascii=False))
    else:
        _print(out)
    return 0
