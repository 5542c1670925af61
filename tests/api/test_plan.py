"""POST /api/v1/plan through the real application.

The recommendation is checked against a reference computed here, not through
the core's plan search: true frequencies on a dense rpm grid, folded with
``service.core.folding.fold``, attenuated by the analog filter designed with
``scipy.signal`` and evaluated with ``scipy.signal.freqs``.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterator
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from numpy.typing import NDArray
from scipy import signal

from service.api.examples import PLAN_EXAMPLES
from service.app import create_app
from service.config import Settings
from service.contract.plan import PlanIn
from service.core.folding import fold
from service.core.tones import ToneSet
from service.demo import demo_plan_request
from service.usecases.fold import tones_from_request

PROBLEM = "application/problem+json"
URL = "/api/v1/plan"


@pytest.fixture
def plan_client(settings: Settings) -> Iterator[TestClient]:
    """The real app, as the factory wires it."""
    with TestClient(create_app(settings), raise_server_exceptions=True) as c:
        yield c


def _post(client: TestClient, body: Any) -> Any:
    return client.post(URL, json=body)


# --------------------------------------------------------------------------- reference


def _tones(body: dict[str, Any]) -> ToneSet:
    """The request's tones (source expansion is an input here, not what is tested)."""
    return tones_from_request(PlanIn.model_validate(body), 100_000)  # type: ignore[arg-type]


def _loss_db(flt: dict[str, Any], cutoff_hz: float | None, f: NDArray[np.float64]) -> Any:
    """Filter loss, dB, from a scipy.signal analog design evaluated with freqs."""
    # Reference: scipy.signal analog prototypes (butter, cheby1, cheby2, ellip, bessel
    # normalised to -3 dB at the cutoff) evaluated with scipy.signal.freqs.
    fam = flt["family"]
    if fam == "none":
        return np.zeros_like(f)
    assert cutoff_hz is not None
    w = 2 * np.pi * cutoff_hz
    n = flt["order"]
    if fam == "butterworth":
        b, a = signal.butter(n, w, analog=True)
    elif fam == "chebyshev1":
        b, a = signal.cheby1(n, flt["ripple_db"], w, analog=True)
    elif fam == "chebyshev2":
        b, a = signal.cheby2(n, flt["stop_atten_db"], w, analog=True)
    elif fam == "elliptic":
        b, a = signal.ellip(n, flt["ripple_db"], flt["stop_atten_db"], w, analog=True)
    else:
        b, a = signal.bessel(n, w, analog=True, norm="mag")
    _, h = signal.freqs(b, a, worN=2 * np.pi * f)
    return -20 * np.log10(np.abs(h))


class _Reference:
    """Every tone on a dense speed grid: true frequency and level in dB re one unit."""

    def __init__(self, body: dict[str, Any], n: int = 20_001) -> None:
        tones = _tones(body)
        nominal = body["nominal_rpm"]
        lo, hi = body["speed_range_rpm"]
        self.rpm = np.linspace(lo, hi, n)
        self.f = np.abs(tones.fixed_hz + np.outer(self.rpm / nominal, tones.speed_hz))
        amp = tones.amplitude
        known = np.isfinite(amp)
        # Unknown amplitudes are taken as strong as the strongest known one (the
        # documented planning assumption).
        amp_db = 20 * np.log10(np.where(known, amp, np.max(amp[known])))
        self.amp_db = np.broadcast_to(amp_db, self.f.shape)
        self.band = body["band_hz"]
        in_band = (self.f >= self.band[0]) & (self.f <= self.band[1])
        self.reference_db = float(np.max(amp_db[in_band.any(axis=0)]))

    def worst_alias_db(self, fs: float, flt: dict[str, Any], cutoff_hz: float | None) -> float:
        app = fold(self.f, fs)
        hit = (self.f > fs / 2) & (app >= self.band[0]) & (app <= self.band[1])
        if not hit.any():
            return -np.inf
        level = self.amp_db[hit] - _loss_db(flt, cutoff_hz, self.f[hit])
        return float(np.max(level))


RATE = re.compile(r"\d[\d,.]*\s*k?S/s")
DB_FIGURE = re.compile(r"\d[\d.]*\s*dB")


class TestPlanDemo:
    def test_basic(self, plan_client: TestClient) -> None:
        body = demo_plan_request()
        r = _post(plan_client, body)
        assert r.status_code == 200, r.text
        out = r.json()
        rec = out["recommendation"]
        for key in (
            "sample_rate_hz",
            "filter",
            "cutoff_hz",
            "chain",
            "lines",
            "span_hz",
            "bin_width_hz",
            "record_s",
            "samples",
            "averages",
            "overlap_pct",
            "total_s",
            "window",
            "mainlobe_bins",
            "worst_margin_db",
            "band_loss_db",
        ):
            assert key in rec
        assert rec["filter"]["name"] and rec["chain"][-1]["stage"] == "sample"
        assert out["caution"].startswith("An alias verdict is a hypothesis")
        assert out["computation_version"] and out["residual_risk"]

        ref = _Reference(body)
        # Reference: 60 dB below the strongest tone inside the band over the speed range.
        limit = ref.reference_db - body["rejection_db"]
        assert rec["limit_db"] == pytest.approx(limit, abs=1e-9)
        fs = rec["sample_rate_hz"]
        worst = ref.worst_alias_db(fs, rec["filter"], rec["cutoff_hz"])
        assert worst <= limit + 1e-6
        # The dense grid can only miss the exact worst point, never exceed it.
        assert limit - worst >= rec["worst_margin_db"] - 1e-6
        assert limit - worst == pytest.approx(rec["worst_margin_db"], abs=0.5)
        # Reference: filter loss in the band from scipy (the band-loss figure).
        band = np.linspace(*body["band_hz"], 2001)
        loss = _loss_db(rec["filter"], rec["cutoff_hz"], band)
        assert rec["band_loss_db"] == pytest.approx(float(loss.max()), abs=0.01)

    def test_record_arithmetic(self, plan_client: TestClient) -> None:
        rec = _post(plan_client, demo_plan_request()).json()["recommendation"]
        fs, lines = rec["sample_rate_hz"], rec["lines"]
        # Common practice: span fs/2.56, N = 2.56·lines samples, bin = fs/N, T = N/fs.
        assert rec["span_hz"] == pytest.approx(fs / 2.56)
        assert rec["span_hz"] >= demo_plan_request()["band_hz"][1]
        assert rec["samples"] == round(2.56 * lines)
        assert rec["bin_width_hz"] == pytest.approx(fs / (2.56 * lines))
        assert rec["record_s"] == pytest.approx(2.56 * lines / fs)
        assert rec["total_s"] == pytest.approx(rec["record_s"])
        # From memory: Harris 1978, the Hann window's main lobe is 4 bins null to null.
        assert rec["window"] == "hann" and rec["mainlobe_bins"] == 4

    def test_rejected_options(self, plan_client: TestClient) -> None:
        body = demo_plan_request()
        out = _post(plan_client, body).json()
        rec = out["recommendation"]
        assert out["rejected"], "a cheaper option always exists in the converter series"
        ref = _Reference(body)
        limit = ref.reference_db - body["rejection_db"]
        for rej in out["rejected"]:
            assert rej["sample_rate_hz"] <= rec["sample_rate_hz"]
            assert RATE.search(rej["reason"]), rej["reason"]
            if rej["failure"] == "span":
                # Common practice: the span fs/2.56 must reach the band edge.
                assert rej["sample_rate_hz"] / 2.56 < body["band_hz"][1]
                assert "fs/2.56" in rej["reason"]
                continue
            assert rej["failure"] == "alias"
            assert DB_FIGURE.search(rej["reason"]), rej["reason"]
            worst = ref.worst_alias_db(rej["sample_rate_hz"], rej["filter"], rej["cutoff_hz"])
            # Reference: the option really fails, by the stated amount.
            assert worst > limit
            assert worst - limit == pytest.approx(rej["excess_db"], abs=0.05)
        assert any(r["failure"] == "alias" for r in out["rejected"])

    def test_tone_aliases(self, plan_client: TestClient) -> None:
        body = demo_plan_request()
        out = _post(plan_client, body).json()
        fs = out["recommendation"]["sample_rate_hz"]
        tones = _tones(body)
        assert len(out["tones"]) == len(tones)
        hits = [t for t in out["tones"] if t["aliases_into_band"]]
        assert hits
        index = {
            (str(s), str(lab)): i
            for i, (s, lab) in enumerate(zip(tones.source, tones.label, strict=True))
        }
        for t in hits:
            i = index[(t["source"], t["label"])]
            if t["rpm"] is not None:
                f = abs(tones.fixed_hz[i] + t["rpm"] / body["nominal_rpm"] * tones.speed_hz[i])
                assert t["true_hz"] == pytest.approx(f, rel=1e-9)
            # Reference: fold(f, fs) and the zone ceil(f / (fs/2)).
            assert t["apparent_hz"] == pytest.approx(float(fold(t["true_hz"], fs)), abs=1e-6)
            assert t["zone"] == int(np.ceil(t["true_hz"] / (fs / 2)))
            assert band_contains(body["band_hz"], t["apparent_hz"])
            assert t["margin_db"] >= -1e-9
        for t in out["tones"]:
            if not t["aliases_into_band"]:
                assert t["apparent_hz"] is None and t["margin_db"] is None

    def test_resolve(self, plan_client: TestClient) -> None:
        body = PLAN_EXAMPLES["resolve_sideband"]["value"]
        r = _post(plan_client, body)
        assert r.status_code == 200, r.text
        rec = r.json()["recommendation"]
        # Reference: the sideband sits one shaft speed from the mesh; the smallest gap is
        # at the lowest speed, 1000 rpm = 16.67 Hz; Hann needs 4 bins (main lobe).
        gap = body["speed_range_rpm"][0] / 60.0
        assert rec["required_bin_hz"] == pytest.approx(gap / 4, rel=1e-9)
        assert rec["bin_width_hz"] <= gap / 4
        assert rec["bin_width_hz"] * 2 > gap / 4  # the fewest lines that do it

    def test_bin_width(self, plan_client: TestClient) -> None:
        body = {**demo_plan_request(), "bin_width_hz": 0.5, "lines_options": [400, 800, 12800]}
        rec = _post(plan_client, body).json()["recommendation"]
        # Common practice: bin = fs / (2.56·lines); 12.8 kS/s needs 12,800 lines for 0.39 Hz.
        assert rec["lines"] == 12_800
        assert rec["bin_width_hz"] == pytest.approx(rec["sample_rate_hz"] / (2.56 * 12_800))


def band_contains(band: list[float], f: float) -> bool:
    return band[0] - 1e-9 <= f <= band[1] + 1e-9


class TestRunUp:
    def test_basic(self, plan_client: TestClient) -> None:
        body = PLAN_EXAMPLES["offered_rates"]["value"]
        r = _post(plan_client, body)
        assert r.status_code == 200, r.text
        out = r.json()
        ru = out["runup"]
        fs = out["recommendation"]["sample_rate_hz"]
        tones = _tones(body)
        nominal = body["nominal_rpm"]
        rpm = np.asarray(ru["rpm"])
        assert rpm[0] == pytest.approx(body["speed_range_rpm"][0])
        assert rpm[-1] == pytest.approx(body["speed_range_rpm"][1])
        assert ru["points_computed"] == body["runup"]["n_speeds"]
        # The tones first, then the numeric order of interest (order 1 of nominal speed).
        assert len(ru["lines"]) == len(tones) + 1
        order_line = ru["lines"][-1]
        assert order_line["interest"]
        # Reference: order 1 at the grid's rpm is rpm/60 Hz, folded at fs.
        assert order_line["apparent_hz"] == pytest.approx(fold(rpm / 60.0, fs), abs=0.006)
        true = np.abs(tones.fixed_hz + np.outer(rpm / nominal, tones.speed_hz))
        app = np.asarray([line["apparent_hz"] for line in ru["lines"][:-1]]).T
        zone = np.asarray([line["zone"] for line in ru["lines"][:-1]]).T
        # Reference: fold and zone of every tone at every rpm of the grid.
        assert np.allclose(app, fold(true, fs), atol=0.006)
        assert np.array_equal(zone, np.maximum(np.ceil(true / (fs / 2)), 1).astype(int))

    def test_fold_lines_and_crossings(self, plan_client: TestClient) -> None:
        body = PLAN_EXAMPLES["offered_rates"]["value"]
        out = _post(plan_client, body).json()
        ru = out["runup"]
        fs = out["recommendation"]["sample_rate_hz"]
        tones = _tones(body)
        nominal = body["nominal_rpm"]
        lo, hi = body["speed_range_rpm"]
        # Reference: count the multiples of fs/2 each tone crosses on a dense grid.
        dense = np.linspace(lo, hi, 50_001)
        true = np.abs(tones.fixed_hz + np.outer(dense / nominal, tones.speed_hz))
        k = np.floor(true / (fs / 2))
        expected = np.abs(np.diff(k, axis=0)).sum(axis=0)
        listed = [len(line["fold_lines"]) for line in ru["lines"][: len(tones)]]
        assert listed == expected.astype(int).tolist()
        assert ru["fold_lines_total"] == int(expected.sum())
        for line in ru["lines"][: len(tones)]:
            for fl in line["fold_lines"]:
                assert fl["true_hz"] == pytest.approx(fl["multiple"] * fs / 2)
        # Reference: at each crossing the alias folds onto the crossed line's frequency.
        assert ru["crossings"] and ru["crossings_total"] == len(ru["crossings"])
        index = {
            (str(s), str(lab)): i
            for i, (s, lab) in enumerate(zip(tones.source, tones.label, strict=True))
        }
        for c in ru["crossings"]:
            s = c["rpm"] / nominal
            a = index[(c["alias_source"], c["alias_label"])]
            f_alias = abs(tones.fixed_hz[a] + s * tones.speed_hz[a])
            assert f_alias > fs / 2
            assert float(fold(f_alias, fs)) == pytest.approx(c["apparent_hz"], abs=0.05)
            if c["crossed_source"] == "orders of interest":
                f_crossed = c["rpm"] / 60.0 * float(c["crossed_label"].split()[-1])
            else:
                j = index[(c["crossed_source"], c["crossed_label"])]
                f_crossed = abs(tones.fixed_hz[j] + s * tones.speed_hz[j])
            assert f_crossed == pytest.approx(c["apparent_hz"], abs=ru["tolerance_hz"])

    def test_needs_speed_range(self, plan_client: TestClient) -> None:
        body = {
            "band_hz": [0, 2000],
            "tones": [
                {"label": "carrier", "freq_hz": 10_000, "amplitude": 1},
                {"label": "mesh", "freq_hz": 1000, "amplitude": 1},
            ],
            "rejection_db": 20,
            "runup": {},
        }
        r = _post(plan_client, body)
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["field"] == "runup"

    def test_work_limit(self, plan_client: TestClient) -> None:
        many = {"type": "tones", "label": "t", "freq_hz": [float(i) for i in range(1, 1201)]}
        body = {
            "band_hz": [0, 100],
            "sources": [many],
            "rejection_db": 20,
            "speed_tolerance_pct": 5,
            "runup": {"n_speeds": 5000},
        }
        r = _post(plan_client, body)
        assert r.status_code == 422
        err = r.json()["errors"][0]
        assert err["field"] == "runup.n_speeds" and "limit" in r.json()["detail"]
        # 1200 lines, each compared with all 1200 at every speed, within 20 million.
        assert err["limit"] == 20_000_000 // 1200**2


class TestPlanImpossible:
    def test_rate_too_low(self, plan_client: TestClient) -> None:
        r = _post(plan_client, {**demo_plan_request(), "rates_hz": [1000]})
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM
        p = r.json()
        assert p["type"].endswith("plan-impossible")
        assert p["errors"][0]["field"] == "rates_hz"
        assert isinstance(p["suggestions"], list) and p["suggestions"]
        assert all(isinstance(s, str) and s for s in p["suggestions"])
        # Common practice: the span fs/2.56 must reach 5 kHz, so fs >= 12.8 kS/s.
        assert "12.8 kS/s" in p["suggestions"][0]
        assert "What would make it possible" in p["detail"] and "12.8 kS/s" in p["detail"]

    def test_rejection_too_high(self, plan_client: TestClient) -> None:
        body = {**demo_plan_request(), "rates_hz": [12_800, 25_600], "rejection_db": 300}
        r = _post(plan_client, body)
        assert r.status_code == 422
        p = r.json()
        assert p["errors"][0]["field"] == "rejection_db"
        accept = [s for s in p["suggestions"] if "rejection" in s and "accept" in s]
        assert len(accept) == 1
        # The suggested rejection really is reachable with the offered rates.
        db = float(re.search(r"accept (\d+) dB", accept[0]).group(1))  # type: ignore[union-attr]
        assert 0 < db < 300
        assert _post(plan_client, {**body, "rejection_db": db}).status_code == 200
        # And a higher one is not: the suggestion is the best the offer can do (+1 dB).
        assert _post(plan_client, {**body, "rejection_db": db + 1}).status_code == 422


class TestBandOrder:
    def test_basic(self, plan_client: TestClient) -> None:
        # A band given high edge first is the same band: the same answer, band echoed low first.
        body = demo_plan_request()
        low, high = body["band_hz"]
        straight = _post(plan_client, body)
        reversed_ = _post(plan_client, {**body, "band_hz": [high, low]})
        assert straight.status_code == reversed_.status_code == 200, reversed_.text
        assert reversed_.json()["band_hz"] == [low, high]
        assert reversed_.json()["recommendation"] == straight.json()["recommendation"]

    def test_speed_range_order(self, plan_client: TestClient) -> None:
        # A speed range given fastest first is the same range of speeds.
        body = demo_plan_request()
        lo, hi = body["speed_range_rpm"]
        straight = _post(plan_client, body)
        reversed_ = _post(plan_client, {**body, "speed_range_rpm": [hi, lo]})
        assert straight.status_code == reversed_.status_code == 200, reversed_.text
        assert reversed_.json() == straight.json()

    def test_series_span(self, plan_client: TestClient) -> None:
        # Common practice: span = fs/2.56; the converter series tops out at 262,144 S/s,
        # so 102.4 kHz is the highest band edge it covers (the schema's maximum), and the
        # server plans that band rather than refusing it.
        schema = plan_client.get("/openapi.json").json()["components"]["schemas"]["PlanIn"]
        edges = [
            r["then"]["properties"]["band_hz"]["prefixItems"][1]["maximum"]
            for r in schema["allOf"]
            if "band_hz" in str(r.get("then", ""))
        ]
        assert sorted(edges) == [102_400.0, 200_000.0]
        body = {
            "band_hz": [0.0, 102_400.0],
            "rejection_db": 20.0,
            "tones": [{"label": "a", "freq_hz": 1000.0, "amplitude": 1.0}],
        }
        r = _post(plan_client, body)
        assert r.status_code == 200, r.text
        assert r.json()["recommendation"]["sample_rate_hz"] == 262_144.0

    def test_edges(self, plan_client: TestClient) -> None:
        # The published schema states what the server holds to: two different edges, one
        # of them at least the lowest filter cutoff.
        band = plan_client.get("/openapi.json").json()["components"]["schemas"]["PlanIn"]
        prop = band["properties"]["band_hz"]
        assert prop["uniqueItems"] is True
        assert prop["contains"] == {"minimum": 0.001}


class TestPlanErrors:
    @pytest.mark.parametrize(
        ("change", "field"),
        [
            ({"band_hz": [5000, 5000]}, "band_hz"),  # one edge twice is no band
            ({"band_hz": [0, 0.0005]}, "band_hz"),  # ends below the lowest filter cutoff
            ({"band_hz": [-1, 5000]}, "band_hz[0]"),
            ({"band_hz": [0]}, "band_hz[1]"),
            ({"floor": 0.01}, "floor"),
            ({"rejection_db": None}, "floor"),
            ({"rejection_db": 301}, "rejection_db"),
            ({"floor": -1, "rejection_db": None}, "floor"),
            ({"resolve": ["no such tone", "GMF 1×"]}, "resolve[0]"),
            ({"resolve": ["motor shaft: 1×", "GMF 1×"]}, "resolve[1]"),
            ({"resolve": ["motor shaft: 1×", "motor shaft: 1×"]}, "resolve"),
            ({"rates_hz": []}, "rates_hz"),
            ({"rates_hz": [12_800.0 + i for i in range(201)]}, "rates_hz"),
            ({"rates_hz": [0]}, "rates_hz[0]"),
            ({"rates_hz": [12_800], "rate_series": "analyser"}, "rate_series"),
            ({"rate_series": "cheap"}, "rate_series"),
            ({"filters": []}, "filters"),
            ({"filters": [{"family": "butterworth"}]}, "filters[0].order"),
            ({"filters": [{"family": "none", "order": 4}]}, "filters[0].order"),
            (
                {"filters": [{"family": "elliptic", "order": 4, "ripple_db": 0.1}]},
                "filters[0].stop_atten_db",
            ),
            ({"filters": [{"family": "butterworth", "order": 2}] * 51}, "filters"),
            (
                {
                    "filters": [
                        {"family": "bessel", "order": 2, "cutoff_hz": 1, "cutoff_fraction": 0.4}
                    ]
                },
                "filters[0].cutoff_fraction",
            ),
            ({"nominal_rpm": None}, "speed_range_rpm"),
            ({"speed_range_rpm": [1000, 5_000_000]}, "speed_range_rpm"),  # > 100 × nominal
            ({"speed_tolerance_pct": 5}, "speed_tolerance_pct"),
            ({"window": "triangle"}, "window"),
            ({"averages": 0}, "averages"),
            ({"overlap_pct": 100}, "overlap_pct"),
            ({"lines_options": [0]}, "lines_options[0]"),
            ({"sources": None}, "sources"),
            ({"sources": [{"type": "warp_drive", "label": "x"}]}, "sources[0]"),
            ({"runup": {"n_speeds": 1}}, "runup.n_speeds"),
            ({"runup": {"orders_of_interest": ["nothing"]}}, "runup.orders_of_interest[0]"),
            ({"samplerate": 5}, "samplerate"),
        ],
    )
    def test_invalid_fields(
        self, plan_client: TestClient, change: dict[str, Any], field: str
    ) -> None:
        body = {**demo_plan_request(), **change}
        body = {k: v for k, v in body.items() if v is not None}
        r = _post(plan_client, body)
        assert r.status_code == 422, r.text
        assert r.headers["content-type"] == PROBLEM
        p = r.json()
        assert p["status"] == 422 and p["detail"]
        assert p["errors"][0]["field"] == field, p

    def test_numeric_order_needs_nominal_rpm(self, plan_client: TestClient) -> None:
        body = {
            "band_hz": [0, 2000],
            "tones": [{"label": "carrier", "freq_hz": 10_000, "amplitude": 1}],
            "sources": [{"type": "shaft", "label": "motor", "speed_rpm": 3000}],
            "rejection_db": 20,
            "speed_tolerance_pct": 10,
            "runup": {"orders_of_interest": [2]},
        }
        r = _post(plan_client, body)
        assert r.status_code == 422
        assert r.json()["errors"][0]["field"] == "runup.orders_of_interest[0]"

    def test_limits_named(self, plan_client: TestClient) -> None:
        r = _post(plan_client, {**demo_plan_request(), "rejection_db": 301})
        e = r.json()["errors"][0]
        assert e["value"] == 301 and "300" in e["limit"]
        r = _post(plan_client, {**demo_plan_request(), "rates_hz": [1e4] * 201})
        assert "200" in r.json()["errors"][0]["limit"]

    def test_search_work_limit(self, plan_client: TestClient) -> None:
        many = {"type": "tones", "label": "t", "freq_hz": [float(i) for i in range(1, 1002)]}
        filters = [{"family": "butterworth", "order": n % 20 + 1} for n in range(50)]
        body = {
            "band_hz": [0, 100],
            "sources": [many],
            "rejection_db": 20,
            "rates_hz": [300.0 + i for i in range(200)],
            "filters": filters,
        }
        r = _post(plan_client, body)
        assert r.status_code == 422
        e = r.json()["errors"][0]
        assert e["field"] == "rates_hz" and e["limit"] == 10_000_000

    @pytest.mark.parametrize(
        ("raw", "field"),
        [
            ('{"band_hz": [0, 5000], "rejection_db": NaN, "tones": [TONE]}', "rejection_db"),
            ('{"band_hz": [0, Infinity], "rejection_db": 60, "tones": [TONE]}', "band_hz[1]"),
            ('{"band_hz": [0, 5000], "floor": -Infinity, "tones": [TONE]}', "floor"),
            (
                '{"band_hz": [0, 5000], "rejection_db": 60, "tones": [TONE], "rates_hz": [NaN]}',
                "rates_hz[0]",
            ),
        ],
    )
    def test_non_finite(self, plan_client: TestClient, raw: str, field: str) -> None:
        raw = raw.replace("TONE", '{"label": "a", "freq_hz": 100, "amplitude": 1}')
        r = plan_client.post(URL, content=raw, headers={"content-type": "application/json"})
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM
        assert r.json()["errors"][0]["field"] == field

    def test_malformed_json(self, plan_client: TestClient) -> None:
        r = plan_client.post(
            URL, content='{"band_hz": [0, 5000],', headers={"content-type": "application/json"}
        )
        assert r.status_code == 400 and r.headers["content-type"] == PROBLEM
        p = r.json()
        assert "malformed JSON" in p["detail"] and p["errors"][0]["field"] == "body"

    def test_empty_and_wrong_type(self, plan_client: TestClient) -> None:
        r = plan_client.post(URL, content=b"", headers={"content-type": "application/json"})
        assert r.status_code == 400 and r.headers["content-type"] == PROBLEM
        r = plan_client.post(URL, content="x", headers={"content-type": "text/plain"})
        assert r.status_code == 415 and r.json()["errors"][0]["field"] == "content-type"
        r = plan_client.post(URL, content="[1, 2]", headers={"content-type": "application/json"})
        assert r.status_code == 422 and r.headers["content-type"] == PROBLEM


class TestPlanOpenAPI:
    def test_examples(self, plan_client: TestClient) -> None:
        spec = plan_client.get("/openapi.json").json()
        op = spec["paths"][URL]["post"]
        examples = op["requestBody"]["content"]["application/json"]["examples"]
        assert set(examples) == set(PLAN_EXAMPLES)
        assert op["tags"] == ["plan"]
        # Every reference in the document resolves (the request model and its parts).
        comps = spec["components"]["schemas"]
        refs = set(re.findall(r'"\$ref": "#/components/schemas/([^"]+)"', json.dumps(spec)))
        assert {"PlanIn", "FilterIn", "RunUpIn", "PlanOut"} <= refs
        assert refs <= set(comps), refs - set(comps)

    @pytest.mark.parametrize("name", sorted(PLAN_EXAMPLES))
    def test_every_example_plans(self, plan_client: TestClient, name: str) -> None:
        r = _post(plan_client, PLAN_EXAMPLES[name]["value"])
        assert r.status_code == 200, r.text
        assert (r.json()["runup"] is not None) == ("runup" in PLAN_EXAMPLES[name]["value"])


class TestRecommendedChain:
    """The recommended chain is written in the request's chain model (stages say
    ``stage``), so it can be pasted into /api/v1/fold as it is."""

    def test_basic(self, plan_client: TestClient) -> None:
        rec = _post(plan_client, demo_plan_request()).json()["recommendation"]
        assert [s["stage"] for s in rec["chain"]][-1] == "sample"
        body = {"chain": rec["chain"], "tones": [{"label": "a", "freq_hz": 7300.0}]}
        r = plan_client.post("/api/v1/fold", json=body)
        assert r.status_code == 200, r.text
        out = r.json()
        assert out["sample_rate_hz"] == rec["sample_rate_hz"]
        # Reference: fold(f, fs) = |f - fs*round(f/fs)| by hand for the recommended rate
        # (12.8 kS/s: 7.3 kHz lands at 5.5 kHz), not through the service's own fold().
        fs = rec["sample_rate_hz"]
        assert out["tones"][0]["apparent_hz"] == pytest.approx(
            abs(7300.0 - fs * round(7300.0 / fs))
        )

    def test_edges(self, plan_client: TestClient) -> None:
        # The stage list is exactly what the fold request accepts: no ``type`` key left.
        rec = _post(plan_client, PLAN_EXAMPLES["carrier_only"]["value"]).json()["recommendation"]
        assert all("type" not in s for s in rec["chain"])
        r = plan_client.post(
            "/api/v1/diagnose",
            json={
                "chain": rec["chain"],
                "spectrum": {"freq_hz": list(range(32)), "amplitude": [1.0] * 31 + [5.0]},
            },
        )
        assert r.status_code == 200, r.text
