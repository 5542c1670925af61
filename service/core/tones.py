"""Labelled tone sets: the common currency between sources, the chain and diagnosis.

A tone's true frequency is ``fixed_hz + speed_hz``: the part that does not move with
machine speed (line harmonics, a PWM carrier) plus the part that scales with it (orders,
gear mesh, bearing tones, and the sidebands of a carrier at the electrical frequency).
Keeping the two apart lets a speed tolerance or a run-up act on the right part only.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import InputError

__all__ = ["ToneSet", "strings"]

FloatArray = NDArray[np.float64]
ObjArray = NDArray[np.object_]


def _obj(values: Sequence[str] | ObjArray, n: int, name: str) -> ObjArray:
    if isinstance(values, np.ndarray) and values.dtype == object and values.shape == (n,):
        return values
    arr = np.empty(n, dtype=object)
    arr[:] = list(values) if not isinstance(values, np.ndarray) else values
    if arr.shape != (n,):
        raise InputError(
            f"{name} has {arr.size} entries; expected {n}", field=name, code="mismatched_lengths"
        )
    return arr


def strings(values: Sequence[str]) -> ObjArray:
    """A 1-D object array of strings (numpy would otherwise pick a fixed-width dtype)."""
    arr = np.empty(len(values), dtype=object)
    arr[:] = list(values)
    return arr


@dataclass(frozen=True)
class ToneSet:
    """Arrays of labelled tones, all of one length ``n``.

    Attributes
    ----------
    label : ndarray of str
        What the tone is, e.g. ``"BPFI 3×"`` or ``"carrier 1× − 2·f1"``.
    source : ndarray of str
        The label of the source it came from, e.g. ``"input shaft bearing"``.
    kind : ndarray of str
        Source type: ``shaft``, ``gear_mesh``, ``bearing``, ``blade_pass``, ``line``,
        ``pwm``, ``resonance`` or ``tone``.
    fixed_hz : ndarray
        Speed-independent part of the true frequency, Hz.
    speed_hz : ndarray
        Speed-proportional part of the true frequency at the nominal speed, Hz.
    amplitude : ndarray
        Amplitude at the sensor in the user's unit; NaN where unknown.
    family : ndarray of str
        Harmonic family the tone belongs to (tones of one family are integer multiples
        of one fundamental), e.g. ``"BPFI of 'input shaft bearing'"``; ``""`` if none.
    harmonic : ndarray
        Multiple of the family's fundamental (1 for the fundamental); NaN if none.
    """

    label: ObjArray
    source: ObjArray
    kind: ObjArray
    fixed_hz: FloatArray
    speed_hz: FloatArray
    amplitude: FloatArray
    family: ObjArray = field(default_factory=lambda: np.empty(0, dtype=object))
    harmonic: FloatArray = field(default_factory=lambda: np.empty(0))

    def __post_init__(self) -> None:
        n = np.asarray(self.fixed_hz).size
        set_ = object.__setattr__
        set_(self, "fixed_hz", np.asarray(self.fixed_hz, dtype=np.float64).reshape(n))
        set_(self, "speed_hz", np.asarray(self.speed_hz, dtype=np.float64).reshape(n))
        set_(self, "amplitude", np.asarray(self.amplitude, dtype=np.float64).reshape(n))
        for name in ("label", "source", "kind"):
            set_(self, name, _obj(getattr(self, name), n, name))
        if np.asarray(self.family).size == 0 and n:
            set_(self, "family", _obj([""] * n, n, "family"))
        else:
            set_(self, "family", _obj(self.family, n, "family"))
        if np.asarray(self.harmonic).size == 0 and n:
            set_(self, "harmonic", np.full(n, np.nan))
        else:
            set_(self, "harmonic", np.asarray(self.harmonic, dtype=np.float64).reshape(n))
        f = self.freq_hz
        # One min and one max catch NaN (propagates), negatives and +inf; reductions are
        # the costly part for small sets, so the detailed search runs only on failure.
        if n and not (f.min() >= 0 and f.max() < np.inf):
            bad = ~np.isfinite(f) | (f < 0)
            i = int(np.flatnonzero(bad)[0])
            limit = "must be finite" if not np.isfinite(f[i]) else "must be >= 0 Hz"
            raise InputError(
                f"tone {self.label[i]!r} has frequency {float(f[i])!r} Hz; {limit}",
                field=f"freq_hz[{i}]",
                code="not_finite" if not np.isfinite(f[i]) else "below_limit",
                value=float(f[i]),
            )

    def __len__(self) -> int:
        return int(self.fixed_hz.size)

    @property
    def freq_hz(self) -> FloatArray:
        """True frequency at the nominal speed, Hz."""
        out: FloatArray = self.fixed_hz + self.speed_hz
        return out

    def at_speed(self, factor: ArrayLike) -> FloatArray:
        """True frequencies with the speed scaled by ``factor``.

        Parameters
        ----------
        factor : array_like
            Speed relative to nominal (1 = nominal); a 1-D array of ``m`` factors gives
            an ``(m, n)`` result.
        """
        k = np.asarray(factor, dtype=np.float64)
        out: FloatArray = self.fixed_hz + np.multiply.outer(k, self.speed_hz)
        return out

    @classmethod
    def empty(cls) -> ToneSet:
        e = np.empty(0)
        none = strings([])
        return cls(label=none, source=none, kind=none, fixed_hz=e, speed_hz=e, amplitude=e)

    @classmethod
    def explicit(
        cls,
        freq_hz: ArrayLike,
        label: Sequence[str],
        amplitude: ArrayLike | None = None,
        source: str = "tones",
    ) -> ToneSet:
        """Tones given directly by frequency (no speed dependence)."""
        f = np.atleast_1d(np.asarray(freq_hz, dtype=np.float64))
        amp = np.full(f.size, np.nan) if amplitude is None else amplitude
        return cls(
            label=strings(list(label)),
            source=strings([source] * f.size),
            kind=strings(["tone"] * f.size),
            fixed_hz=f,
            speed_hz=np.zeros(f.size),
            amplitude=np.asarray(amp, dtype=np.float64),
        )

    @classmethod
    def concat(cls, parts: Sequence[ToneSet]) -> ToneSet:
        parts = [p for p in parts if len(p)]
        if not parts:
            return cls.empty()
        if len(parts) == 1:
            return parts[0]
        return cls(
            label=np.concatenate([p.label for p in parts]),
            source=np.concatenate([p.source for p in parts]),
            kind=np.concatenate([p.kind for p in parts]),
            fixed_hz=np.concatenate([p.fixed_hz for p in parts]),
            speed_hz=np.concatenate([p.speed_hz for p in parts]),
            amplitude=np.concatenate([p.amplitude for p in parts]),
            family=np.concatenate([p.family for p in parts]),
            harmonic=np.concatenate([p.harmonic for p in parts]),
        )

    def take(self, index: ArrayLike) -> ToneSet:
        """The tones at ``index`` (an integer or boolean array)."""
        i = np.asarray(index)
        return ToneSet(
            label=self.label[i],
            source=self.source[i],
            kind=self.kind[i],
            fixed_hz=self.fixed_hz[i],
            speed_hz=self.speed_hz[i],
            amplitude=self.amplitude[i],
            family=self.family[i],
            harmonic=self.harmonic[i],
        )
