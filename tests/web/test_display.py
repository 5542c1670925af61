"""service.web.display: per-bucket min/max thinning keeps every peak."""

from __future__ import annotations

import numpy as np
import pytest

from service.web.display import minmax_decimate


def _reference_buckets(n: int, buckets: int) -> np.ndarray:
    # Reference: the same near-equal split written out here, start indices for reduceat.
    return np.floor(np.arange(buckets) * (n / buckets)).astype(np.int64)


class TestMinmaxDecimate:
    def test_basic(self) -> None:
        rng = np.random.default_rng(7)
        n, buckets = 100_003, 2000
        freq = np.arange(n) * 0.25
        amp = rng.standard_normal(n)
        f, a = minmax_decimate(freq, amp, buckets)
        assert f.shape == a.shape == (2 * buckets,)
        starts = _reference_buckets(n, buckets)
        # Reference: numpy reduceat over the same buckets.
        np.testing.assert_array_equal(
            a.reshape(-1, 2).max(axis=1), np.maximum.reduceat(amp, starts)
        )
        np.testing.assert_array_equal(
            a.reshape(-1, 2).min(axis=1), np.minimum.reduceat(amp, starts)
        )
        # Every kept point is a real line of the input, in frequency order.
        idx = np.rint(f / 0.25).astype(int)
        np.testing.assert_array_equal(amp[idx], a)
        assert np.all(np.diff(f) >= 0)

    def test_edges(self) -> None:
        # Short input: unchanged.
        f, a = minmax_decimate([1.0, 2.0, 3.0], [3.0, 1.0, 2.0], 2)
        np.testing.assert_array_equal(f, [1.0, 2.0, 3.0])
        np.testing.assert_array_equal(a, [3.0, 1.0, 2.0])
        # A single narrow peak anywhere in a million lines survives.
        n = 1_048_576
        amp = np.full(n, -120.0)
        amp[777_777] = -3.0
        f, a = minmax_decimate(np.arange(n, dtype=float), amp, 2000)
        assert a.max() == -3.0 and f[np.argmax(a)] == 777_777.0
        # NaN counts as missing, not as a peak.
        amp2 = np.arange(40.0)
        amp2[5] = np.nan
        f2, a2 = minmax_decimate(np.arange(40.0), amp2, 4)
        assert not np.isnan(a2).any()
        np.testing.assert_array_equal(a2, [0, 9, 10, 19, 20, 29, 30, 39])
        np.testing.assert_array_equal(f2, a2)  # freq = index here

    def test_errors(self) -> None:
        with pytest.raises(ValueError, match="buckets=0"):
            minmax_decimate([1.0, 2.0], [1.0, 2.0], 0)
        with pytest.raises(ValueError, match="same length"):
            minmax_decimate([1.0, 2.0], [1.0], 1)
        with pytest.raises(ValueError, match="buckets="):
            minmax_decimate([1.0, 2.0], [1.0, 2.0], 2.5)  # type: ignore[arg-type]
