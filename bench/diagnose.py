"""Diagnosis end to end through a real server, as ratios to a bare baseline in the same run.

1. A 524,288-line spectrum (about 200 tones over a noise floor) with 500 known source
   tones, uploaded as CSV to POST /api/v1/diagnose, against the fastest CSV parse
   (pandas' C engine) plus scipy.signal.find_peaks on the same data. Bar: <= 4x.
2. A 10,000,000-sample float32 WAV through the endpoint against scipy.signal.welch alone on
   the same samples. Bar: <= 2x; the server's peak memory growth <= 8x the input size.
3. /api/v1/fold p99 while two large diagnoses run at once, beside its idle p99.
Prints the numbers; asserts nothing.
"""

from __future__ import annotations

import io
import json
import shutil
import struct
import sys
import tempfile
import threading
import time
from pathlib import Path

import httpx
import numpy as np
import pandas as pd
from scipy import signal

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench._util import local_server
from bench.fold_http import fold_body, run_wrk

LINES = 524_288
FS = 2.56 * LINES  # 1 Hz bins over DC..fs/2.56
WAV_SAMPLES = 10_000_000
WAV_RATE = 51_200.0


def make_spectrum(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    n = int(FS / 2) + 1  # bins up to fs/2, 1 Hz apart
    f = np.arange(n, dtype=np.float64)
    floor = 1e-4 * np.exp(-f / FS)  # a gently sloping floor
    amp = floor * rng.rayleigh(0.8, n)
    tones = np.sort(rng.choice(np.arange(100, n - 100), 200, replace=False)).astype(float)
    tones += rng.uniform(-0.4, 0.4, tones.size)
    # Hann main lobe around each tone: the three bins nearest carry it.
    for d in (-1, 0, 1):
        idx = np.rint(tones).astype(int) + d
        x = idx - tones
        amp[idx] += 0.1 * np.sinc(x) / (1 - x**2 + 1e-12) * (np.abs(x) < 2)
    return f, amp, tones


def csv_bytes(f: np.ndarray, a: np.ndarray) -> bytes:
    buf = io.StringIO()
    pd.DataFrame({"freq_hz": f, "amplitude": a}).to_csv(buf, index=False, float_format="%.7g")
    return buf.getvalue().encode()


def wav_float32(x: np.ndarray, rate: int) -> bytes:
    data = x.astype("<f4").tobytes()
    fmt = struct.pack("<HHIIHH", 3, 1, rate, rate * 4, 4, 32)
    return (
        b"RIFF"
        + struct.pack("<I", 4 + 8 + len(fmt) + 8 + len(data))
        + b"WAVE"
        + b"fmt "
        + struct.pack("<I", len(fmt))
        + fmt
        + b"data"
        + struct.pack("<I", len(data))
        + data
    )


def best(fn, repeat: int = 3) -> float:  # type: ignore[no-untyped-def]
    out = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - t0)
    return out


def rss_peak_kb(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1])
    return 0


def reset_peak(pid: int) -> None:
    # Writing 5 to clear_refs resets the peak RSS (VmHWM) of the process (Linux).
    try:
        Path(f"/proc/{pid}/clear_refs").write_text("5")
    except OSError:
        pass


def main() -> int:
    rng = np.random.default_rng(42)
    f, amp, tones = make_spectrum(rng)
    csv = csv_bytes(f, amp)
    known = np.concatenate([tones[:150], rng.uniform(10, FS * 3, 350)])
    request = {
        "sample_rate_hz": FS,
        "sources": [
            {
                "type": "tones",
                "label": "known",
                "freq_hz": known.round(3).tolist(),
                "amplitudes": [0.1] * known.size,
            }
        ],
        "upload": {"kind": "spectrum"},
        "max_peaks": 5000,
    }

    def baseline_spectrum() -> None:
        df = pd.read_csv(io.BytesIO(csv), engine="c")
        a = df["amplitude"].to_numpy()
        signal.find_peaks(20 * np.log10(a), prominence=10)

    t_base1 = best(baseline_spectrum)

    x = (
        0.3 * np.sin(2 * np.pi * 1234.5 * np.arange(WAV_SAMPLES) / WAV_RATE)
        + 0.01 * rng.standard_normal(WAV_SAMPLES)
    ).astype(np.float32)
    wav = wav_float32(x, int(WAV_RATE))
    t_welch = best(lambda: signal.welch(x, WAV_RATE, nperseg=4096))
    wav_request = {"upload": {"kind": "time_record"}, "spectrum_options": {"lines": 1600}}

    with tempfile.TemporaryDirectory() as tmp:
        env = {"FOLDWISE_MAX_UPLOAD_BYTES": str(200 * 1024 * 1024)}
        with local_server(env=env, data_dir=Path(tmp) / "data") as base:
            client = httpx.Client(base_url=base, timeout=300)

            def post_spectrum() -> None:
                r = client.post(
                    "/api/v1/diagnose",
                    files={"file": ("s.csv", csv)},
                    data={"request": json.dumps(request)},
                )
                r.raise_for_status()

            def post_wav() -> None:
                r = client.post(
                    "/api/v1/diagnose",
                    files={"file": ("r.wav", wav)},
                    data={"request": json.dumps(wav_request)},
                )
                r.raise_for_status()

            post_spectrum()
            t_spec = best(post_spectrum)
            out = client.post(
                "/api/v1/diagnose",
                files={"file": ("s.csv", csv)},
                data={"request": json.dumps(request)},
            ).json()
            found = out["summary"]["peaks_found"]

            pid = base.pid
            post_wav()
            reset_peak(pid)
            before = rss_peak_kb(pid)
            t_wav = best(post_wav)
            grew_mb = (rss_peak_kb(pid) - before) / 1024

            if shutil.which("wrk"):
                with tempfile.TemporaryDirectory() as t2:
                    lua = Path(t2) / "fold.lua"
                    lua.write_text(
                        'wrk.method = "POST"\nwrk.headers["Content-Type"] = '
                        f'"application/json"\nwrk.body = {json.dumps(json.dumps(fold_body()))}\n'
                    )
                    idle = run_wrk(base + "/api/v1/fold", lua)
                    stop = threading.Event()

                    def load() -> None:
                        c = httpx.Client(base_url=base, timeout=300)
                        while not stop.is_set():
                            c.post(
                                "/api/v1/diagnose",
                                files={"file": ("s.csv", csv)},
                                data={"request": json.dumps(request)},
                            )

                    workers = [threading.Thread(target=load) for _ in range(2)]
                    for w in workers:
                        w.start()
                    time.sleep(1.0)
                    busy = run_wrk(base + "/api/v1/fold", lua)
                    stop.set()
                    for w in workers:
                        w.join()
            else:
                idle = busy = None

    r1, r2 = t_spec / t_base1, t_wav / t_welch
    in_mb = len(wav) / 1024 / 1024
    print(
        f"1. spectrum of {LINES:,} lines (+ bins to fs/2), 200 tones, 500 known tones, "
        f"{len(csv) / 1e6:.1f} MB CSV; {found} peaks found"
    )
    print(
        f"   endpoint {t_spec:.2f} s vs pandas C parse + find_peaks {t_base1:.2f} s: "
        f"ratio {r1:.2f}x (bar <= 4x) {'PASS' if r1 <= 4 else 'FAIL'}"
    )
    print(f"2. float32 WAV of {WAV_SAMPLES:,} samples ({in_mb:.0f} MB)")
    print(
        f"   endpoint {t_wav:.2f} s vs scipy.signal.welch {t_welch:.2f} s: ratio {r2:.2f}x "
        f"(bar <= 2x) {'PASS' if r2 <= 2 else 'FAIL'}"
    )
    print(
        f"   server peak memory growth {grew_mb:.0f} MB = {grew_mb / in_mb:.1f}x the input "
        f"(bar <= 8x) {'PASS' if grew_mb <= 8 * in_mb else 'FAIL'}"
    )
    if idle and busy:
        print(
            f"3. /api/v1/fold p99 idle {idle['p99']:.1f} ms, with two large diagnoses "
            f"running {busy['p99']:.1f} ms ({busy['rps']:.0f} req/s vs {idle['rps']:.0f})"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
