"""service.web.figures: the figure JSON the pages place."""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pytest
from scipy import signal

from service.config import Settings
from service.contract.fold import FoldIn, chain_from_request
from service.usecases.fold import fold_payload
from service.web.figures import (
    chain_gain_curve,
    folding_diagram,
    measured_spectrum,
    predicted_spectrum,
)

FS = 10_000.0


def _fold(body: dict[str, Any]) -> dict[str, Any]:
    return fold_payload(FoldIn.model_validate(body), Settings())


def _trace(fig: dict[str, Any], name: str) -> dict[str, Any]:
    found = [t for t in fig["data"] if t.get("name") == name and t.get("showlegend", True)]
    assert len(found) == 1, [t.get("name") for t in fig["data"]]
    return found[0]


def _reference_fold(x: np.ndarray, fs: float) -> np.ndarray:
    # Reference: numpy, |x − fs·round(x/fs)| (Oppenheim & Schafer, DTSP, sec. 4.2).
    return np.abs(x - fs * np.round(x / fs))


def _simple() -> dict[str, Any]:
    return _fold(
        {
            "sample_rate_hz": FS,
            "tones": [
                {"label": "a", "freq_hz": 7300, "amplitude": 1.0},
                {"label": "b", "freq_hz": 13200, "amplitude": 0.5},
                {"label": "c", "freq_hz": 1000, "amplitude": 0.1},
                {"label": "d", "freq_hz": 2500},
            ],
        }
    )


class TestFoldingDiagram:
    def test_basic(self) -> None:
        out = _simple()
        fig = folding_diagram(out)
        json.dumps(fig, allow_nan=False)
        line = _trace(fig, "fold line")
        vx, vy = np.array(line["x"]), np.array(line["y"])
        np.testing.assert_allclose(vy, _reference_fold(vx, FS), atol=1e-9)
        # Between the vertices the drawn line is straight; it must still equal fold(x).
        dense = np.linspace(0, vx[-1], 4001)
        np.testing.assert_allclose(np.interp(dense, vx, vy), _reference_fold(dense, FS), atol=1e-6)
        # Zones: [k·fs/2, (k+1)·fs/2], even ones (inverted) shaded.
        zones = [s for s in fig["layout"]["shapes"] if s.get("name", "").startswith("zone ")]
        assert len(zones) == len(vx) - 1
        for k, z in enumerate(zones):
            assert z["x0"] == pytest.approx(k * FS / 2) and z["x1"] == pytest.approx(
                (k + 1) * FS / 2
            )
        # Every tone sits on the line, at (true, apparent).
        aliases, direct = _trace(fig, "aliases"), _trace(fig, "direct tones")
        for tr in (aliases, direct):
            np.testing.assert_allclose(tr["y"], _reference_fold(np.array(tr["x"]), FS), atol=1e-9)
        # Source: Oppenheim & Schafer, DTSP, sec. 4.2: at 10 kS/s, 7.3 kHz → |7.3 - 10| =
        # 2.7 kHz and 13.2 kHz → |13.2 - 10| = 3.2 kHz.
        assert sorted(zip(aliases["x"], aliases["y"], strict=True)) == [
            (7300.0, pytest.approx(2700.0)),
            (13200.0, pytest.approx(3200.0)),
        ]
        assert sorted(direct["x"]) == [1000.0, 2500.0]
        assert all(t for t in aliases["text"])  # few tones: all labelled

    def test_edges(self) -> None:
        # The x range covers the highest tone and ends on a zone boundary.
        out = _fold({"sample_rate_hz": FS, "tones": [{"label": "hi", "freq_hz": 47_000}]})
        fig = folding_diagram(out)
        x_max = fig["layout"]["xaxis"]["range"][1]
        assert x_max >= 47_000 and (x_max / (FS / 2)) == pytest.approx(round(x_max / (FS / 2)))
        # Nothing aliased: no alias trace at all.
        out = _fold({"sample_rate_hz": FS, "tones": [{"label": "lo", "freq_hz": 100}]})
        assert "aliases" not in [t["name"] for t in folding_diagram(out)["data"]]
        # Markup in a label is escaped before Plotly reads it.
        out = _fold({"sample_rate_hz": FS, "tones": [{"label": "<b>x</b>", "freq_hz": 7300}]})
        tr = _trace(folding_diagram(out), "aliases")
        assert "<b>x</b>" not in tr["text"][0] and "&lt;b&gt;x&lt;/b&gt;" in tr["text"][0]
        # Many tones: labels limited, hover text kept for all.
        many = _fold(
            {
                "sample_rate_hz": FS,
                "tones": [{"label": f"t{i}", "freq_hz": 37.0 * i + 1} for i in range(400)],
            }
        )
        fig = folding_diagram(many, max_labels=10)
        texts = [t for tr in fig["data"] if "text" in tr for t in tr["text"] if t]
        assert 2 <= len(texts) <= 10
        # Only what has room is written: no two labels within one label's box
        # (LABEL_ROOM: about 17 % of the x span by 7 % of the y span).
        x_span, y_span = fig["layout"]["xaxis"]["range"][1], FS / 2
        spots = [
            (x, y)
            for tr in fig["data"]
            if tr.get("mode") == "markers+text"
            for x, y, t in zip(tr["x"], tr["y"], tr["text"], strict=True)
            if t
        ]
        for k, (x1, y1) in enumerate(spots):
            for x2, y2 in spots[k + 1 :]:
                assert abs(x1 - x2) >= 0.17 * x_span or abs(y1 - y2) >= 0.07 * y_span
        assert sum(len(tr.get("hovertext", [])) for tr in fig["data"]) == 400

    def test_gain_curve(self) -> None:
        body = {
            "sample_rate_hz": 40_000.0,
            "anti_alias": {"family": "butterworth", "order": 4, "cutoff_hz": 5000.0},
            "tones": [{"label": "a", "freq_hz": 10_000.0}],
        }
        req = FoldIn.model_validate(body)
        curve = chain_gain_curve(chain_from_request(req), 40_000.0, points=401)
        f = np.array(curve["freq_hz"])
        # Reference: scipy.signal analog Butterworth and freqs.
        b, a = signal.butter(4, 2 * np.pi * 5000.0, analog=True)
        _, h = signal.freqs(b, a, worN=2 * np.pi * f[1:])
        np.testing.assert_allclose(curve["gain_db"][1:], 20 * np.log10(np.abs(h)), atol=2e-3)
        # Source: Butterworth (1930), |H|² = 1/(1+(f/fc)^(2N)): N = 4 at 2·fc →
        # 10·log10(1 + 2^8) = 24.10 dB.
        assert curve["gain_db"][100] == pytest.approx(-24.10, abs=0.01)
        fig = folding_diagram(_fold(body), gain_curve=curve)
        gain = _trace(fig, "chain gain")
        assert gain["yaxis"] == "y2" and fig["layout"]["yaxis2"]["overlaying"] == "y"


class TestPredictedSpectrum:
    def test_basic(self) -> None:
        fig = predicted_spectrum(_simple())
        json.dumps(fig, allow_nan=False)
        heads = [t for t in fig["data"] if t.get("mode") == "markers" and "customdata" in t]
        points = sorted(
            (round(x, 6), y)
            for t in heads
            if t["name"] != "level not given"
            for x, y in zip(t["x"], t["y"], strict=True)
        )
        # No filter: level = 20·log10(amplitude) at the apparent frequency.
        # Reference: the arithmetic itself, 20·log10 of 1, 0.5 and 0.1.
        assert points == [
            (1000.0, pytest.approx(-20.0)),
            (2700.0, pytest.approx(0.0)),
            (3200.0, pytest.approx(20 * np.log10(0.5))),
        ]
        unknown = _trace(fig, "level not given")
        assert unknown["x"] == [pytest.approx(2500.0)]
        # Stems run from the common base to each head.
        stems = _trace(fig, "aliases")
        assert stems["mode"] == "lines" and stems["x"][2] is None

    def test_edges(self) -> None:
        # Levels through a filter follow the chain's attenuation.
        body = {
            "sample_rate_hz": 12_800.0,
            "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0},
            "tones": [{"label": "a", "freq_hz": 10_000.0, "amplitude": 1.0}],
        }
        fig = predicted_spectrum(_fold(body))
        head = next(t for t in fig["data"] if t["name"] == "aliases" and t["mode"] == "markers")
        # Reference: |H|² = 1/(1+(f/fc)^(2N)) for Butterworth; N = 2, f = 2·fc.
        assert head["y"][0] == pytest.approx(-10 * np.log10(1 + 2.0**4), abs=1e-3)
        assert head["x"][0] == pytest.approx(2800.0)  # |10000 − 12800|
        # No amplitude anywhere: still a figure, with a default range.
        fig = predicted_spectrum(
            _fold({"sample_rate_hz": FS, "tones": [{"label": "x", "freq_hz": 5}]})
        )
        assert [t["name"] for t in fig["data"]] == ["level not given"]


class TestMeasuredSpectrum:
    def test_basic(self) -> None:
        n = 1_048_576
        rng = np.random.default_rng(3)
        freq = np.arange(n) * 0.01
        level = -100 + 3 * rng.standard_normal(n)
        level[123_456] = -12.0
        peaks = [
            {
                "freq_hz": freq[123_456],
                "level_db": -12.0,
                "verdict": "alias",
                "explanation": "alias of <i>GMF 2×</i>",
            }
        ]
        fig = measured_spectrum(freq, level, floor_db=np.full(n, -100.0), peaks=peaks)
        text = json.dumps(fig, allow_nan=False)
        # A page for a 1,048,576-line spectrum must stay under 1.5 MB; the figure is
        # most of it.
        assert len(text.encode()) < 400_000
        spec = _trace(fig, "spectrum")
        assert len(spec["x"]) == 4000 and max(spec["y"]) == -12.0
        alias = _trace(fig, "alias")
        assert "&lt;i&gt;" in alias["hovertext"][0]

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="same length"):
            measured_spectrum([1.0, 2.0], [1.0])
