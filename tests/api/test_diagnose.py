"""POST /api/v1/diagnose through the real app (compare-rates: test_compare.py)."""

from __future__ import annotations

import io
import json
import wave
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy import signal

PROBLEM = "application/problem+json"
FS = 12_800.0


def _capture(
    tones: list[tuple[float, float]],
    fs: float = FS,
    seconds: float = 4.0,
    analog_order: int = 2,
    cutoff: float = 5000.0,
    seed: int = 0,
) -> np.ndarray:
    """Reference capture from first principles: each tone weighted by the analog
    Butterworth's exact response (scipy.signal.butter + freqs) and sampled at t = k/fs."""
    b, a = signal.butter(analog_order, 2 * np.pi * cutoff, analog=True)
    freqs = np.array([f for f, _ in tones])
    _, h = signal.freqs(b, a, worN=2 * np.pi * freqs)
    t = np.arange(int(seconds * fs)) / fs
    x = np.zeros(t.size)
    for (f, amp), g in zip(tones, h, strict=True):
        x += amp * abs(g) * np.cos(2 * np.pi * f * t + np.angle(g))
    return x + np.random.default_rng(seed).normal(0, 1e-4, t.size)


def _welch_spectrum(x: np.ndarray, fs: float, nperseg: int = 4096) -> tuple[np.ndarray, np.ndarray]:
    """Reference spectrum: scipy.signal.welch (Hann), converted to peak amplitude."""
    f, p = signal.welch(x, fs, window="hann", nperseg=nperseg, scaling="spectrum")
    return f, np.sqrt(2 * p)


CHAIN = {
    "sample_rate_hz": FS,
    "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000},
}
SOURCES = [
    {
        "type": "pwm",
        "label": "inverter",
        "carrier_hz": 10_000,
        "fundamental_hz": 600,
        "carrier_multiples": 1,
        "sidebands": 2,
        "amplitude": 0.5,
    },
    {
        "type": "gear_mesh",
        "label": "first mesh",
        "speed_hz": 150,
        "teeth": 17,
        "harmonics": 1,
        "sidebands": 0,
        "amplitude": 0.8,
    },
]
TONES = [(10_000.0, 0.5), (2550.0, 0.8), (8800.0, 0.1), (11_200.0, 0.1)]


def _spectrum_body(**extra: Any) -> dict[str, Any]:
    f, a = _welch_spectrum(_capture(TONES), FS)
    return {
        **CHAIN,
        "spectrum": {"freq_hz": f.tolist(), "amplitude": a.tolist()},
        "sources": SOURCES,
        **extra,
    }


def _peak(out: dict[str, Any], hz: float, tol: float = 10.0) -> dict[str, Any]:
    near = [p for p in out["peaks"] if abs(p["freq_hz"] - hz) < tol]
    assert near, f"no peak near {hz} Hz in {[round(p['freq_hz']) for p in out['peaks']]}"
    return near[0]


class TestDiagnoseJson:
    def test_basic(self, client: TestClient) -> None:
        r = client.post("/api/v1/diagnose", json=_spectrum_body())
        assert r.status_code == 200, r.text
        out = r.json()
        # Reference: fold(10 kHz, 12.8 kS/s) = 2.8 kHz in zone 2 (|10000 − 12800|).
        carrier = _peak(out, 2800.0)
        assert carrier["verdict"] == "alias" and carrier["source"] == "inverter"
        assert carrier["true_hz"] == pytest.approx(10_000.0)
        assert carrier["zone"] == 2 and carrier["inverted"] is True
        assert 0 < carrier["confidence"] <= 1 and "10" in carrier["explanation"]
        # Reference: 8.8 kHz folds to 4.0 kHz, 11.2 kHz to 1.6 kHz (numpy fold formula).
        assert _peak(out, 4000.0)["true_hz"] == pytest.approx(8800.0)
        assert _peak(out, 1600.0)["true_hz"] == pytest.approx(11_200.0)
        mesh = _peak(out, 2550.0)
        assert mesh["verdict"] == "direct" and mesh["source"] == "first mesh"
        for key in (
            "freq_hz",
            "amplitude",
            "floor",
            "verdict",
            "confidence",
            "source",
            "true_hz",
            "zone",
            "explanation",
            "alternatives",
        ):
            assert key in carrier
        s = out["summary"]
        assert s["bin_width_hz"] == pytest.approx(FS / 4096)
        assert s["unit"] == "linear" and "window" in s
        assert out["caution"].startswith("An alias verdict is a hypothesis")

    def test_db_input_detected(self, client: TestClient) -> None:
        body = _spectrum_body()
        amp = np.asarray(body["spectrum"]["amplitude"])
        body["spectrum"]["amplitude"] = (20 * np.log10(amp)).tolist()
        out = client.post("/api/v1/diagnose", json=body).json()
        assert out["summary"]["unit"] == "db" and "negative" in out["summary"]["unit_reason"]
        assert _peak(out, 2800.0)["verdict"] == "alias"

    def test_time_record(self, client: TestClient) -> None:
        x = _capture(TONES, seconds=2.0)
        body = {
            **CHAIN,
            "time_record": {"samples": x.tolist()},
            "sources": SOURCES,
            "spectrum_options": {"lines": 1600, "window": "hann"},
        }
        out = client.post("/api/v1/diagnose", json=body).json()
        assert out["summary"]["lines"] == 1600
        # Reference: the analog filter's response via scipy.signal.freqs at 10 kHz,
        # applied to 0.5: the peak level seen must agree within 0.5 dB.
        b, a = signal.butter(2, 2 * np.pi * 5000, analog=True)
        _, h = signal.freqs(b, a, worN=[2 * np.pi * 10_000])
        carrier = _peak(out, 2800.0, tol=5)
        assert 20 * np.log10(carrier["amplitude"]) == pytest.approx(
            20 * np.log10(0.5 * abs(h[0])), abs=0.5
        )

    def test_blind_mode(self, client: TestClient) -> None:
        # A family at 1.1 kHz with 12 harmonics, half above Nyquist, no sources given.
        tones = [(1100.0 * k, 0.2) for k in range(1, 13)]
        x = _capture(tones, cutoff=40_000.0, analog_order=1)
        f, a = _welch_spectrum(x, FS)
        body = {"sample_rate_hz": FS, "spectrum": {"freq_hz": f.tolist(), "amplitude": a.tolist()}}
        out = client.post("/api/v1/diagnose", json=body).json()
        assert out["families"], out["notes"]
        fam = out["families"][0]
        assert fam["fundamental_hz"] == pytest.approx(1100.0, abs=2.0)
        # Reference: 7.7 kHz (7×) folds to |7700 − 12800| = 5.1 kHz.
        p = _peak(out, 5100.0)
        assert p["verdict"] == "alias" and p["true_hz"] == pytest.approx(7700.0, abs=20)


def _csv(f: np.ndarray, a: np.ndarray) -> bytes:
    return (
        "freq_hz,amplitude\n" + "\n".join(f"{x},{y}" for x, y in zip(f, a, strict=True))
    ).encode()


def _wav(x: np.ndarray, fs: int) -> bytes:
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(fs)
        w.writeframes((np.clip(x, -1, 1) * 32767).astype("<i2").tobytes())
    return buf.getvalue()


class TestDiagnoseUpload:
    def test_csv_spectrum(self, client: TestClient) -> None:
        f, a = _welch_spectrum(_capture(TONES), FS)
        req = {**CHAIN, "sources": SOURCES}
        r = client.post(
            "/api/v1/diagnose",
            files={"file": ("spec.csv", _csv(f, a))},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200, r.text
        assert _peak(r.json(), 2800.0)["verdict"] == "alias"

    def test_wav_record(self, client: TestClient) -> None:
        x = _capture(TONES, seconds=2.0) * 0.5
        r = client.post(
            "/api/v1/diagnose",
            files={"file": ("rec.wav", _wav(x, int(FS)))},
            data={"request": json.dumps({"anti_alias": CHAIN["anti_alias"], "sources": SOURCES})},
        )
        assert r.status_code == 200, r.text
        out = r.json()
        assert "WAV" in out["summary"]["input"]
        assert _peak(out, 2800.0)["source"] == "inverter"

    def test_npy_record(self, client: TestClient) -> None:
        buf = io.BytesIO()
        np.save(buf, _capture(TONES, seconds=1.0).astype(np.float32))
        req = {**CHAIN, "upload": {"sample_rate_hz": FS}}
        r = client.post(
            "/api/v1/diagnose",
            files={"file": ("rec.npy", buf.getvalue())},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200, r.text

    @pytest.mark.parametrize(
        ("name", "content", "field", "words"),
        [
            ("spec.csv", b"freq,amp\n1,2\n2,3,4\n3,1\n" + b"4,1\n" * 20, "file", "line 3"),
            (
                "spec.csv",
                b"1,2\n1,3\n" + b"".join(b"%d,1\n" % i for i in range(2, 30)),
                "file",
                "line",
            ),
            ("rec.xyz", b"\x00\x01\x02", "file", "WAV"),
            ("rec.wav", b"RIFF\x24\x00\x00\x00WAVEfmt ", "file", ""),
        ],
    )
    def test_broken_files(
        self, client: TestClient, name: str, content: bytes, field: str, words: str
    ) -> None:
        r = client.post(
            "/api/v1/diagnose", files={"file": (name, content)}, data={"request": json.dumps(CHAIN)}
        )
        assert r.status_code in (400, 413, 415, 422), r.text
        assert r.headers["content-type"] == PROBLEM
        p = r.json()
        assert p["errors"][0]["field"] == field and words in p["detail"]

    def test_wav_that_lies_about_its_length(self, client: TestClient) -> None:
        good = _wav(_capture(TONES, seconds=0.5) * 0.5, int(FS))
        # Claim a data chunk 1 MB longer than what follows.
        i = good.index(b"data")
        size = int.from_bytes(good[i + 4 : i + 8], "little") + 1_000_000
        bad = good[: i + 4] + size.to_bytes(4, "little") + good[i + 8 :]
        r = client.post(
            "/api/v1/diagnose",
            files={"file": ("rec.wav", bad)},
            data={"request": json.dumps(CHAIN)},
        )
        assert r.status_code == 422 and "follow" in r.json()["detail"]

    def test_form_errors(self, client: TestClient) -> None:
        r = client.post(
            "/api/v1/diagnose", files={"file": ("a.csv", b"1,2\n")}, data={"request": "{not json"}
        )
        assert r.status_code == 400 and r.headers["content-type"] == PROBLEM
        r = client.post(
            "/api/v1/diagnose", files={"other": ("a.csv", b"1,2\n")}, data={"request": "{}"}
        )
        assert r.status_code == 422 and r.json()["errors"][0]["field"] == "other"


class TestDiagnoseErrors:
    def test_spectrum_above_nyquist(self, client: TestClient) -> None:
        body = _spectrum_body()
        body["sample_rate_hz"] = 6400.0
        r = client.post("/api/v1/diagnose", json=body)
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "sample_rate_hz"
        assert "Nyquist" in r.json()["detail"]

    @pytest.mark.parametrize(
        ("mutate", "field"),
        [
            (
                lambda b: b["spectrum"].update(freq_hz=b["spectrum"]["freq_hz"][::-1]),
                "spectrum.freq_hz",
            ),
            (
                lambda b: b["spectrum"].update(amplitude=[1.0] * len(b["spectrum"]["freq_hz"])),
                "spectrum.amplitude",
            ),
            (lambda b: b["spectrum"].update(amplitude=b["spectrum"]["amplitude"][:-1]), "spectrum"),
            (lambda b: b.pop("sample_rate_hz") and b.pop("anti_alias"), "sample_rate_hz"),
            (lambda b: b.update(threshold_db=-3), "threshold_db"),
        ],
    )
    def test_bad_spectrum(self, client: TestClient, mutate: Any, field: str) -> None:
        body = _spectrum_body()
        mutate(body)
        r = client.post("/api/v1/diagnose", json=body)
        assert r.status_code == 422, r.text
        assert r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["field"].startswith(field), r.json()

    def test_nan_amplitude(self, client: TestClient) -> None:
        raw = json.dumps(_spectrum_body()).replace("]", ", NaN]", 1)
        r = client.post(
            "/api/v1/diagnose", content=raw, headers={"content-type": "application/json"}
        )
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM

    def test_record_rate_mismatch(self, client: TestClient) -> None:
        body = {
            **CHAIN,
            "time_record": {
                "samples": _capture(TONES, seconds=0.2).tolist(),
                "sample_rate_hz": 10_000,
            },
        }
        r = client.post("/api/v1/diagnose", json=body)
        assert r.status_code == 422 and "agree" in r.json()["detail"]

    def test_upload_too_large(self, client: TestClient) -> None:
        client.app.state.settings = client.app.state.settings.model_copy(  # type: ignore[attr-defined]
            update={"max_upload_bytes": 2048}
        )
        r = client.post(
            "/api/v1/diagnose",
            files={"file": ("a.csv", b"1,2\n" * 5000)},
            data={"request": json.dumps(CHAIN)},
        )
        assert r.status_code == 413 and r.json()["errors"][0]["limit"] == 2048


def test_diagnose_and_save(client: TestClient) -> None:
    r = client.post("/api/v1/diagnose?save=true&title=bench", json=_spectrum_body())
    assert r.status_code == 200, r.text
    saved = r.json()["saved"]
    got = client.get(saved["api_url"]).json()
    assert got["kind"] == "diagnose" and got["title"] == "bench"
    assert [p["verdict"] for p in got["result"]["peaks"]] == [
        p["verdict"] for p in r.json()["peaks"]
    ]
    # The spectrum is stored compactly (float32) and comes back with the record.
    assert len(got["spectrum"]["freq_hz"]) == r.json()["summary"]["n_bins"]
    assert "spectrum" not in got["request"]
