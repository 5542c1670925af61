"""A generated archive of the invented drive-unit bench, for trying the audit.

Several acquisition setups record the same bench at motor speeds between 3,000 and
12,000 rpm. Two are unsafe on purpose: the converter at 12.8 kS/s behind the weak
2nd-order filter, and the channel decimated by 2 in software by slicing (no filter).
The others are a 51.2 kS/s channel behind an 8th-order Butterworth filter and a
25.6 kS/s channel behind a 4th-order Bessel filter (a weak anti-alias filter). Some
recordings of the main channel are stored as the analyser's spectrum (text) rather
than as a time record. Every number is invented; the records come from the project's own
simulation (:func:`service.demo.demo_time_record`).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from scipy.io import wavfile

from ..core.spectrum import amplitude_spectrum
from ..demo import DEMO_RPM, demo_anti_alias, demo_sliced_chain, demo_sources, demo_time_record

__all__ = ["DEMO_SETUPS", "demo_library", "make_demo_archive"]

#: setup name -> (chain as the library holds it, converter rate S/s, record format)
DEMO_SETUPS: dict[str, tuple[dict[str, Any], float, str]] = {
    "eol-12k8-bw2": (
        {"sample_rate_hz": 12_800.0, "anti_alias": demo_anti_alias()},
        12_800.0,
        "wav",
    ),
    "eol-12k8-sliced": ({"chain": demo_sliced_chain()}, 12_800.0, "npy"),
    "eol-51k2-bw8": (
        {
            "sample_rate_hz": 51_200.0,
            "anti_alias": {"family": "butterworth", "order": 8, "cutoff_hz": 20_000.0},
        },
        51_200.0,
        "wav",
    ),
    "eol-25k6-bessel4": (
        {
            "sample_rate_hz": 25_600.0,
            "anti_alias": {"family": "bessel", "order": 4, "cutoff_hz": 10_000.0},
        },
        25_600.0,
        "npy",
    ),
    "eol-12k8-bw2-spectra": (
        {"sample_rate_hz": 12_800.0, "anti_alias": demo_anti_alias()},
        12_800.0,
        "csv",
    ),
}


def demo_library() -> dict[str, Any]:
    """Chains of every setup and the drive unit's sources, scaled from DEMO_RPM."""
    return {
        "chains": {name: spec for name, (spec, _, _) in DEMO_SETUPS.items()},
        "sources": {"drive-unit": {"reference_rpm": DEMO_RPM, "sources": demo_sources()}},
        "options": {"speed_tolerance_pct": 1.0},
    }


def _write_record(path: Path, x: np.ndarray, rate: float, fmt: str) -> None:
    if fmt == "wav":
        wavfile.write(path, int(rate), x.astype(np.float32))
    elif fmt == "npy":
        np.save(path, x.astype(np.float32))
    else:  # the analyser's averaged spectrum as two columns of text
        s = amplitude_spectrum(x, rate, lines=1600)
        table = pd.DataFrame({"frequency_hz": s.freq_hz, "amplitude": s.amplitude})
        table.to_csv(path, index=False, float_format="%.6g")


def make_demo_archive(
    folder: str | Path,
    count: int = 300,
    seed: int = 0,
    seconds: float = 1.0,
    bad_rows: bool = True,
) -> tuple[Path, Path]:
    """Write ``count`` recordings, ``manifest.csv`` and ``library.json`` into ``folder``.

    Recordings cycle through :data:`DEMO_SETUPS`; speeds are drawn uniformly from
    3,000-12,000 rpm. With ``bad_rows`` three wrong rows are added (a missing file, an
    unknown chain id, an unreadable file) to show that they become error rows.
    Returns the manifest and library paths.
    """
    base = Path(folder)
    (base / "rec").mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    names = list(DEMO_SETUPS)
    rows = []
    for i in range(count):
        setup = names[i % len(names)]
        spec, rate, fmt = DEMO_SETUPS[setup]
        rpm = float(np.round(rng.uniform(3000.0, 12_000.0), 1))
        sliced = setup == "eol-12k8-sliced"
        anti_alias = spec.get("anti_alias", demo_anti_alias())
        x, rec_rate = demo_time_record(
            rpm,
            seconds=seconds,
            sliced=sliced,
            seed=seed * 100_003 + i,
            rate_hz=rate,
            anti_alias=anti_alias,
        )
        rel = f"rec/{i:05d}-{setup}.{fmt}"
        _write_record(base / rel, np.asarray(x), rec_rate, fmt)
        rows.append(
            {
                "path": rel,
                "channel": 0,
                "sample_rate_hz": rec_rate if fmt == "npy" else None,
                "chain_id": setup,
                "sources_id": "drive-unit",
                "speed_rpm": rpm,
            }
        )
    if bad_rows:
        (base / "rec" / "broken.wav").write_bytes(b"RIFF\x00\x00not really a wav file")
        rows += [
            {
                "path": "rec/missing.wav",
                "chain_id": names[0],
                "sources_id": "drive-unit",
                "speed_rpm": DEMO_RPM,
            },
            {
                "path": rows[0]["path"],
                "chain_id": "no-such-chain",
                "sources_id": "drive-unit",
                "speed_rpm": DEMO_RPM,
            },
            {
                "path": "rec/broken.wav",
                "chain_id": names[0],
                "sources_id": "drive-unit",
                "speed_rpm": DEMO_RPM,
            },
        ]
    manifest = base / "manifest.csv"
    pd.DataFrame(rows).to_csv(manifest, index=False)
    library = base / "library.json"
    library.write_text(json.dumps(demo_library(), indent=2), encoding="utf-8")
    return manifest, library
