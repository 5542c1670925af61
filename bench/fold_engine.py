"""Folding engine speed on 10^6 tones, as ratios to the bare numpy fold expression.

Bars (issue "Foundation"): fold only ≤ 2×, full chain with attenuation ≤ 20× the time of
``np.abs(f - fs*np.rint(f/fs))`` on the same array, measured in this same run.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench._util import best_of
from service.core.chain import Chain
from service.core.folding import fold
from service.core.stages import AnalogLowpass, Decimate, Sample

N = 1_000_000


def main() -> int:
    rng = np.random.default_rng(0)
    f = rng.uniform(0.0, 400_000.0, N)
    fs = 204_800.0

    baseline = best_of(lambda: np.abs(f - fs * np.rint(f / fs)))
    t_fold = best_of(lambda: fold(f, fs))
    chain = Chain(
        stages=(
            AnalogLowpass(family="butterworth", order=8, cutoff_hz=40_000.0),
            Sample(rate_hz=fs),
            Decimate(factor=4, filter="fir"),
        )
    )
    chain.evaluate(f[:10])  # design and cache the filters outside the timing
    t_chain = best_of(lambda: chain.evaluate(f), repeat=5)

    r_fold, r_chain = t_fold / baseline, t_chain / baseline
    print(f"tones: {N:,}")
    print(f"baseline numpy fold expression: {baseline * 1e3:8.2f} ms")
    print(
        f"fold():                         {t_fold * 1e3:8.2f} ms  ratio {r_fold:5.2f}x"
        f"  (bar <= 2x)  {'PASS' if r_fold <= 2 else 'FAIL'}"
    )
    print(
        f"full chain evaluate():          {t_chain * 1e3:8.2f} ms  ratio {r_chain:5.2f}x"
        f"  (bar <= 20x) {'PASS' if r_chain <= 20 else 'FAIL'}"
    )
    print(
        "  chain: analog butterworth 8th order 40 kHz -> sample 204.8 kS/s -> "
        "decimate /4 with its FIR filter"
    )
    return 0 if (r_fold <= 2 and r_chain <= 20) else 1


if __name__ == "__main__":
    sys.exit(main())
