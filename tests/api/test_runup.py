"""POST /api/v1/run-up through the real app: JSON and multipart, bad inputs, bounds, saving."""

from __future__ import annotations

import io
import json
import wave

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.contract.runup import RunUpRecordOut
from service.core.runup_sim import SimLine, simulate_run_up
from tests.api.test_response_schemas import fits

PROBLEM = "application/problem+json"
FS = 12_800.0
DEMO_CHAIN = {
    "sample_rate_hz": FS,
    "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0},
}
DEMO_SOURCES = {
    "nominal_rpm": 6000.0,
    "sources": [
        {"type": "gear_mesh", "label": "mesh", "speed_rpm": 6000.0, "teeth": 17,
         "harmonics": 4, "sidebands": 0},
        {"type": "shaft", "label": "shaft", "speed_rpm": 6000.0, "orders": [1, 2]},
    ],
    "tones": [{"label": "inverter carrier", "freq_hz": 10_000.0}],
}  # fmt: skip


def _round(x: np.ndarray) -> list[float]:
    return np.round(x, 4).tolist()


@pytest.fixture(scope="module")
def demo() -> object:
    # The invented e-drive run-up (0-12,000 rpm, weak 2nd-order filter at 5 kHz), 5 s.
    return simulate_run_up(duration_s=5.0, seed=7)


def _body(rec: object, **extra: object) -> dict[str, object]:
    return {
        **DEMO_CHAIN,
        "vibration": _round(rec.vibration),  # type: ignore[attr-defined]
        "tacho": _round(rec.tacho),  # type: ignore[attr-defined]
        **extra,
    }


def _wav(channels: list[np.ndarray], fs: int) -> bytes:
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(len(channels))
        w.setsampwidth(2)
        w.setframerate(fs)
        frames = np.stack([np.clip(c, -1, 1) for c in channels], axis=1)
        w.writeframes((frames * 32767).astype("<i2").tobytes())
    return buf.getvalue()


def _by_label(out: dict[str, object]) -> dict[str, dict[str, object]]:
    return {ln["label"]: ln for ln in out["lines"]}  # type: ignore[index,union-attr]


def _crossing_rpm(order: float, nyquist_hz: float) -> float:
    # Fold formula by hand: order k reaches fs/2 at k·rpm/60 = fs/2.
    return nyquist_hz * 60.0 / order


class TestJson:
    def test_demo_with_sources(self, client: TestClient, demo: object) -> None:
        r = client.post("/api/v1/run-up", json=_body(demo, **DEMO_SOURCES))
        assert r.status_code == 200, r.text
        out = r.json()
        lines = _by_label(out)
        # Mesh 1× (order 17) reaches only 3,400 Hz at 12,000 rpm: never folded.
        assert lines["mesh: GMF 1×"]["kind"] == "order"
        assert not lines["mesh: GMF 1×"]["aliased"]
        # Mesh 2×, 3×, 4× fold at fs/2 = 6,400 Hz; each enters zone 2 (inverted) at
        # the speed where k·rpm/60 = 6,400 Hz.
        for k, name in ((34, "mesh: GMF 2×"), (51, "mesh: GMF 3×"), (68, "mesh: GMF 4×")):
            ln = lines[name]
            assert ln["kind"] == "folded_order"
            z2 = next(z for z in ln["zones"] if z["zone"] == 2)
            assert z2["inverted"] is True
            # Zone 2 lies between the fs/2 and fs crossings (the ridge may start later
            # where the sweep smears it, never earlier).
            assert z2["rpm_from"] >= 0.98 * _crossing_rpm(k, 6400.0)
            assert z2["rpm_to"] <= 1.02 * _crossing_rpm(k, 12_800.0)
        # The 10 kHz carrier at 12.8 kS/s: |10,000 - 12,800| = 2,800 Hz (by hand), zone 2.
        carrier = lines["tones: inverter carrier"]
        assert carrier["kind"] == "fixed_alias"
        assert carrier["apparent_hz_range"][0] == pytest.approx(2800.0, abs=15.0)
        assert carrier["zones"][0] == {**carrier["zones"][0], "zone": 2, "inverted": True}
        # Real orders are never called folded.
        assert lines["shaft: 1×"]["kind"] == "order"
        assert out["speed"]["source"] == "tacho"
        assert out["speed"]["rpm_max"] == pytest.approx(12_000.0, rel=0.01)
        assert out["caution"].startswith("An alias verdict is a hypothesis")
        assert fits(RunUpRecordOut, r.text) == []  # the answer is what the schema publishes

    def test_predicted_lines_and_order_spectrum(self, client: TestClient, demo: object) -> None:
        out = client.post("/api/v1/run-up", json=_body(demo, **DEMO_SOURCES)).json()
        pred = {p["label"]: p for p in out["predicted"]}
        p3 = pred["mesh: GMF 3×"]
        rpm = np.array(p3["rpm"])
        # Reference: sample a sine at the true frequency with numpy and find the FFT peak.
        i = int(np.argmin(np.abs(rpm - 10_000.0)))
        f_true = 51 * rpm[i] / 60.0
        n = 1 << 14
        x = np.cos(2 * np.pi * f_true * np.arange(n) / FS)
        spec = np.abs(np.fft.rfft(x * np.hanning(n)))
        f_peak = np.argmax(spec) * FS / n
        assert p3["apparent_hz"][i] == pytest.approx(f_peak, abs=FS / n)
        assert p3["aliased"] is True and pred["mesh: GMF 1×"]["aliased"] is False
        # In the order spectrum a folded order sits at fold(k·r)/r, below k.
        lo, hi = p3["apparent_order_range"]
        assert hi <= 51.0 + 1e-9 and lo < 51.0
        disp = out["display"]["order_spectrum"]
        assert len(disp["order"]) == len(disp["level_db"]) > 100

    def test_speed_trace(self, client: TestClient, demo: object) -> None:
        body = _body(demo)
        del body["tacho"]
        body["speed_trace"] = {"time_s": [0.0, 5.0], "rpm": [0.0, 12_000.0]}
        r = client.post("/api/v1/run-up", json=body)
        assert r.status_code == 200, r.text
        assert r.json()["speed"]["source"] == "trace"


class TestMultipart:
    def test_two_channel_wav(self, client: TestClient, demo: object) -> None:
        vib = demo.vibration / 4.0  # type: ignore[attr-defined]
        tach = demo.tacho / 8.0  # type: ignore[attr-defined]
        data = _wav([tach, vib], int(FS))
        req = {**DEMO_CHAIN, "upload": {"vibration_channel": 1, "tacho_channel": 0}}
        r = client.post(
            "/api/v1/run-up",
            files={"file": ("runup.wav", data)},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200, r.text
        kinds = [ln["kind"] for ln in r.json()["lines"]]
        assert "folded_order" in kinds and "fixed" in kinds  # no sources: carrier unnamed

    def test_csv_named_columns(self, client: TestClient) -> None:
        rec = simulate_run_up(
            [SimLine("order 20", 20.0, 0.0, 1.0)],
            duration_s=8.0,
            rate_hz=2560.0,
            rpm_end=6000.0,
            analog=None,
        )
        t = np.arange(rec.vibration.size) / rec.rate_hz
        text = "time (s),accel,tacho\n" + "\n".join(
            f"{a:.7f},{b:.5f},{c:.3f}" for a, b, c in zip(t, rec.vibration, rec.tacho, strict=True)
        )
        req = {"upload": {"vibration_channel": "accel", "tacho_channel": "tacho"}, "nperseg": 256}
        r = client.post(
            "/api/v1/run-up",
            files={"file": ("runup.csv", text.encode())},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200, r.text
        out = r.json()
        # Order 20 passes fs/2 = 1,280 Hz at 1,280·60/20 = 3,840 rpm (by hand).
        assert "time" not in out["input"].split(";")[1]  # the time column is no channel
        folded = [ln for ln in out["lines"] if ln["kind"] == "folded_order"]
        assert folded and folded[0]["order"] == pytest.approx(20.0, abs=0.05)
        z2 = next(z for z in folded[0]["zones"] if z["zone"] == 2)
        assert z2["rpm_from"] == pytest.approx(_crossing_rpm(20, 1280.0), rel=0.02)


def _problem(r: object) -> dict[str, object]:
    assert r.status_code in (400, 413, 415, 422), r.text  # type: ignore[attr-defined]
    assert r.headers["content-type"].startswith(PROBLEM)  # type: ignore[attr-defined]
    return r.json()  # type: ignore[attr-defined,no-any-return]


class TestBadInput:
    def test_no_speed(self, client: TestClient, demo: object) -> None:
        body = _body(demo)
        del body["tacho"]
        p = _problem(client.post("/api/v1/run-up", json=body))
        assert p["errors"][0]["field"] == "tacho"
        assert "speed_trace" in p["detail"] and "no speed information" in p["detail"]

    def test_tacho_without_pulses(self, client: TestClient, demo: object) -> None:
        flat = np.full(demo.vibration.size, 0.01)  # type: ignore[attr-defined]
        p = _problem(client.post("/api/v1/run-up", json=_body(demo, tacho=_round(flat))))
        assert p["errors"][0]["field"] == "tacho"
        assert "Check the tacho" in p["detail"]

    def test_speed_never_changes(self, client: TestClient, demo: object) -> None:
        body = _body(demo)
        del body["tacho"]
        body["speed_trace"] = {"time_s": [0.0, 5.0], "rpm": [3000.0, 3000.0]}
        p = _problem(client.post("/api/v1/run-up", json=body))
        assert p["errors"][0]["field"].startswith("speed_trace")
        assert "sweep" in p["detail"]

    def test_too_short_for_resolution(self, client: TestClient, demo: object) -> None:
        p = _problem(client.post("/api/v1/run-up", json=_body(demo, nperseg=65_536)))
        assert p["errors"][0]["field"] == "vibration"
        assert "coarser resolution" in p["detail"]

    def test_bin_width_out_of_range(self, client: TestClient, demo: object) -> None:
        p = _problem(client.post("/api/v1/run-up", json=_body(demo, bin_width_hz=0.01)))
        assert p["errors"][0]["field"] == "bin_width_hz"
        assert "Choose a bin width" in p["detail"]

    def test_channels_swapped(self, client: TestClient, demo: object) -> None:
        data = _wav([demo.tacho / 8.0, demo.vibration / 4.0], int(FS))  # type: ignore[attr-defined]
        req = {**DEMO_CHAIN, "upload": {"vibration_channel": 0, "tacho_channel": 1}}
        r = client.post(
            "/api/v1/run-up", files={"file": ("r.wav", data)}, data={"request": json.dumps(req)}
        )
        p = _problem(r)
        assert p["errors"][0]["field"].startswith("upload.")
        assert "swapped" in p["detail"]

    def test_unknown_channel_name(self, client: TestClient, demo: object) -> None:
        data = _wav([demo.tacho / 8.0, demo.vibration / 4.0], int(FS))  # type: ignore[attr-defined]
        req = {"upload": {"vibration_channel": "accel", "tacho_channel": 0}}
        r = client.post(
            "/api/v1/run-up", files={"file": ("r.wav", data)}, data={"request": json.dumps(req)}
        )
        p = _problem(r)
        assert p["errors"][0]["field"] == "upload.vibration_channel"

    def test_sources_without_nominal_rpm(self, client: TestClient, demo: object) -> None:
        extra = {k: v for k, v in DEMO_SOURCES.items() if k != "nominal_rpm"}
        p = _problem(client.post("/api/v1/run-up", json=_body(demo, **extra)))
        assert p["errors"][0]["field"] == "nominal_rpm"

    def test_rate_missing(self, client: TestClient, demo: object) -> None:
        body = _body(demo)
        del body["sample_rate_hz"], body["anti_alias"]
        p = _problem(client.post("/api/v1/run-up", json=body))
        assert p["errors"][0]["field"] == "sample_rate_hz"


class TestBounds:
    def test_long_record_payload(self, client: TestClient) -> None:
        # 120 s of the demo run-up, two float32 channels as .npy (C, N): the display payload
        # is bounded by the map's 200 × 600 cells and ~200 points per line, not by length.
        rec = simulate_run_up(duration_s=120.0, seed=2)
        arr = np.stack([rec.vibration, rec.tacho]).astype(np.float32)
        buf = io.BytesIO()
        np.save(buf, arr)
        req = {**DEMO_CHAIN, "upload": {"vibration_channel": 0, "tacho_channel": 1,
                                        "sample_rate_hz": FS}}  # fmt: skip
        r = client.post(
            "/api/v1/run-up",
            files={"file": ("long.npy", buf.getvalue())},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200, r.text
        assert len(r.content) <= 1.5e6
        disp = r.json()["display"]
        assert len(disp["map"]["rpm"]) <= 200 and len(disp["map"]["freq_hz"]) <= 600
        assert all(len(ln["rpm"]) <= 200 for ln in disp["lines"])


class TestSave:
    def test_save_and_read_back(self, client: TestClient, demo: object) -> None:
        r = client.post("/api/v1/run-up?save=true&title=bench", json=_body(demo, **DEMO_SOURCES))
        assert r.status_code == 200, r.text
        link = r.json()["saved"]
        got = client.get(link["api_url"]).json()
        assert got["kind"] == "run-up"
        assert "vibration" not in got["request"]  # the record is not kept, its display is
        assert got["result"]["display"]["map"] == r.json()["display"]["map"]
        page = client.get(link["url"])
        assert page.status_code == 200
        assert "runup-map" in page.text
