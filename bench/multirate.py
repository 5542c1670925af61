"""Benchmark the multi-rate test (issue 13's bar) on simulated captures.

Problem: a few hundred randomised multi-rate tests (2-4 captures from a converter
series, one aliased tone up to 10x the highest rate, one real tone, +-0.5 % speed
drift between captures, no filter or a 2nd-order Butterworth, noise), simulated with
true sampling by the test harness in ``tests/core/test_multirate.py``.

Printed: the rates the issue sets a bar on (top candidate = truth for aliased tones
inside the unambiguous range; every tone outside it ambiguous with the truth among the
candidates; no real tone called alias), and the time per comparison against a baseline
measured in the same run: the simulation, windowed FFTs and peak search that produced
that comparison's input. Exits 1 when a rate misses its bar.

Run: ``.venv/bin/python bench/multirate.py [trials]``
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from tests.core.test_multirate import run_trials


def main() -> int:
    trials = int(sys.argv[1]) if len(sys.argv) > 1 else 400
    s = run_trials(trials, seed=2026)
    inside = s["inside_top"] / max(s["inside"], 1)
    first = s["inside_first"] / max(s["inside"], 1)
    outside = s["outside_ok"] / max(s["outside"], 1)
    blind = s["blind_ok"] / max(s["blind"], 1)
    real = s["real_in_real"] / max(s["real_in"], 1)
    n = max(s["comparisons"], 1)
    t_cmp, t_base = s["time_compare_s"] / n, s["time_peaks_s"] / n
    print(f"trials: {trials}, comparisons: {s['comparisons']}")
    print(f"inside the range, top = truth (max_true = range):  {inside:7.1%}  of {s['inside']}")
    print(f"inside the range, first listed = truth (default):  {first:7.1%}  of {s['inside']}")
    print(f"outside the range, ambiguous with truth listed:    {outside:7.1%}  of {s['outside']}")
    print(f"inside but a mixed-sign image folds alike, same:   {blind:7.1%}  of {s['blind']}")
    print(
        f"real tones called alias:                           {s['real_alias']:7d}  of {s['real']}"
    )
    print(f"real tones called real (unique, max_true = range): {real:7.1%}  of {s['real_in']}")
    print(f"time per comparison: {t_cmp * 1e3:.2f} ms; baseline (FFTs + peaks): "
          f"{t_base * 1e3:.2f} ms; ratio {t_cmp / t_base:.2f}")  # fmt: skip
    ok = (
        inside >= 0.95
        and first >= 0.95
        and outside == 1.0
        and blind == 1.0
        and s["real_alias"] == 0
    )
    print("PASS" if ok else "FAIL", "(bar: >= 95 % inside, 100 % outside, no real tone as alias)")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
