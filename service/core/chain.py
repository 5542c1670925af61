"""Acquisition chains: the stages a tone passes from the sensor to the analysed record.

A chain is an ordered tuple of stages: optional sensor resonance and analog low-pass
filters (acting on the true frequency), one converter (``Sample``), then digital
low-pass filters and decimators (acting on the frequency as folded at the rate in
force at that point). ``Chain.evaluate`` pushes an array of tone frequencies through
all of them at once. The stages themselves live in :mod:`service.core.stages`
(re-exported here).

With integer decimation the apparent frequency after the whole chain is
``fold(f, final_rate)``, because ``fold(fold(f, fs), fs/M) = fold(f, fs/M)`` for integer
``M``: folding at fs shifts ``f`` by a multiple of fs (a multiple of fs/M) and possibly
mirrors it, and both leave the fold at fs/M unchanged [1]_. The chain decides only the
attenuation.

References
----------
.. [1] R. E. Crochiere and L. R. Rabiner, *Multirate Digital Signal Processing*,
   Prentice-Hall, 1983, ch. 2 (decimation by an integer factor and its aliasing).
.. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (sampling) and sec. 4.6 (changing the sample rate).
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core import digital as _dig
from service.core import filters as _flt
from service.core.checks import check_freqs
from service.core.errors import InputError
from service.core.folding import check_fold_range, fold_unchecked, zone_unchecked

from .stages import (
    STAGE_TYPES,
    AnalogLowpass,
    Decimate,
    DigitalLowpass,
    Sample,
    SensorResonance,
    Stage,
    fmt_hz,
    fmt_range,
)

__all__ = [
    "Chain",
    "ChainResponse",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


_MIN_FINAL_RATE_HZ = 1.0


@dataclass(frozen=True)
class ChainResponse:
    """What a chain does to each tone.

    Attributes
    ----------
    freq_hz : ndarray
        True frequencies, Hz.
    apparent_hz : ndarray
        Apparent frequency after the whole chain, ``fold(f, final_rate_hz)``, Hz.
    zone : ndarray of int
        Nyquist zone of the true frequency at the final rate (1 = not aliased).
    inverted : ndarray of bool
        Whether the tone lands mirrored (even zone at the final rate).
    stage_attenuation_db : ndarray, shape (n_stages, n)
        Attenuation of each stage, dB (negative where a sensor resonance amplifies).
    attenuation_db : ndarray
        Total attenuation, dB (sum over stages).
    stage_names : tuple of str
        Short human-readable name of each stage.
    final_rate_hz : float
        Sample rate after all decimation, Hz.
    fold_stage : ndarray of int
        Index of the first stage at which the tone folds: the ``Sample`` stage if
        ``f > rate/2``, a ``Decimate`` stage if it folds there; -1 if never.
    """

    freq_hz: FloatArray
    apparent_hz: FloatArray
    zone: NDArray[np.int64]
    inverted: NDArray[np.bool_]
    stage_attenuation_db: FloatArray
    attenuation_db: FloatArray
    stage_names: tuple[str, ...]
    final_rate_hz: float
    fold_stage: NDArray[np.int64]


@dataclass(frozen=True)
class _Plan:
    """What the chain's structure implies: rates, filter coefficients and notes."""

    input_rates: tuple[float | None, ...]  # rate in force where each stage sits
    coefficients: tuple[tuple[FloatArray, FloatArray] | None, ...]
    sample_index: int
    sample_rate_hz: float
    final_rate_hz: float
    notes: tuple[str, ...]
    stage_names: tuple[str, ...]
    fold_thresholds: tuple[tuple[float, int], ...]  # (Nyquist frequency, stage) per fold
    fold_table: IntArray | None  # zone -> first folding stage (see _fold_table)


@dataclass(frozen=True)
class Chain:
    """An ordered acquisition chain.

    Attributes
    ----------
    stages : tuple of Stage
        Analog stages (``SensorResonance``, ``AnalogLowpass``), exactly one ``Sample``,
        then digital stages (``DigitalLowpass``, ``Decimate``), in signal order.

    Raises
    ------
    ValueError
        On construction, if the structure is impossible (see :meth:`validate`).
    """

    stages: tuple[Stage, ...]
    _plan: _Plan = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        stages = tuple(self.stages)
        for i, st in enumerate(stages):
            if not isinstance(st, STAGE_TYPES):
                raise InputError(
                    f"stages[{i}]={st!r} is not a chain stage (SensorResonance, "
                    "AnalogLowpass, Sample, DigitalLowpass or Decimate)",
                    field=f"stages[{i}]",
                    code="bad_type",
                    value=st,
                )
        object.__setattr__(self, "stages", stages)
        object.__setattr__(self, "_plan", _analyse(stages))

    @classmethod
    def shorthand(cls, sample_rate_hz: float, anti_alias: AnalogLowpass | None = None) -> Chain:
        """A converter at ``sample_rate_hz``, Hz, behind an optional analog anti-alias filter."""
        stages: tuple[Stage, ...] = (Sample(sample_rate_hz),)
        if anti_alias is not None:
            if not isinstance(anti_alias, AnalogLowpass):
                raise InputError(
                    f"anti_alias={anti_alias!r} must be an AnalogLowpass or None",
                    field="anti_alias",
                    code="bad_type",
                    value=anti_alias,
                )
            stages = (anti_alias, *stages)
        return cls(stages)

    def validate(self) -> list[str]:
        """Check the structure; return human-readable notes (warnings).

        Errors (``ValueError``): no ``Sample`` stage or more than one; a digital stage or
        ``Decimate`` before the ``Sample``; an analog stage after it; a digital spec whose
        stopband is above the Nyquist frequency where it runs, or that needs too many
        taps; decimation bringing the rate below 1 Hz.

        Notes: no analog anti-alias filter; an analog cutoff above the Nyquist
        frequency; a decimation without a filter; a digital low-pass whose stopband
        edge is above the Nyquist frequency after the unfiltered decimation that
        follows it.
        """
        # The stages are immutable and were analysed (errors raised) at construction.
        return list(self._plan.notes)

    @property
    def sample_rate_hz(self) -> float:
        """The converter's sample rate, Hz."""
        return self._plan.sample_rate_hz

    @property
    def final_rate_hz(self) -> float:
        """Sample rate after all decimation, Hz."""
        return self._plan.final_rate_hz

    @property
    def nyquist_hz(self) -> float:
        """Nyquist frequency of the final record, Hz."""
        return self._plan.final_rate_hz / 2.0

    @property
    def stage_names(self) -> tuple[str, ...]:
        return self._plan.stage_names

    def describe(self) -> list[dict[str, Any]]:
        """Each stage as a plain dict: ``type`` plus the parameters that are set."""
        out = []
        for st in self.stages:
            d: dict[str, Any] = {"type": st.kind}
            for fld in dataclasses.fields(st):
                value = getattr(st, fld.name)
                if value is None:
                    continue
                d[fld.name] = list(value) if isinstance(value, tuple) else value
            out.append(d)
        return out

    def evaluate(self, freq_hz: ArrayLike) -> ChainResponse:
        """Push tones through the chain.

        Parameters
        ----------
        freq_hz : array_like
            True tone frequencies, Hz, >= 0; a scalar or a 1-D array of ``n``.

        Returns
        -------
        ChainResponse
            Apparent frequency, zone, inversion, attenuation per stage and in total.

        Notes
        -----
        Analog stages act on the true frequency; the ``Sample`` stage adds 0 dB;
        digital stages act on the frequency folded at the rate in force where they sit
        (their response is periodic in that rate); a ``Decimate`` with a filter applies
        it at the rate before decimation, then the rate divides by M [2]_.

        References
        ----------
        .. [2] Oppenheim and Schafer, *Discrete-Time Signal Processing*, sec. 4.6.
        """
        f = check_freqs(freq_hz)
        if f.ndim > 1:
            raise InputError(
                f"freq_hz must be a scalar or 1-D, got shape {f.shape}",
                field="freq_hz",
                code="bad_type",
            )
        f = np.atleast_1d(f)
        n = f.size
        plan = self._plan
        check_fold_range(f, plan.final_rate_hz)
        rows = np.empty((len(self.stages), n))
        active: list[int] = []  # rows that are not identically 0 dB
        folded = f  # frequency seen at the current rate (true frequency before sampling)
        positions: dict[tuple[float, int], tuple[NDArray[np.intp], NDArray[np.float32]]] = {}
        for i, st in enumerate(self.stages):
            rate = plan.input_rates[i]
            if isinstance(st, SensorResonance):
                rows[i] = _flt.sensor_unchecked(f, st.natural_hz, st.q)
                active.append(i)
            elif isinstance(st, AnalogLowpass):
                st.attenuation_db(f, out=rows[i])
                active.append(i)
            elif isinstance(st, Sample):
                rows[i] = 0.0
                folded = fold_unchecked(f, st.rate_hz)
            else:
                assert rate is not None
                coef = plan.coefficients[i]
                if coef is None:
                    rows[i] = 0.0
                else:
                    _digital(folded, rate, coef, positions, rows[i])
                    active.append(i)
                if isinstance(st, Decimate) and st.factor > 1:
                    new_rate = rate / st.factor
                    # fold(fold(f, fs), fs/M) == fold(f, fs/M): fold the true frequency.
                    folded = fold_unchecked(f, new_rate)
        final = plan.final_rate_hz
        zone = zone_unchecked(f, final)
        fold_stage = _fold_stages(f, zone, plan.fold_thresholds, plan.fold_table)
        if not active:
            total = np.zeros(n)
        elif len(active) == 1:
            total = rows[active[0]].copy()
        else:
            total = np.add(rows[active[0]], rows[active[1]])
            for i in active[2:]:
                total += rows[i]
        return ChainResponse(
            freq_hz=f,
            apparent_hz=folded,
            zone=zone,
            inverted=(zone & 1) == 0,
            stage_attenuation_db=rows,
            attenuation_db=total,
            stage_names=self.stage_names,
            final_rate_hz=final,
            fold_stage=fold_stage,
        )


def _fold_table(thresholds: tuple[tuple[float, int], ...], final_rate: float) -> IntArray | None:
    """Lookup from Nyquist zone (at the final rate) to the first stage that folds.

    The Nyquist frequencies only fall along the chain and a tone keeps its true
    frequency until it first folds, so its first fold is at the first stage whose
    Nyquist frequency its true frequency exceeds. Each such Nyquist frequency is an
    integer multiple P of the final one, so "f exceeds it" is "zone > P" and one table
    lookup on the zone answers for all stages at once. None for very deep decimation
    (the table would be too long): then each Nyquist frequency is compared.
    """
    multiples = [max(1, round(2.0 * nyq / final_rate)) for nyq, _ in thresholds]
    top = max(multiples, default=1) + 1
    if top > 1 << 20:
        return None
    table = np.full(top + 1, -1, dtype=np.int64)
    for p, (_, i) in reversed(list(zip(multiples, thresholds, strict=True))):
        table[p + 1 :] = i
    table.setflags(write=False)
    return table


def _fold_stages(
    f: FloatArray,
    zone: NDArray[np.int64],
    thresholds: tuple[tuple[float, int], ...],
    table: IntArray | None,
) -> NDArray[np.int64]:
    """Index of the first stage at which each tone folds (-1 if never)."""
    if table is None:
        out = np.full(f.size, -1, dtype=np.int64)
        for nyq, i in reversed(thresholds):
            out = np.where(f > nyq, i, out)
        return out
    return table.take(np.minimum(zone, table.size - 1))


def _digital(
    folded: FloatArray,
    rate: float,
    coef: tuple[FloatArray, FloatArray],
    positions: dict[tuple[float, int], tuple[NDArray[np.intp], NDArray[np.float32]]],
    out: FloatArray,
) -> None:
    """Digital response at folded frequencies; grid positions are shared per rate."""
    b, a = coef
    if _dig.exact_is_cheaper(folded.size, b, a):
        _dig.digital_exact(folded, rate, b, a, out)
        return
    lo, step = _dig.grid_table(b.tobytes(), a.tobytes())
    key = (rate, lo.size)
    if key not in positions:
        positions[key] = _dig.grid_position(folded, rate, lo.size - 1)
    i, frac = positions[key]
    _dig.grid_lookup(lo, step, i, frac, out)


# A test cell asks about the same few chains again and again; the stages are immutable
# (and hashable), so their analysis (filter design included) is kept.
@functools.lru_cache(maxsize=128)
def _analyse(stages: tuple[Stage, ...]) -> _Plan:
    sample_at = [i for i, st in enumerate(stages) if isinstance(st, Sample)]
    if not sample_at:
        raise InputError(
            "the chain has no Sample stage; add the converter's sample rate",
            field="stages",
            code="missing",
        )
    if len(sample_at) > 1:
        raise InputError(
            f"the chain has {len(sample_at)} Sample stages (at positions {sample_at}); "
            "exactly one is allowed",
            field="stages",
            code="conflict",
        )
    s_idx = sample_at[0]
    for i, st in enumerate(stages):
        if i < s_idx and isinstance(st, DigitalLowpass | Decimate):
            raise InputError(
                f"stages[{i}] ({st.kind}) comes before the Sample stage at position {s_idx}; "
                "digital stages act on samples and must follow it",
                field=f"stages[{i}]",
                code="bad_order",
            )
        if i > s_idx and isinstance(st, SensorResonance | AnalogLowpass):
            raise InputError(
                f"stages[{i}] ({st.kind}) comes after the Sample stage at position {s_idx}; "
                "analog stages must precede the converter",
                field=f"stages[{i}]",
                code="bad_order",
            )
    sample = stages[s_idx]
    assert isinstance(sample, Sample)
    fs = sample.rate_hz
    notes: list[str] = []

    analog = [st for st in stages[:s_idx] if isinstance(st, AnalogLowpass)]
    if not analog:
        notes.append(
            "no anti-alias filter before the converter: everything above the Nyquist "
            f"frequency {fmt_hz(fs / 2)} folds into the band unattenuated"
        )
    for st in analog:
        if st.cutoff_hz is not None and st.cutoff_hz > fs / 2:
            notes.append(
                f"the anti-alias filter's cutoff {fmt_hz(st.cutoff_hz)} is above the "
                f"Nyquist frequency {fmt_hz(fs / 2)}: it cannot protect the band"
            )

    rates: list[float | None] = []
    coefs: list[tuple[FloatArray, FloatArray] | None] = []
    rate: float | None = None
    last_lowpass: DigitalLowpass | None = None  # at the current rate
    thresholds: list[tuple[float, int]] = []  # (Nyquist frequency, stage) per fold
    for i, st in enumerate(stages):
        rates.append(rate)
        coefs.append(None)
        if isinstance(st, Sample):
            rate = st.rate_hz
            thresholds.append((rate / 2.0, i))
        elif isinstance(st, DigitalLowpass):
            assert rate is not None
            if st.is_spec:
                assert st.stopband_hz is not None
                if st.stopband_hz > rate / 2:
                    raise InputError(
                        f"stages[{i}] digital low-pass stopband_hz={st.stopband_hz:g} is above "
                        f"the Nyquist frequency {rate / 2:g} Hz of the rate where it runs",
                        field=f"stages[{i}].stopband_hz",
                        code="above_limit",
                    )
            coefs[i] = st.coefficients(rate)
            last_lowpass = st
        elif isinstance(st, Decimate):
            assert rate is not None
            new_rate = rate / st.factor
            if new_rate < _MIN_FINAL_RATE_HZ:
                raise InputError(
                    f"stages[{i}] decimate by {st.factor} brings the rate to {new_rate:g} Hz; "
                    f"it must stay >= {_MIN_FINAL_RATE_HZ:g} Hz",
                    field=f"stages[{i}].factor",
                    code="above_limit",
                )
            coefs[i] = st.coefficients()
            if st.filter == "none" and st.factor > 1:
                notes.extend(_slice_notes(st.factor, rate, new_rate, last_lowpass))
            if st.factor > 1:
                last_lowpass = None
                thresholds.append((new_rate / 2.0, i))
            rate = new_rate
    assert rate is not None
    for c in coefs:
        for arr in c or ():
            arr.setflags(write=False)  # shared by every chain with these stages
    names: list[str] = []
    for st, r in zip(stages, rates, strict=True):
        if isinstance(st, DigitalLowpass):
            assert r is not None  # digital stages follow the Sample (checked above)
            names.append(st.name(r))
        else:
            names.append(st.name())
    return _Plan(
        input_rates=tuple(rates),
        coefficients=tuple(coefs),
        sample_index=s_idx,
        sample_rate_hz=fs,
        final_rate_hz=rate,
        notes=tuple(notes),
        stage_names=tuple(names),
        fold_thresholds=tuple(thresholds),
        fold_table=_fold_table(tuple(thresholds), rate),
    )


def _slice_notes(
    factor: int, rate: float, new_rate: float, lowpass: DigitalLowpass | None
) -> list[str]:
    old_nyq, new_nyq = rate / 2, new_rate / 2
    if lowpass is None:
        return [
            f"decimate by {factor} without a filter: everything between "
            f"{fmt_range(new_nyq, old_nyq)} folds into the band"
        ]
    if lowpass.is_spec:
        assert lowpass.stopband_hz is not None
        if lowpass.stopband_hz > new_nyq:
            return [
                f"the digital low-pass's stopband edge {fmt_hz(lowpass.stopband_hz)} is "
                f"above the Nyquist frequency {fmt_hz(new_nyq)} after decimate by {factor}: "
                f"content between {fmt_range(new_nyq, lowpass.stopband_hz)} is not fully "
                "suppressed and folds into the band"
            ]
    return []
