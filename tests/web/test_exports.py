"""Take-away parts of a result: units stated, the CSV export, the not-found page, the
collision reasons and the plan's pass/fail words."""

from __future__ import annotations

import csv
import io
import math

from fastapi.testclient import TestClient

from service.demo import demo_diagnose_request
from service.web.exports import level_words, peaks_csv, request_rows


def _answer(client: TestClient) -> dict:
    r = client.post("/api/v1/diagnose", json=demo_diagnose_request())
    assert r.status_code == 200
    return r.json()


class TestLevelWords:
    def test_basic(self) -> None:
        given = {"summary": {"input": "spectrum of 2049 lines", "averages": None}}
        w = level_words(given, "g", "rms")
        assert w["db"] == "dB re 1 g" and w["kind"] == "RMS"
        assert "RMS values in g" in w["statement"]
        # A time record's spectrum is computed here: always peak amplitudes of sines.
        computed = {"summary": {"input": "time record, 65536 samples", "averages": 8}}
        w = level_words(computed, "m/s²", "rms")
        assert w["kind"] == "peak" and "peak amplitudes of sines" in w["statement"]

    def test_edges(self) -> None:
        # No unit chosen: the file's unit when the answer carries one, else "input unit".
        assert level_words({"summary": {"amplitude_unit": "mm/s"}})["db"] == "dB re 1 mm/s"
        assert level_words({"summary": {}})["db"] == "dB re 1 input unit"
        assert level_words({"summary": {}}, "", "nonsense")["kind"] == "peak"


class TestPeaksCsv:
    def test_rows_equal_the_answer(self, client: TestClient) -> None:
        out = _answer(client)
        rows = list(csv.reader(io.StringIO(peaks_csv(out, level_words(out, "g")))))
        assert rows[0][:3] == ["frequency (Hz)", "amplitude (g, peak)", "level (dB re 1 g)"]
        assert len(rows) - 1 == len(out["peaks"])
        for row, p in zip(rows[1:], out["peaks"], strict=True):
            assert float(row[0]) == p["freq_hz"] and float(row[1]) == p["amplitude"]
            # Reference: level = 20·log10(amplitude), computed here with math.log10.
            assert float(row[2]) == round(20 * math.log10(p["amplitude"]), 3)

    def test_saved_endpoint(self, page_client: TestClient) -> None:
        body = {"kind": "diagnose", "request": demo_diagnose_request()}
        link = page_client.post("/api/v1/diagnoses", json=body).json()
        r = page_client.get(f"/d/{link['id']}/peaks.csv")
        assert r.status_code == 200 and r.headers["content-type"].startswith("text/csv")
        stored = page_client.get(f"/api/v1/diagnoses/{link['id']}").json()["result"]
        rows = list(csv.reader(io.StringIO(r.text)))
        assert [float(x[0]) for x in rows[1:]] == [p["freq_hz"] for p in stored["peaks"]]
        page = page_client.get(link["url"]).text
        assert f"/d/{link['id']}/peaks.csv" in page and "Inputs as entered" in page
        assert "data-delete-form" in page
        r = page_client.get("/d/" + "x" * 32 + "/peaks.csv")
        assert r.status_code == 404

    def test_request_rows(self) -> None:
        rows = dict(request_rows(demo_diagnose_request()))
        assert rows["Sample rate, S/s"] == "12,800"
        assert "butterworth" in rows["Anti-alias filter"]
        # Long arrays are counted, not printed.
        assert all(len(v) < 400 for v in rows.values())


class TestNotFound:
    def test_basic(self, page_client: TestClient) -> None:
        browser = "text/html,application/xhtml+xml,application/xml;q=0.9,*/*;q=0.8"
        r = page_client.get("/no-such-page", headers={"accept": browser})
        assert r.status_code == 404 and r.headers["content-type"].startswith("text/html")
        assert "No such page" in r.text
        for accept in ("application/json", "*/*", ""):
            r = page_client.get("/no-such-page", headers={"accept": accept})
            assert r.status_code == 404
            assert r.headers["content-type"].startswith("application/problem+json")
        # Under the API always problem+json, whatever the client asks for.
        r = page_client.get("/api/v1/nothing", headers={"accept": browser})
        assert r.headers["content-type"].startswith("application/problem+json")


class TestCollisionReasons:
    def test_basic(self, page_client: TestClient) -> None:
        # Two tones 50 Hz apart at 1 % speed tolerance around 5 kHz: intervals ±50 Hz
        # overlap (worked by hand), though their centres are 16 bins (50/3.125) apart.
        data = {
            "sample_rate_hz": "12800",
            "lines": "1600",
            "speed_tolerance_pct": "1",
            "band_low_hz": "0",
            "band_high_hz": "5000",
            "shaft-0-label": "a",
            "shaft-0-speed": "600000",
            "shaft-0-speed_unit": "rpm",
            "shaft-0-orders": "1",
            "shaft-1-label": "b",
            "shaft-1-speed": "171000",
            "shaft-1-speed_unit": "rpm",
            "shaft-1-orders": "1",
        }
        # a: 10 kHz folds to |10000 - 12800| = 2800 Hz (±100 Hz at 1 %); b: 2850 Hz direct
        # (±28.5 Hz); bin width 5000/1600 = 3.125 Hz.
        r = page_client.post("/predict", data=data)
        assert r.status_code == 200
        assert "speed-tolerance intervals overlap" in r.text
        assert "centres 50.0 Hz, 16.0 bins apart" in r.text


class TestPlanStatus:
    def test_pass_is_not_alarm(self, page_client: TestClient) -> None:
        r = page_client.get("/plan?demo=1")
        assert r.status_code == 200
        # Every alias the recommendation lets in is below the limit: written as a pass,
        # with a mark beside the colour, never in the alarm style.
        assert "alias in band, below the limit" in r.text
        assert "above the limit" not in r.text
        assert 'class="is-alias in-band"' not in r.text
