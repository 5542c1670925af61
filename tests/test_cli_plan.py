"""``foldwise plan``: readable output, the API's JSON, and errors on stderr."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service import cli
from service.api.examples import PLAN_EXAMPLES
from service.app import create_app
from service.config import Settings
from service.demo import demo_plan_request


@pytest.fixture
def api(settings: Settings) -> Iterator[TestClient]:
    with TestClient(create_app(settings)) as c:
        yield c


def _run(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    code = cli.main(["plan", *args])
    out, err = capsys.readouterr()
    return code, out, err


class TestPlanCommand:
    def test_basic(self, capsys: pytest.CaptureFixture[str]) -> None:
        code, out, err = _run(capsys, "--demo")
        assert code == 0, err
        assert out.startswith("Recommendation: ")
        assert "S/s with" in out and "lines" in out and "record" in out
        assert "Cheaper options that fail" in out and "Residual risk" in out
        assert "Caution: An alias verdict is a hypothesis" in out

    def test_json_equals_api(self, capsys: pytest.CaptureFixture[str], api: TestClient) -> None:
        code, out, err = _run(capsys, "--demo", "--json")
        assert code == 0, err
        mine = json.loads(out)
        theirs = api.post("/api/v1/plan", json=demo_plan_request()).json()
        assert mine["recommendation"] == theirs["recommendation"]
        assert mine["tones"] == theirs["tones"]
        assert mine["rejected"] == theirs["rejected"]
        assert mine["residual_risk"] == theirs["residual_risk"]
        assert mine == theirs

    def test_request_file_with_runup(
        self, capsys: pytest.CaptureFixture[str], api: TestClient, tmp_path: Path
    ) -> None:
        body = PLAN_EXAMPLES["offered_rates"]["value"]
        path = tmp_path / "plan.json"
        path.write_text(json.dumps(body), encoding="utf-8")
        code, out, err = _run(capsys, "--request", str(path), "--json")
        assert code == 0, err
        mine = json.loads(out)
        theirs = api.post("/api/v1/plan", json=body).json()
        assert mine["runup"]["crossings"] == theirs["runup"]["crossings"]
        assert mine["runup"]["lines"] == theirs["runup"]["lines"]
        code, out, err = _run(capsys, "--request", str(path))
        assert code == 0 and "Run-up:" in out and "crosses" in out

    def test_direct_options(self, capsys: pytest.CaptureFixture[str], api: TestClient) -> None:
        source = '{"type":"shaft","label":"motor","speed_rpm":3000,"orders":[1,2],"amplitude":1}'
        args = [
            "--band",
            "0:2000",
            "--rejection",
            "40",
            "--rates",
            "6400,12800",
            "--source",
            source,
            "--tone",
            "carrier=10000@0.5",
            "--nominal-rpm",
            "3000",
            "--speed-range",
            "600:3000",
            "--resolve",
            "motor: 1×,motor: 2×",
            "--json",
        ]
        code, out, err = _run(capsys, *args)
        assert code == 0, err
        body: dict[str, Any] = {
            "band_hz": [0, 2000],
            "rejection_db": 40,
            "rates_hz": [6400, 12800],
            "sources": [json.loads(source)],
            "tones": [{"label": "carrier", "freq_hz": 10000, "amplitude": 0.5}],
            "nominal_rpm": 3000,
            "speed_range_rpm": [600, 3000],
            "resolve": ["motor: 1×", "motor: 2×"],
        }
        assert json.loads(out) == api.post("/api/v1/plan", json=body).json()
        # Reference: 1× and 2× are one shaft speed apart, 10 Hz at 600 rpm; Hann needs 4 bins.
        assert json.loads(out)["recommendation"]["required_bin_hz"] == pytest.approx(10 / 4)

    def test_options_override_demo(self, capsys: pytest.CaptureFixture[str]) -> None:
        code, out, err = _run(
            capsys, "--demo", "--floor", "0.001", "--speed-tolerance", "5", "--json"
        )
        assert code == 0, err
        res = json.loads(out)
        # ±5 % of the demo's nominal 12,000 rpm.
        assert res["speed_range"]["rpm"] == pytest.approx([11_400, 12_600])
        assert res["recommendation"]["limit_db"] == pytest.approx(-60.0)  # 20·log10(0.001)


class TestPlanCommandErrors:
    @pytest.mark.parametrize(
        "args",
        [
            ["--band", "5000"],
            ["--band", "a:b"],
            ["--rates", "fast"],
            ["--resolve", "only-one"],
            ["--source", "{not json"],
            ["--tone", "no-frequency"],
            ["--rejection", "60", "--floor", "1"],
            ["--window", "triangle"],
        ],
    )
    def test_bad_option(self, capsys: pytest.CaptureFixture[str], args: list[str]) -> None:
        with pytest.raises(SystemExit) as exc:
            cli.main(["plan", "--demo", *args])
        assert exc.value.code == 2
        out, err = capsys.readouterr()
        assert out == "" and "foldwise plan: error:" in err

    @pytest.mark.parametrize(
        ("args", "field"),
        [
            (["--rejection", "500"], "rejection_db"),
            (["--band", "5000:5000"], "band_hz"),
            (["--speed-tolerance", "150"], "speed_tolerance_pct"),
            (["--resolve", "nothing,GMF 1×"], "resolve[0]"),
            (["--rates", "0"], "rates_hz.0"),
        ],
    )
    def test_bad_value(
        self, capsys: pytest.CaptureFixture[str], args: list[str], field: str
    ) -> None:
        code, out, err = _run(capsys, "--demo", *args)
        assert code == 2 and out == ""
        assert err.startswith("foldwise plan: ") and field in err

    def test_no_request(self, capsys: pytest.CaptureFixture[str]) -> None:
        code, _, err = _run(capsys)
        assert code == 2 and "band_hz" in err

    def test_missing_file(self, capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
        code, _, err = _run(capsys, "--request", str(tmp_path / "none.json"))
        assert code == 2 and "none.json" in err

    def test_impossible(self, capsys: pytest.CaptureFixture[str]) -> None:
        code, out, err = _run(capsys, "--demo", "--rates", "1000")
        assert code == 1 and out == ""
        assert "no setup meets the requirements" in err
        # Common practice: fs >= 2.56 × 5 kHz.
        assert "- offer a sample rate of at least 12.8 kS/s" in err
