"""The foldwise command gives the API's answers."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.cli import main
from service.demo import demo_fold_request
from tests.inputs_corpus import FORMS


class TestFoldCommand:
    def test_basic(self, capsys: pytest.CaptureFixture[str]) -> None:
        code = main(["fold", "--sample-rate", "10000", "--tone", "a=7300@1", "--tone", "b=1000"])
        out = capsys.readouterr().out
        assert code == 0
        # Source: Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., sec. 4.2, and
        # Lyons, Understanding DSP, 3rd ed., sec. 2.3: 7.3 kHz at 10 kS/s shows at
        # |7300 - 10000| = 2.7 kHz, in zone 2 (inverted).
        line = next(row for row in out.splitlines() if row.startswith("a "))
        assert "2700.0" in line and "alias, inverted" in line
        # The pages' words and levels: dB re 1 input unit, never linear.
        assert "real (direct)" in next(r for r in out.splitlines() if r.startswith("b "))
        assert "dB re 1 input unit" in out

    def test_collision_reason(self, capsys: pytest.CaptureFixture[str]) -> None:
        # 10 kHz folds to |10000 - 12800| = 2800 Hz (±100 Hz at 1 %), 50 Hz from a direct
        # 2850 Hz line (±28.5 Hz): the intervals overlap though the centres are 16 bins
        # (50 / (5000/1600)) apart, worked by hand.
        src = '{"type":"shaft","label":"%s","speed_rpm":%d}'
        argv = ["fold", "--sample-rate", "12800", "--lines", "1600", "--speed-tolerance", "1"]
        argv += ["--band", "0:5000", "--source", src % ("a", 600000)]
        argv += ["--source", src % ("b", 171000)]
        assert main(argv) == 0
        out = capsys.readouterr().out
        line = next(r for r in out.splitlines() if "at 2800.0 Hz" in r)
        assert "in band" in line and "speed-tolerance intervals overlap" in line
        assert "16.0 bins apart" in line

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
        err = capsys.readouterr().err
        # The option's own name and the bound, not the request's field or pydantic's text.
        assert "--sample-rate: must be at least 1" in err and "sample_rate_hz" not in err
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
        assert "dB re 1" in out and "only_in" not in out
        assert "Caution" in out

    def test_amplitude_column(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        form = next(f for f in FORMS if f.name == "two_named_channels")
        path = tmp_path / "two.csv"
        path.write_bytes(form.make())
        assert main(["diagnose", str(path), "--sample-rate", "12800"]) == 2
        err = capsys.readouterr().err
        assert "amplitude_column" in err and "Ch2 (g)" in err  # the option and the columns
        args = ["diagnose", str(path), "--sample-rate", "12800", "--amplitude-column", "Ch1"]
        assert main([*args, "--tone", "carrier=10000"]) == 0
        out = capsys.readouterr().out
        assert "input: Amplitude read from column 1 'Ch1 (g)'" in out
        # Reference: 10 kHz at 12.8 kS/s folds to 12.8 − 10 = 2.8 kHz.
        assert re.search(r"^\s+2800\.0 .* alias ", out, re.MULTILINE)

    def test_errors(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        bad = tmp_path / "bad.csv"
        bad.write_text("1,2\n2,3,4\n")
        assert main(["diagnose", str(bad), "--sample-rate", "1000"]) == 2
        assert "file" in capsys.readouterr().err
        assert main(["diagnose", str(tmp_path / "missing.csv")]) == 2


class TestCompareCommand:
    @staticmethod
    def _spectrum_file(path: Path, fs: float, tones: list[tuple[float, float]]) -> None:
        # Reference spectrum: cosines sampled at t = k/fs by numpy, Hann window, rFFT.
        n = 8192
        t = np.arange(n) / fs
        x = sum(a * np.cos(2 * np.pi * f * t) for f, a in tones)
        x = x + np.random.default_rng(int(fs)).normal(0, 1e-5, n)
        w = np.hanning(n)
        amp = np.abs(np.fft.rfft(x * w)) * 2 / w.sum()
        f = np.fft.rfftfreq(n, 1 / fs)
        path.write_text("\n".join(f"{a} {b}" for a, b in zip(f, amp, strict=True)))

    def test_json_matches_api(
        self, capsys: pytest.CaptureFixture[str], tmp_path: Path, client: TestClient
    ) -> None:
        tones = [(10_000.0, 0.3), (1_000.0, 0.5)]
        a, b = tmp_path / "a.txt", tmp_path / "b.txt"
        self._spectrum_file(a, 12_800.0, tones)
        self._spectrum_file(b, 16_000.0, tones)
        args = ["compare", "--capture", f"{a}@12800", "--capture", f"{b}@16000"]
        assert main([*args, "--max-true", "30000", "--threshold", "20", "--json"]) == 0
        cli = json.loads(capsys.readouterr().out)
        # Reference: 10 kHz folds to 12.8 − 10 = 2.8 kHz and 16 − 10 = 6 kHz.
        g = next(g for g in cli["groups"] if g["freq_hz"][0] and abs(g["freq_hz"][0] - 2800) < 3)
        assert g["verdict"] == "alias" and g["true_hz"] == pytest.approx(10_000, abs=5)
        body = {
            "captures": [
                {"sample_rate_hz": r, "upload": {"kind": "spectrum"}} for r in (12_800, 16_000)
            ],
            "max_true_hz": 30_000,
            "threshold_db": 20,
        }
        with a.open("rb") as fa, b.open("rb") as fb:
            api = client.post(
                "/api/v1/compare-rates",
                files={"file_0": ("a.txt", fa), "file_1": ("b.txt", fb)},
                data={"request": json.dumps(body)},
            ).json()
        assert cli["groups"] == api["groups"]
        # The words people read: the page's verdicts, no internal names.
        assert main([*args, "--max-true", "30000", "--threshold", "20"]) == 0
        text = capsys.readouterr().out
        assert "moves: alias" in text and "only_in" not in text and "Caution:" in text

    def test_filter_and_errors(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        a = tmp_path / "a.txt"
        self._spectrum_file(a, 12_800.0, [(1_000.0, 0.5)])
        cap = f"{a}@12800:butterworth/2/5000"
        assert main(["compare", "--capture", cap, "--capture", cap]) == 2
        assert "own sample rate" in capsys.readouterr().err
        with pytest.raises(SystemExit):
            main(["compare", "--capture", f"{a}@12800:butterworth/2"])
        assert main(["compare", "--capture", cap]) == 2
        assert "captures" in capsys.readouterr().err
