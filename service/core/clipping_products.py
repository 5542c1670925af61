"""Which spectrum peaks clipping can explain: harmonics and intermodulation products.

Clipping found in a time record (:mod:`.clipping`) flattens every strong tone: a
memoryless odd (or, when only one side clips, non-odd) nonlinearity that adds harmonics
of each strong tone and intermodulation products between strong tones. After sampling
these products fold like any other tone; diagnosis must not report them as independent
aliases or mirrors. Everything is vectorised over peaks and candidate products.

References
----------
.. [1] A. V. Oppenheim and A. S. Willsky, *Signals and Systems*, 2nd ed., Prentice
   Hall, 1997, ch. 3 (Fourier series; a waveform with half-wave symmetry
   ``x(t + T/2) = −x(t)`` has odd harmonics only).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sinusoid; the fold formula used here is
   :func:`service.core.folding.fold`).
.. [3] Common practice (no single source): a memoryless nonlinearity driven by two
   tones ``f1``, ``f2`` produces intermodulation products ``m·f1 ± n·f2`` of order
   ``m + n``; an odd-symmetric one (symmetric clipping) produces only odd orders.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .clipping import _check_freqs, _check_int, _check_positive
from .errors import InputError
from .folding import fold
from .harmonics import format_hz

__all__ = [
    "ClippingProducts",
    "clipped_sine_harmonics",
    "clipping_products",
    "strongest_tones",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
ObjArray = NDArray[np.object_]


def clipped_sine_harmonics(amplitude: float, clip_level: float, orders: ArrayLike) -> FloatArray:
    """Harmonic amplitudes of a sine clipped symmetrically at ``±clip_level``.

    Parameters
    ----------
    amplitude : float
        Amplitude ``A`` of the sine before clipping (> 0).
    clip_level : float
        Clip level ``c`` (> 0); ``c >= A`` means no clipping.
    orders : array_like of int
        Harmonic orders ``k >= 1``.

    Returns
    -------
    ndarray
        Amplitude of each harmonic, unit of ``amplitude`` (0 for even orders).

    Notes
    -----
    With ``θc = arccos(c/A)`` (the half-angle of each flattened crest), integrating the
    Fourier series of ``clip(A·cos θ, −c, c)`` over the flattened parts gives, for odd
    ``k >= 3``::

        b_k = (4/π)·| c·sin(kθc)/k − (A/2)·(sin((k−1)θc)/(k−1) + sin((k+1)θc)/(k+1)) |

    and ``b_1 = A − (4/π)·((A/2)(θc + sin(2θc)/2) − c·sin θc)``. The clipped waveform
    has half-wave symmetry, so even harmonics vanish [1]_.
    """
    a = _check_positive(amplitude, "amplitude")
    c = _check_positive(clip_level, "clip_level")
    k = np.atleast_1d(np.asarray(orders, dtype=np.float64))
    if np.any((k < 1) | (k != np.round(k))):
        raise InputError("orders must be whole numbers >= 1", field="orders", code="invalid")
    if c >= a:
        return np.where(k == 1, a, 0.0)
    tc = float(np.arccos(c / a))
    odd = k % 2 == 1
    km1 = np.where(k == 1, 1.0, k - 1)
    higher = (4 / np.pi) * (
        c * np.sin(k * tc) / k
        - (a / 2) * (np.sin((k - 1) * tc) / km1 + np.sin((k + 1) * tc) / (k + 1))
    )
    first = a - (4 / np.pi) * ((a / 2) * (tc + np.sin(2 * tc) / 2) - c * np.sin(tc))
    out: FloatArray = np.where(~odd, 0.0, np.where(k == 1, first, np.abs(higher)))
    return out


# --------------------------------------------------------------------------- products


@dataclass(frozen=True, eq=False)
class ClippingProducts:
    """Which peaks clipping can explain, and how (arrays of the peaks' length).

    Attributes
    ----------
    explained : ndarray of bool
        The peak matches a clipping product of the strong tones.
    kind : ndarray of str
        ``"harmonic"``, ``"intermodulation"``, ``"tone"`` (the peak is one of the strong
        tones themselves) or ``""``.
    order : ndarray of int
        Order of the product (harmonic number k; ``m + n`` for ``m·f1 ± n·f2``); 1 for a
        tone; 0 if none.
    tone_a, tone_b : ndarray of int
        Indices into ``fundamentals_hz`` of the tones involved (``tone_b`` −1 for a
        harmonic or a tone; both −1 if none).
    m, n : ndarray of int
        Multipliers: the product is ``m·f[tone_a] + n·f[tone_b]`` (``n`` negative for a
        difference product; 0 for a harmonic).
    true_hz : ndarray
        Frequency of the product before folding, Hz; NaN if none.
    apparent_hz : ndarray
        Its folded frequency at the sample rate, Hz; NaN if none.
    error_hz : ndarray
        |peak − apparent|, Hz; NaN if none.
    label : ndarray of str
        ``"3× 1.00 kHz"``, ``"2·f1 − f2 (…)"`` style description; ``""`` if none.
    """

    explained: BoolArray
    kind: ObjArray
    order: IntArray
    tone_a: IntArray
    tone_b: IntArray
    m: IntArray
    n: IntArray
    true_hz: FloatArray
    apparent_hz: FloatArray
    error_hz: FloatArray
    label: ObjArray

    def __len__(self) -> int:
        return int(self.explained.size)


def strongest_tones(
    peaks_hz: ArrayLike, peaks_amplitude: ArrayLike, count: int = 3, within_db: float = 20.0
) -> FloatArray:
    """The strong tones that drive clipping products: the largest peaks.

    Parameters
    ----------
    peaks_hz, peaks_amplitude : array_like
        Peak frequencies (Hz) and linear amplitudes.
    count : int
        At most this many tones (1 to 20).
    within_db : float
        Only peaks within this many dB of the strongest (> 0): products of a tone 20 dB
        below the strongest are themselves well down in the floor.

    Returns
    -------
    ndarray
        Their frequencies, Hz, strongest first.
    """
    f = _check_freqs(peaks_hz, "peaks_hz")
    a = np.atleast_1d(np.asarray(peaks_amplitude, dtype=np.float64))
    if a.shape != f.shape or np.any(~np.isfinite(a) | (a < 0)):
        raise InputError(
            "peaks_amplitude must hold one finite amplitude >= 0 per peak",
            field="peaks_amplitude",
            code="invalid",
        )
    k = _check_int(count, "count", 1, 20)
    w = _check_positive(within_db, "within_db", " dB")
    if f.size == 0 or not np.any(a > 0):
        return np.empty(0)
    order = np.argsort(-a, kind="stable")[:k]
    keep = a[order] >= a[order[0]] * 10.0 ** (-w / 20.0)
    out: FloatArray = f[order[keep]]
    return out


def _product_table(
    f: FloatArray, symmetric: bool, max_order: int
) -> tuple[FloatArray, IntArray, IntArray, IntArray, IntArray, IntArray]:
    """Every candidate product: (true_hz, order, tone_a, tone_b, m, n)."""
    k = np.arange(2, max_order + 1)
    if symmetric:
        k = k[k % 2 == 1]
    grid_t, grid_k = np.meshgrid(np.arange(f.size), k, indexing="ij")
    ti, kk = grid_t.ravel(), grid_k.ravel()
    h_true = kk * f[ti]
    parts: list[tuple[np.ndarray, ...]] = [
        (h_true, kk, ti, np.full(ti.size, -1), kk, np.zeros(ti.size, dtype=np.int64))
    ]
    if f.size >= 2:
        a_idx, b_idx = np.triu_indices(f.size, k=1)
        grid_m, grid_n = np.meshgrid(
            np.arange(1, max_order), np.arange(1, max_order), indexing="ij"
        )
        ok = grid_m + grid_n <= max_order
        if symmetric:
            ok &= (grid_m + grid_n) % 2 == 1
        mm, nn = grid_m[ok], grid_n[ok]
        pa = np.repeat(a_idx, mm.size)
        pb = np.repeat(b_idx, mm.size)
        pm = np.tile(mm, a_idx.size)
        pn = np.tile(nn, a_idx.size)
        s = pm * f[pa] + pn * f[pb]
        d = pm * f[pa] - pn * f[pb]
        parts.append((s, pm + pn, pa, pb, pm, pn))
        # A difference product's true frequency is |m·fa − n·fb| (a negative frequency is
        # the same line); keep n's sign to say which it is.
        parts.append((np.abs(d), pm + pn, pa, pb, pm, -pn))
    cols = [np.concatenate([p[i] for p in parts]) for i in range(6)]
    return (
        cols[0].astype(np.float64),
        *(c.astype(np.int64) for c in cols[1:]),
    )  # type: ignore[return-value]


def clipping_products(
    peaks_hz: ArrayLike,
    fundamentals_hz: ArrayLike,
    sample_rate_hz: float,
    tolerance_hz: float,
    symmetric: bool = True,
    max_order: int = 9,
) -> ClippingProducts:
    """Which measured peaks are harmonics or intermodulation products of clipping.

    Parameters
    ----------
    peaks_hz : array_like
        Measured peak frequencies, Hz (>= 0).
    fundamentals_hz : array_like
        The strong tones that were clipped (1 to 20), Hz: their true frequencies or
        their apparent (folded) ones — both give the same folded products, see Notes.
        :func:`strongest_tones` picks them from the peaks.
    sample_rate_hz : float
        The record's (final) sample rate, Hz (> 0).
    tolerance_hz : float
        A peak within this distance of a folded product matches it, Hz (> 0); use the
        diagnosis tolerance (:func:`service.core.attribution.frequency_tolerance_hz`)
        plus the uncertainty of the tones' frequencies times the order if known.
    symmetric : bool
        Symmetric clipping (:attr:`ClippingReport.symmetric`): only odd harmonics and
        odd-order products ``m + n`` [1]_ [3]_. False (one polarity clips, or unequal
        levels): every order from 2.
    max_order : int
        Highest harmonic and highest ``m + n`` considered (2 to 31). Default 9: the
        products of a mildly clipped tone fall with order, beyond the 9th they rarely
        stand out of the floor.

    Returns
    -------
    ClippingProducts

    Notes
    -----
    Clipping acts on the samples, which is the same as clipping the continuous signal
    and then sampling, so every product ``m·f1 ± n·f2`` lands at ``fold(m·f1 ± n·f2, fs)``
    (:func:`service.core.folding.fold` [2]_). A tone's apparent frequency is ``± f``
    modulo fs, so products of the apparent frequencies fold onto the same lines as
    products of the true ones (the set of sums and differences is the same). After
    integer decimation the products fold at the final rate, the rate to give here.

    Each peak takes the lowest-order matching product (lower orders are stronger); a
    peak that is itself one of the tones is marked ``"tone"`` and not explained.
    """
    p = _check_freqs(peaks_hz, "peaks_hz")
    f0 = _check_freqs(fundamentals_hz, "fundamentals_hz")
    if not 1 <= f0.size <= 20:
        raise InputError(
            f"fundamentals_hz has {f0.size} tones; give 1 to 20 strong tones",
            field="fundamentals_hz",
            value=f0.size,
            limit=[1, 20],
            code="out_of_range",
        )
    fs = _check_positive(sample_rate_hz, "sample_rate_hz", " Hz")
    tol = _check_positive(tolerance_hz, "tolerance_hz", " Hz")
    top = _check_int(max_order, "max_order", 2, 31)
    sym = bool(symmetric)

    true, order, ta, tb, mm, nn = _product_table(f0, sym, top)
    app = fold(true, fs)
    n_peaks = p.size
    best = np.full(n_peaks, -1, dtype=np.int64)
    err = np.full(n_peaks, np.nan)
    tone_app = fold(f0, fs)
    # The strong tones themselves first (order 1).
    d_tone = np.abs(p[:, None] - tone_app[None, :]) if n_peaks else np.empty((0, f0.size))
    is_tone = np.any(d_tone <= tol, axis=1)
    tone_idx = np.argmin(d_tone, axis=1) if n_peaks else np.empty(0, dtype=np.int64)
    free = ~is_tone
    for o in np.unique(order):  # a few orders, lowest first; each vectorised over peaks
        rows = np.flatnonzero(order == o)
        srt = rows[np.argsort(app[rows], kind="stable")]
        sa = app[srt]
        pos = np.searchsorted(sa, p)
        left = np.clip(pos - 1, 0, sa.size - 1)
        right = np.clip(pos, 0, sa.size - 1)
        pick = np.where(np.abs(sa[left] - p) <= np.abs(sa[right] - p), left, right)
        dist = np.abs(sa[pick] - p)
        hit = free & (dist <= tol)
        best[hit] = srt[pick[hit]]
        err[hit] = dist[hit]
        free &= ~hit

    explained = best >= 0
    sel = np.where(explained, best, 0)
    kind = np.full(n_peaks, "", dtype=object)
    kind[explained] = np.where(tb[sel[explained]] < 0, "harmonic", "intermodulation")
    kind[is_tone] = "tone"
    out_order = np.where(explained, order[sel], np.where(is_tone, 1, 0)).astype(np.int64)
    out_a = np.where(explained, ta[sel], np.where(is_tone, tone_idx, -1)).astype(np.int64)
    out_b = np.where(explained, tb[sel], -1).astype(np.int64)
    out_m = np.where(explained, mm[sel], np.where(is_tone, 1, 0)).astype(np.int64)
    out_n = np.where(explained, nn[sel], 0).astype(np.int64)
    out_true = np.where(
        explained, true[sel], np.where(is_tone, f0[tone_idx] if n_peaks else 0, np.nan)
    )
    out_app = np.where(
        explained, app[sel], np.where(is_tone, tone_app[tone_idx] if n_peaks else 0, np.nan)
    )
    err = np.where(is_tone, np.min(d_tone, axis=1) if n_peaks else 0.0, err)
    label = np.full(n_peaks, "", dtype=object)
    for i in np.flatnonzero(explained | is_tone):  # only the matched peaks get text
        label[i] = _label(str(kind[i]), int(out_a[i]), int(out_b[i]), int(out_m[i]),
                          int(out_n[i]), f0, float(out_true[i]))  # fmt: skip
    return ClippingProducts(
        explained=explained,
        kind=kind,
        order=out_order,
        tone_a=out_a,
        tone_b=out_b,
        m=out_m,
        n=out_n,
        true_hz=out_true.astype(np.float64),
        apparent_hz=out_app.astype(np.float64),
        error_hz=err.astype(np.float64),
        label=label,
    )


def _label(kind: str, a: int, b: int, m: int, n: int, f0: FloatArray, true_hz: float) -> str:
    if kind == "tone":
        return f"strong tone at {format_hz(f0[a], 4)}"
    if kind == "harmonic":
        return (
            f"{m}× the tone at {format_hz(f0[a], 4)} (clipping harmonic, {format_hz(true_hz, 4)})"
        )
    sign = "+" if n > 0 else "\u2212"
    ma = "" if m == 1 else f"{m}·"
    nb = "" if abs(n) == 1 else f"{abs(n)}·"
    return (
        f"{ma}{format_hz(f0[a], 4)} {sign} {nb}{format_hz(f0[b], 4)} "
        f"(clipping intermodulation, order {m + abs(n)}, {format_hz(true_hz, 4)})"
    )
