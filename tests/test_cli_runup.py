"""``foldwise run-up``: the API's answer on the command line, errors with field and remedy."""

from __future__ import annotations

import io
import json
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service import cli
from service.app import create_app
from service.config import Settings
from service.core.runup_sim import simulate_run_up

FS = 12_800.0


@pytest.fixture
def api(settings: Settings) -> Iterator[TestClient]:
    with TestClient(create_app(settings)) as c:
        yield c


@pytest.fixture(scope="module")
def record_npy() -> bytes:
    rec = simulate_run_up(duration_s=4.0, seed=11)
    buf = io.BytesIO()
    np.save(buf, np.stack([rec.tacho, rec.vibration], axis=1))  # (N, C)
    return buf.getvalue()


def _run(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    code = cli.main(["run-up", *args])
    out, err = capsys.readouterr()
    return code, out, err


class TestRunUp:
    def test_json_equals_api(
        self,
        capsys: pytest.CaptureFixture[str],
        api: TestClient,
        tmp_path: Path,
        record_npy: bytes,
    ) -> None:
        path = tmp_path / "bench.npy"
        path.write_bytes(record_npy)
        args = ("--vibration-channel", "1", "--tacho-channel", "0", "--ppr", "1")
        code, out, err = _run(capsys, str(path), *args, "--sample-rate", "12800", "--json")
        assert code == 0, err
        got = json.loads(out)
        req = {"upload": {"vibration_channel": 1, "tacho_channel": 0, "sample_rate_hz": FS}}
        r = api.post(
            "/api/v1/run-up",
            files={"file": ("bench.npy", record_npy)},
            data={"request": json.dumps(req)},
        )
        assert r.status_code == 200
        want = r.json()
        assert got["lines"] == want["lines"] and got["display"] == want["display"]
        # Mesh 3× (order 51) folds at fs/2 = 6,400 Hz from 60·6400/51 = 7,529 rpm (by hand).
        folded = [ln for ln in got["lines"] if ln["kind"] == "folded_order"]
        assert any(abs(ln["order"] - 51.0) < 0.1 for ln in folded)

    def test_demo_table(self, capsys: pytest.CaptureFixture[str]) -> None:
        code, out, err = _run(capsys, "--demo")
        assert code == 0, err
        assert "folded_order" in out and "Caution:" in out

    def test_errors(
        self, capsys: pytest.CaptureFixture[str], tmp_path: Path, record_npy: bytes
    ) -> None:
        path = tmp_path / "bench.npy"
        path.write_bytes(record_npy)
        # Channels swapped: the "tacho" is the accelerometer.
        code, _, err = _run(
            capsys, str(path), "--vibration-channel", "0", "--tacho-channel", "1",
            "--sample-rate", "12800",
        )  # fmt: skip
        assert code == 2
        assert "upload.tacho_channel" in err and "swapped" in err
        code, _, err = _run(capsys, str(path), "--vibration-channel", "1", "--sample-rate", "12800")
        assert code == 2 and "no speed information" in err and "speed_trace" in err
        code, _, err = _run(capsys)
        assert code == 2 and "--demo" in err
