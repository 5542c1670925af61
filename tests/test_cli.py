"""The foldwise command gives the API's answers."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.cli import main
from service.demo import demo_fold_request


class TestFoldCommand:
    def test_basic(self, capsys: pytest.CaptureFixture[str]) -> None:
        code = main(["fold", "--sample-rate", "10000", "--tone", "a=7300@1", "--tone", "b=1000"])
        out = capsys.readouterr().out
        assert code == 0
        # Source: Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., sec. 4.2, and
        # Lyons, Understanding DSP, 3rd ed., sec. 2.3: 7.3 kHz at 10 kS/s shows at
        # |7300 - 10000| = 2.7 kHz, in zone 2 (inverted).
        line = next(row for row in out.splitlines() if row.startswith("a "))
        assert "2700.0" in line and "ALIAS inverted" in line

    def test_json_matches_api(
        self, capsys: pytest.CaptureFixture[str], tmp_path: Path, client: TestClient
    ) -> None:
        req = tmp_path / "req.json"
        req.write_text(json.dumps(demo_fold_request()))
        assert main(["fold", "--request", str(req), "--json"]) == 0
        cli = json.loads(capsys.readouterr().out)
        api = client.post("/api/v1/fold", json=demo_fold_request()).json()
        assert cli["tones"] == api["tones"] and cli["collisions"] == api["collisions"]

    def test_errors(self, capsys: pytest.CaptureFixture[str]) -> None:
        assert main(["fold", "--sample-rate", "-5", "--tone", "a=1"]) == 2
        assert "sample_rate_hz" in capsys.readouterr().err
        with pytest.raises(SystemExit):
            main(["fold", "--tone", "no-equals-sign"])


class TestDiagnoseCommand:
    def test_basic(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        # Reference spectrum: a 10 kHz tone sampled at 12.8 kS/s by numpy, FFT (Hann).
        fs, n = 12_800.0, 4096
        t = np.arange(16 * n) / fs
        x = 0.3 * np.cos(2 * np.pi * 10_000 * t) + 0.5 * np.cos(2 * np.pi * 1000 * t)
        x += np.random.default_rng(0).normal(0, 1e-4, t.size)
        frames = x.reshape(16, n) * np.hanning(n + 1)[:-1]
        amp = np.sqrt(np.mean(np.abs(np.fft.rfft(frames, axis=1)) ** 2, axis=0))
        amp *= 2 / np.hanning(n + 1)[:-1].sum()
        f = np.fft.rfftfreq(n, 1 / fs)
        path = tmp_path / "spec.txt"
        path.write_text("\n".join(f"{a} {b}" for a, b in zip(f, amp, strict=True)))
        src = json.dumps(
            {
                "type": "tones",
                "label": "inverter",
                "freq_hz": [10_000.0],
                "tone_labels": ["carrier"],
            }
        )
        code = main(["diagnose", str(path), "--sample-rate", "12800", "--source", src])
        out = capsys.readouterr().out
        assert code == 0
        row = next(r for r in out.splitlines() if r.strip().startswith("2800.0"))
        assert "alias" in row and "10000.0" in row
        assert "Caution" in out

    def test_errors(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        bad = tmp_path / "bad.csv"
        bad.write_text("1,2\n2,3,4\n")
        assert main(["diagnose", str(bad), "--sample-rate", "1000"]) == 2
        assert "file" in capsys.readouterr().err
        assert main(["diagnose", str(tmp_path / "missing.csv")]) == 2
