"""Manifest and library reading: rows resolved into requests, wrong rows into errors."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from service.audit.library import read_library, read_manifest, settings_key
from service.demo import demo_sources

CHAIN = {
    "sample_rate_hz": 12800.0,
    "anti_alias": {"family": "bessel", "order": 4, "cutoff_hz": 4000.0},
}


def _lib(tmp_path: Path, **extra) -> Path:
    doc = {
        "chains": {"c1": CHAIN},
        "sources": {
            "plain": [
                {"type": "shaft", "label": "s", "speed_rpm": 1000.0},
                {"type": "line", "label": "mains", "line_hz": 50.0},
            ],
            "gearbox": {"reference_rpm": 9000.0, "sources": demo_sources(9000.0)},
        },
        **extra,
    }
    p = tmp_path / "lib.json"
    p.write_text(json.dumps(doc))
    return p


def _manifest(tmp_path: Path, rows: list[dict], fmt: str = "csv") -> Path:
    p = tmp_path / f"m.{fmt}"
    df = pd.DataFrame(rows)
    df.to_csv(p, index=False) if fmt == "csv" else df.to_parquet(p)
    return p


class TestReadManifest:
    def test_basic(self, tmp_path: Path) -> None:
        lib = read_library(_lib(tmp_path))
        m = _manifest(
            tmp_path,
            [
                {
                    "path": "a.wav",
                    "chain_id": "c1",
                    "sources_id": "plain",
                    "speed_rpm": 3000.0,
                    "channel": 2,
                }
            ],
        )
        (t,) = read_manifest(m, lib, tmp_path / "arch")
        assert t.error is None and t.setup == "c1"
        assert t.path == str(tmp_path / "arch" / "a.wav")
        assert t.request["sample_rate_hz"] == 12800.0
        assert t.request["upload"] == {"channel": 2}
        # A plain list: every shaft turns at the row's speed; fixed lines stay.
        assert t.request["sources"][0]["speed_rpm"] == 3000.0
        assert t.request["sources"][1] == {"type": "line", "label": "mains", "line_hz": 50.0}

    def test_reference_speed_scales_every_shaft(self, tmp_path: Path) -> None:
        lib = read_library(_lib(tmp_path))
        m = _manifest(
            tmp_path,
            [{"path": "a.wav", "chain_id": "c1", "sources_id": "gearbox", "speed_rpm": 4500.0}],
        )
        (t,) = read_manifest(m, lib, tmp_path)
        # Reference: the demo's own sources written for 4500 rpm (the middle shaft's
        # speed_hz is 4500/60·17/53 there); scaling 9000 → 4500 must give the same.
        want = demo_sources(4500.0)
        for got, ref in zip(t.request["sources"], want, strict=True):
            assert got.keys() == ref.keys()
            for k, v in ref.items():
                if isinstance(v, float):
                    assert got[k] == pytest.approx(v, rel=1e-12), (ref["label"], k)
                else:
                    assert got[k] == v, (ref["label"], k)

    def test_parquet_equals_csv(self, tmp_path: Path) -> None:
        lib = read_library(_lib(tmp_path))
        rows = [
            {
                "path": "a.npy",
                "sample_rate_hz": 6400.0,
                "chain_id": "c1",
                "sources_id": "plain",
                "speed_rpm": 1200.0,
            }
        ]
        a = read_manifest(_manifest(tmp_path, rows, "csv"), lib, tmp_path)
        b = read_manifest(_manifest(tmp_path, rows, "parquet"), lib, tmp_path)
        assert a == b

    def test_edges(self, tmp_path: Path) -> None:
        lib = read_library(_lib(tmp_path, options={"threshold_db": 12.0}))
        inline = json.dumps(
            [
                {"stage": "sample", "rate_hz": 8000},
                {"stage": "decimate", "factor": 2, "filter": "none"},
            ]
        )
        m = _manifest(
            tmp_path,
            [
                {"path": "a.wav", "chain": inline, "band_low_hz": 10, "band_high_hz": 1000},
                {"path": "b.wav", "sample_rate_hz": 5000.0},
            ],
        )
        a, b = read_manifest(m, lib, tmp_path)
        assert a.request["chain"][1]["factor"] == 2 and a.setup.startswith("inline:")
        assert a.request["band_hz"] == [10.0, 1000.0]
        assert a.request["threshold_db"] == 12.0 and "sources" not in a.request
        assert b.request["sample_rate_hz"] == 5000.0 and b.request["upload"]["sample_rate_hz"]
        assert settings_key(a.request) != settings_key(b.request)

    def test_errors(self, tmp_path: Path) -> None:
        lib = read_library(_lib(tmp_path))
        m = _manifest(
            tmp_path,
            [
                {"path": "a.wav", "chain_id": "nope"},
                {"path": "b.wav", "chain_id": "c1", "sources_id": "nope"},
                {"path": "c.wav", "chain": "{not json"},
                {"path": "d.wav"},
                {"path": "e.wav", "chain_id": "c1", "band_low_hz": 5.0},
                {"path": "f.wav", "chain_id": "c1"},
            ],
        )
        tasks = read_manifest(m, lib, tmp_path)
        errs = [t.error for t in tasks]
        assert "chain_id='nope'" in errs[0]
        assert "sources_id='nope'" in errs[1]
        assert "not JSON" in errs[2]
        assert "no chain_id, chain or sample_rate_hz" in errs[3]
        assert "band_high_hz" in errs[4]
        assert errs[5] is None  # the good row after the bad ones is still read
        assert [t.row for t in tasks] == list(range(6))

    def test_library_errors(self, tmp_path: Path) -> None:
        with pytest.raises(ValueError, match="unknown keys"):
            read_library(_lib(tmp_path, extra_thing=1))
        with pytest.raises(ValueError, match="not diagnose options"):
            read_library(_lib(tmp_path, options={"sample_rate_hz": 1.0}))
