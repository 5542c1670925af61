"""Diagnose answers that a controller relies on: the running speed, the headline, the
``aliased`` flag, the analysed span with the chain's rejection, notes once each."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.demo import demo_diagnose_request, demo_sliced_chain, demo_sources, demo_spectrum
from tests.api.test_diagnose import _capture

FS = 2560.0
NAMEPLATE_RPM = 1480.0
RUNNING_RPM = 1490.0
ORDERS = list(range(1, 16))
TEETH = 23


def _record(tones: list[tuple[float, float]], fs: float) -> np.ndarray:
    """The reference record of tests/api/test_diagnose.py (scipy.signal.butter + freqs,
    sampled at t = k/fs) behind a 4th-order Butterworth at 1 kHz, 8 s long."""
    return _capture(tones, fs=fs, seconds=8.0, analog_order=4, cutoff=1000.0, seed=3)


def _machine_body(stated_rpm: float, **extra: Any) -> dict[str, Any]:
    # The machine runs at RUNNING_RPM: shaft orders 1-15 and a 23-tooth mesh with two
    # harmonics; the 2nd and 3rd mesh harmonics (1142 and 1713 Hz) lie beyond the 1 kHz
    # filter and the 3rd folds from zone 2. Frequencies by hand: k × rpm / 60.
    shaft = RUNNING_RPM / 60.0
    tones = [(k * shaft, 0.05 / k) for k in ORDERS]
    tones += [(h * TEETH * shaft, 0.3 / h) for h in (1, 2, 3)]
    x = _record(tones, FS)
    return {
        "sample_rate_hz": FS,
        "anti_alias": {"family": "butterworth", "order": 4, "cutoff_hz": 1000},
        "time_record": {"samples": x.tolist(), "sample_rate_hz": FS},
        "spectrum_options": {"lines": 3200},
        "sources": [
            {"type": "shaft", "label": "motor shaft", "speed_rpm": stated_rpm,
             "orders": ORDERS},
            {"type": "gear_mesh", "label": "mesh", "speed_rpm": stated_rpm, "teeth": TEETH,
             "harmonics": 3, "sidebands": 0},
        ],
        **extra,
    }  # fmt: skip


def _post(client: TestClient, body: dict[str, Any]) -> dict[str, Any]:
    r = client.post("/api/v1/diagnose", json=body)
    assert r.status_code == 200, r.text
    out: dict[str, Any] = r.json()
    return out


class TestRunningSpeed:
    def test_off_nameplate_speed_is_found_and_used(self, client: TestClient) -> None:
        out = _post(client, _machine_body(NAMEPLATE_RPM))
        speed = out["summary"]["speed"]
        assert speed["estimated"]
        # Reference: (1490 / 1480 − 1) × 100 = 0.6757 % by hand.
        assert speed["offset_pct"] == pytest.approx(0.6757, abs=0.03)
        used = speed["sources"][0]["used_rpm"]
        assert used == pytest.approx(RUNNING_RPM, abs=0.5)
        # Common practice: slip s = (n_sync − n)/n_sync; a 4-pole motor on 50 Hz has
        # n_sync = 1500 rpm, so 1490 rpm is a slip of 0.67 %, a few percent at most.
        assert (1500.0 - used) / 1500.0 == pytest.approx(10.0 / 1500.0, abs=0.0004)
        assert speed["explained_at_used"] > speed["explained_at_given"]
        unexplained = [p for p in out["peaks"] if p["verdict"] == "unexplained"]
        assert len(unexplained) <= 0.1 * len(out["peaks"])

    def test_search_off_reports_most_peaks_unexplained(self, client: TestClient) -> None:
        out = _post(client, _machine_body(NAMEPLATE_RPM, speed_search_pct=0))
        assert out["summary"]["speed"] is None
        n = len(out["peaks"])
        left = sum(p["verdict"] == "unexplained" for p in out["peaks"])
        assert left > n / 2
        assert any("unexplained" in note and "speed" in note for note in out["notes"])
        assert out["summary"]["status"] != "no_aliases"

    def test_stated_speed_right_needs_no_change(self, client: TestClient) -> None:
        out = _post(client, _machine_body(RUNNING_RPM))
        speed = out["summary"]["speed"]
        assert abs(speed["offset_pct"]) < 0.03
        assert speed["explained_at_used"] >= speed["explained_at_given"]

    def test_option_bounds(self, client: TestClient) -> None:
        r = client.post("/api/v1/diagnose", json=_machine_body(NAMEPLATE_RPM, speed_search_pct=50))
        assert r.status_code == 422
        assert "speed_search_pct" in r.text


class TestAliasedAndHeadline:
    def test_aliased_flag_on_every_peak(self, client: TestClient) -> None:
        out = _post(client, _machine_body(NAMEPLATE_RPM))
        assert all(isinstance(p["aliased"], bool) for p in out["peaks"])
        # Reference: 3 × 23 × 1490/60 = 1713.5 Hz folds to 2560 − 1713.5 = 846.5 Hz.
        p = min(out["peaks"], key=lambda p: abs(p["freq_hz"] - 846.5))
        assert abs(p["freq_hz"] - 846.5) < 2.0
        assert p["aliased"] and p["verdict"] == "alias"
        direct = [q for q in out["peaks"] if q["verdict"] == "direct"]
        assert direct and not any(q["aliased"] for q in direct)
        s = out["summary"]
        assert s["status"] == "aliases_found"
        assert s["aliased_count"] == sum(q["aliased"] for q in out["peaks"])
        assert s["headline"].startswith(f"{s['aliased_count']} of {len(out['peaks'])} peaks")

    def test_no_sources_is_not_an_all_clear(self, client: TestClient) -> None:
        body = _machine_body(NAMEPLATE_RPM, blind="off")
        del body["sources"]
        out = _post(client, body)
        s = out["summary"]
        # Without sources only the peaks beyond the span can be called (mirrors); the
        # rest stay unexplained, and the headline counts them instead of an all-clear.
        assert s["status"] in ("aliases_found", "unexplained_peaks")
        assert s["unexplained_count"] == sum(p["verdict"] == "unexplained" for p in out["peaks"])
        assert s["unexplained_count"] >= len(out["peaks"]) // 2 > 0
        assert f"{s['unexplained_count']} of {len(out['peaks'])}" in s["headline"]
        assert "No aliases" not in s["headline"]
        assert "sources" in s["headline"] and "second sample rate" in s["headline"]

    def test_all_real_says_no_aliases(self, client: TestClient) -> None:
        shaft = RUNNING_RPM / 60.0
        x = _record([(k * shaft, 0.05) for k in (1, 2, 3)], FS)
        body = {
            "sample_rate_hz": FS,
            "anti_alias": {"family": "butterworth", "order": 4, "cutoff_hz": 1000},
            "time_record": {"samples": x.tolist(), "sample_rate_hz": FS},
            "spectrum_options": {"lines": 3200},
            "sources": [{"type": "shaft", "label": "motor shaft", "speed_rpm": RUNNING_RPM,
                         "orders": [1, 2, 3]}],
        }  # fmt: skip
        out = _post(client, body)
        # Orders 2 and 3 may be called harmonics of the shaft's family: real lines too.
        assert len(out["peaks"]) == 3
        assert all(p["verdict"] in ("direct", "family") for p in out["peaks"])
        assert not any(p["aliased"] for p in out["peaks"])
        assert out["summary"]["status"] == "no_aliases"
        assert out["summary"]["headline"].startswith("No aliases")

    def test_cli_json_and_saved_carry_the_flag(self, client: TestClient) -> None:
        r = client.post("/api/v1/diagnose?save=true", json=demo_diagnose_request())
        assert r.status_code == 200, r.text
        link = r.json()["saved"]
        saved = client.get(link["api_url"]).json()
        peaks = saved["result"]["peaks"]
        assert peaks and all("aliased" in p for p in peaks)


class TestSpanAndNotes:
    def test_span_and_the_chains_rejection(self, client: TestClient) -> None:
        out = _post(client, _machine_body(NAMEPLATE_RPM))
        # Common practice: analysed span = fs / 2.56.
        assert out["span_hz"] == pytest.approx(FS / 2.56)
        assert "protected_edge_hz" not in out
        # Reference: Butterworth |H|² = 1/(1 + (f/fc)^(2N)), N = 4, fc = 1 kHz.
        for key, f in (("rejection_at_span_edge_db", FS / 2.56),
                       ("rejection_at_fold_of_span_edge_db", FS - FS / 2.56)):  # fmt: skip
            want = 10 * np.log10(1 + (f / 1000.0) ** 8)
            assert out[key] == pytest.approx(want, abs=0.01)

    def test_notes_once_each(self, client: TestClient) -> None:
        f, a, _rate = demo_spectrum(sliced=True)
        body = {
            "chain": demo_sliced_chain(),
            "spectrum": {"freq_hz": f.tolist(), "amplitude": a.tolist(), "unit": "linear"},
            "sources": demo_sources(),
        }
        out = _post(client, body)
        assert out["notes"], "the sliced chain has a note"
        assert len(out["notes"]) == len(set(out["notes"]))
