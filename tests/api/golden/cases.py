"""The golden requests: ~40 varied calls through the real app, errors included.

``run_cases`` posts them in order (saved results are created, read and deleted) and
returns each answer as ``{status, content_type, location, body}`` with ids, tokens and
timestamps replaced by placeholders, so the same code gives the same bytes every run.
``record.py`` stores them; ``test_golden.py`` replays them against the current code.
"""

from __future__ import annotations

import io
import json
import re
import wave
from pathlib import Path
from typing import Any

import numpy as np
from fastapi.testclient import TestClient

from service.demo import (
    demo_anti_alias,
    demo_diagnose_request,
    demo_fold_request,
    demo_sliced_chain,
    demo_spectrum,
    demo_time_record,
)

ANSWERS = Path(__file__).with_name("answers")
_TIMESTAMP = re.compile(r'"created_at":"[^"]*"')


def _spectrum(lines: int = 400, sliced: bool = False) -> dict[str, Any]:
    f, a, _ = demo_spectrum(lines=lines, sliced=sliced)
    return {
        "freq_hz": [round(float(v), 3) for v in f],
        "amplitude": [float(f"{v:.4g}") for v in a],
        "unit": "linear",
    }


def _spectrum_text(lines: int = 400) -> bytes:
    s = _spectrum(lines)
    rows = [f"{f},{a}" for f, a in zip(s["freq_hz"], s["amplitude"], strict=True)]
    return ("freq_hz,amplitude\n" + "\n".join(rows) + "\n").encode()


def _wav(seconds: float = 0.5) -> bytes:
    x, rate = demo_time_record(seconds=seconds)
    pcm = np.clip(x / (np.max(np.abs(x)) * 1.1), -1, 1)
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(int(rate))
        w.writeframes((pcm * 32767).astype("<i2").tobytes())
    return buf.getvalue()


def _npy(seconds: float = 0.5) -> bytes:
    x, _ = demo_time_record(seconds=seconds, sliced=True)
    buf = io.BytesIO()
    np.save(buf, x.astype(np.float32))
    return buf.getvalue()


class _Recorder:
    def __init__(self, client: TestClient) -> None:
        self.client = client
        self.answers: dict[str, dict[str, Any]] = {}
        self.ids: dict[str, str] = {}

    def _normalise(self, text: str) -> str:
        for secret, name in self.ids.items():
            text = text.replace(secret, name)
        return _TIMESTAMP.sub('"created_at":"<timestamp>"', text)

    def remember(self, resp: Any) -> dict[str, Any]:
        data = resp.json()
        n = len(self.ids) // 2
        self.ids[data["id"]] = f"<id{n}>"
        self.ids[data["delete_token"]] = f"<token{n}>"
        return dict(data)

    def call(self, name: str, method: str, url: str, **kw: Any) -> Any:
        resp = self.client.request(method, url, **kw)
        text = resp.content.decode()
        ctype = resp.headers.get("content-type", "")
        if ctype.startswith(("application/json", "application/problem+json")) and text:
            # The body itself is compared byte for byte; ids are only known after the
            # answer that creates them, so placeholders are applied after parsing it.
            data = json.loads(text)
            if isinstance(data, dict) and "delete_token" in data:
                self.remember(resp)
            if isinstance(data, dict) and isinstance(data.get("saved"), dict):
                saved = data["saved"]
                n = len(self.ids) // 2
                self.ids[saved["id"]] = f"<id{n}>"
                self.ids[saved["delete_token"]] = f"<token{n}>"
        loc = resp.headers.get("location")
        self.answers[name] = {
            "request": f"{method} {self._normalise(url)}",
            "status": resp.status_code,
            "content_type": ctype,
            "location": self._normalise(loc) if loc else None,
            "body": self._normalise(text),
        }
        return resp


def run_cases(client: TestClient) -> dict[str, dict[str, Any]]:
    r = _Recorder(client)
    c = r.call
    fold = demo_fold_request()

    # fold
    c("fold_demo", "POST", "/api/v1/fold", json=fold)
    c(
        "fold_carrier",
        "POST",
        "/api/v1/fold",
        json={
            "sample_rate_hz": 12_800.0,
            "anti_alias": demo_anti_alias(),
            "tones": [{"label": "inverter carrier", "freq_hz": 10_000.0, "amplitude": 0.5}],
        },
    )
    c(
        "fold_sliced_chain",
        "POST",
        "/api/v1/fold",
        json={
            "chain": demo_sliced_chain(),
            "tones": [{"label": "first mesh", "freq_hz": 2550.0, "amplitude": 0.8}],
        },
    )
    c(
        "fold_full_chain",
        "POST",
        "/api/v1/fold",
        json={
            "chain": [
                {"stage": "sensor", "natural_hz": 25_000.0, "q": 20},
                {
                    "stage": "analog_lowpass",
                    "family": "chebyshev1",
                    "order": 4,
                    "cutoff_hz": 8000.0,
                    "ripple_db": 0.5,
                },
                {"stage": "sample", "rate_hz": 51_200.0},
                {
                    "stage": "digital_lowpass",
                    "passband_hz": 9000.0,
                    "stopband_hz": 12_000.0,
                    "atten_db": 80,
                },
                {"stage": "decimate", "factor": 2, "filter": "fir"},
            ],
            "tones": [
                {"label": "a", "freq_hz": 7300.0, "amplitude": 1.0},
                {"label": "b", "freq_hz": 13_200.0, "amplitude": 1.0},
                {"label": "c", "freq_hz": 30_000.0},
            ],
            "band_hz": [0.0, 10_000.0],
            "lines": 3200,
        },
    )
    c(
        "fold_design_notes_values",
        "POST",
        "/api/v1/fold",
        json={
            "sample_rate_hz": 10_000.0,
            "tones": [{"label": "x", "freq_hz": 7300.0}, {"label": "y", "freq_hz": 13_200.0}],
        },
    )
    c(
        "fold_422_negative_rate",
        "POST",
        "/api/v1/fold",
        json={"sample_rate_hz": -5, "tones": [{"label": "a", "freq_hz": 1}]},
    )
    c("fold_422_no_rate", "POST", "/api/v1/fold", json={"tones": [{"label": "a", "freq_hz": 1}]})
    c(
        "fold_422_extra_field",
        "POST",
        "/api/v1/fold",
        json={"sample_rate_hz": 100, "tones": [{"label": "a", "freq_hz": 1}], "colour": "red"},
    )
    c("fold_422_no_tones", "POST", "/api/v1/fold", json={"sample_rate_hz": 100})
    c(
        "fold_422_bad_filter",
        "POST",
        "/api/v1/fold",
        json={
            "sample_rate_hz": 100,
            "anti_alias": {"family": "cheby1", "order": 4},
            "tones": [{"label": "a", "freq_hz": 1}],
        },
    )
    c(
        "fold_422_core_filter",
        "POST",
        "/api/v1/fold",
        json={
            "sample_rate_hz": 100,
            "anti_alias": {"family": "chebyshev1", "order": 4},
            "tones": [{"label": "a", "freq_hz": 1}],
        },
    )
    c(
        "fold_422_core_decimate",
        "POST",
        "/api/v1/fold",
        json={
            "chain": [{"stage": "sample", "rate_hz": 100}, {"stage": "decimate", "factor": 4096}],
            "tones": [{"label": "a", "freq_hz": 1}],
        },
    )
    c(
        "fold_422_core_source",
        "POST",
        "/api/v1/fold",
        json={
            "sample_rate_hz": 12800,
            "sources": [
                {"type": "shaft", "label": "motor", "speed_rpm": 1500},
                {"type": "shaft", "label": "output", "speed_rpm": 500, "orders": [1, 2, 1]},
            ],
        },
    )
    c(
        "fold_400_unreadable",
        "POST",
        "/api/v1/fold",
        content=b"{not json",
        headers={"content-type": "application/json"},
    )
    c(
        "fold_413_large",
        "POST",
        "/api/v1/fold",
        content=b"[" + b"0," * 150_000 + b"0]",
        headers={"content-type": "application/json"},
    )

    # diagnose
    diag = {**demo_diagnose_request(lines=400), "spectrum": _spectrum()}
    c("diagnose_sources", "POST", "/api/v1/diagnose", json=diag)
    c(
        "diagnose_blind",
        "POST",
        "/api/v1/diagnose",
        json={"sample_rate_hz": 12_800.0, "anti_alias": demo_anti_alias(), "spectrum": _spectrum()},
    )
    x, rate = demo_time_record(seconds=0.3)
    c(
        "diagnose_time_record",
        "POST",
        "/api/v1/diagnose",
        json={
            "sample_rate_hz": rate,
            "time_record": {"samples": [round(float(v), 6) for v in x]},
            "spectrum_options": {"lines": 800},
            "tones": [{"label": "carrier", "freq_hz": 10_000.0, "amplitude": 0.5}],
        },
    )
    c(
        "diagnose_upload_text",
        "POST",
        "/api/v1/diagnose",
        files={"file": ("spectrum.csv", _spectrum_text(), "text/csv")},
        data={"request": json.dumps({"sample_rate_hz": 12_800.0})},
    )
    c(
        "diagnose_upload_wav",
        "POST",
        "/api/v1/diagnose",
        files={"file": ("bench.wav", _wav(), "audio/wav")},
        data={
            "request": json.dumps({"sources": diag["sources"], "spectrum_options": {"lines": 800}})
        },
    )
    c(
        "diagnose_400_unreadable_file",
        "POST",
        "/api/v1/diagnose",
        files={"file": ("bench.wav", b"RIFF garbage, not a wave file", "audio/wav")},
        data={"request": json.dumps({"sample_rate_hz": 12_800.0})},
    )
    c(
        "diagnose_422_no_file",
        "POST",
        "/api/v1/diagnose",
        files={"other": ("x.csv", b"1,2\n", "text/csv")},
    )
    c(
        "diagnose_422_lengths",
        "POST",
        "/api/v1/diagnose",
        json={
            "sample_rate_hz": 12_800.0,
            "spectrum": {"freq_hz": list(range(20)), "amplitude": [1.0] * 19},
        },
    )
    c("diagnose_422_nothing", "POST", "/api/v1/diagnose", json={"sample_rate_hz": 12_800.0})
    c(
        "diagnose_422_both",
        "POST",
        "/api/v1/diagnose",
        json={
            "sample_rate_hz": 12_800.0,
            "spectrum": _spectrum(),
            "time_record": {"samples": [0.0] * 64},
        },
    )
    c("diagnose_save", "POST", "/api/v1/diagnose?save=true&title=bench", json=diag)

    # compare
    cmp = {
        "a": {"sample_rate_hz": 12_800.0, "spectrum": _spectrum()},
        "b": {"sample_rate_hz": 6_400.0, "spectrum": _spectrum(sliced=True)},
    }
    c("compare_json", "POST", "/api/v1/compare-rates", json=cmp)
    c(
        "compare_upload",
        "POST",
        "/api/v1/compare-rates",
        files={"file_a": ("a.wav", _wav(), "audio/wav"), "file_b": ("b.npy", _npy(), "x/npy")},
        data={"request": json.dumps({"a": {}, "b": {"upload": {"sample_rate_hz": 6400.0}}})},
    )
    c(
        "compare_422_same_rate",
        "POST",
        "/api/v1/compare-rates",
        json={"a": cmp["a"], "b": {**cmp["b"], "sample_rate_hz": 12_800.0}},
    )
    c("compare_422_missing_b", "POST", "/api/v1/compare-rates", json={"a": cmp["a"]})
    c("compare_save", "POST", "/api/v1/compare-rates?save=true", json=cmp)
    c(
        "compare_captures",
        "POST",
        "/api/v1/compare-rates",
        json={"captures": [cmp["a"], cmp["b"]], "max_true_hz": 12_800.0},
    )
    c(
        "compare_422_seven",
        "POST",
        "/api/v1/compare-rates",
        json={"captures": [cmp["a"]] * 7},
    )

    # plan
    from service.api.examples import PLAN_EXAMPLES

    for name, ex in PLAN_EXAMPLES.items():
        c(f"plan_{name}", "POST", "/api/v1/plan", json=ex["value"])
    c(
        "plan_422_impossible",
        "POST",
        "/api/v1/plan",
        json={
            "band_hz": [0.0, 2000.0],
            "rates_hz": [4096.0],
            "rejection_db": 120.0,
            "tones": [
                {"label": "carrier", "freq_hz": 5000.0, "amplitude": 1.0},
                {"label": "mesh", "freq_hz": 1700.0, "amplitude": 1.0},
            ],
        },
    )
    c(
        "plan_422_band",
        "POST",
        "/api/v1/plan",
        json={"band_hz": [5000.0, 5000.0], "tones": [{"label": "a", "freq_hz": 100.0}]},
    )

    # saved results
    made = c(
        "save_fold",
        "POST",
        "/api/v1/diagnoses",
        json={"kind": "fold", "request": fold, "title": "bench"},
    ).json()
    c("read_fold", "GET", made["api_url"])
    c("read_fold_no_spectrum", "GET", made["api_url"] + "?spectrum=false")
    c("delete_wrong_token", "DELETE", made["api_url"], headers={"X-Delete-Token": "nope"})
    c("delete_no_token", "DELETE", made["api_url"])
    c("delete_ok", "DELETE", made["api_url"], headers={"X-Delete-Token": made["delete_token"]})
    c("read_deleted_404", "GET", made["api_url"])
    c("delete_deleted_404", "DELETE", made["api_url"], headers={"X-Delete-Token": "x"})
    made = c(
        "save_diagnose", "POST", "/api/v1/diagnoses", json={"kind": "diagnose", "request": diag}
    ).json()
    c("read_diagnose", "GET", made["api_url"])
    made = c(
        "save_plan",
        "POST",
        "/api/v1/diagnoses",
        json={"kind": "plan", "request": PLAN_EXAMPLES["carrier_only"]["value"]},
    ).json()
    c("read_plan", "GET", made["api_url"])
    c("save_compare", "POST", "/api/v1/diagnoses", json={"kind": "compare", "request": cmp})
    c("save_422_kind", "POST", "/api/v1/diagnoses", json={"kind": "runup", "request": {}})
    c(
        "save_422_inner",
        "POST",
        "/api/v1/diagnoses",
        json={"kind": "fold", "request": {"sample_rate_hz": 0}},
    )
    c("read_unknown_404", "GET", "/api/v1/diagnoses/doesnotexist")

    # health
    c("healthz", "GET", "/healthz")
    c("readyz", "GET", "/readyz")
    return r.answers
