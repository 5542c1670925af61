"""``foldwise audit`` and ``foldwise audit-demo`` on a tiny demo archive, local cluster."""

from __future__ import annotations

import json
from pathlib import Path

import pyarrow.parquet as pq
import pytest

from service.cli import main


def test_demo_then_audit_then_resume(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folder, out = tmp_path / "arch", tmp_path / "out"
    assert main(["audit-demo", str(folder), "--count", "5", "--json"]) == 0
    paths = json.loads(capsys.readouterr().out)
    manifest = folder / "manifest.csv"
    assert paths == {"manifest": str(manifest), "library": str(folder / "library.json")}
    # 5 recordings plus the demo's three wrong rows, counted independently from the file.
    assert len(manifest.read_text().splitlines()) == 1 + 5 + 3
    capsys.readouterr()
    args = [
        "audit",
        str(manifest),
        "--library",
        str(folder / "library.json"),
        "--out",
        str(out),
        "--workers",
        "1",
        "--json",
    ]
    assert main(args) == 0
    first = json.loads(capsys.readouterr().out)
    assert (first["total"], first["computed"], first["skipped"], first["errors"]) == (8, 5, 0, 3)
    recs = pq.read_table(out / "recordings.parquet").to_pylist()
    assert len(recs) == 8
    assert sum(r["status"] == "error" for r in recs) == 3
    # The second run skips the five recordings done by the first.
    assert main(args) == 0
    again = json.loads(capsys.readouterr().out)
    assert (again["computed"], again["skipped"], again["errors"]) == (0, 5, 3)


def test_bad_input_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["audit", str(tmp_path / "none.csv"), "--no-progress"]) == 2
    assert "none.csv" in capsys.readouterr().err
    assert main(["audit", str(tmp_path / "x.csv"), "--workers", "0"]) == 2
    assert main(["audit-demo", str(tmp_path / "d"), "--count", "0"]) == 2
