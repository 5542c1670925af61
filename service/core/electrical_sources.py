"""Electrical sources: supply-line harmonics and an inverter's PWM carrier lines.

Line harmonics are fixed in frequency. An inverter's carrier multiples are fixed while
their sidebands at the electrical frequency move with speed; sine-triangle modulation
produces ``m·fc ± n·f1`` only where ``m + n`` is odd [2]_.

References
----------
.. [2] D. G. Holmes and T. A. Lipo, *Pulse Width Modulation for Power Converters:
   Principles and Practice*, IEEE Press/Wiley, 2003, ch. 3 (naturally sampled
   sine-triangle modulation of a phase leg: lines at m·fc ± n·f1 with m + n odd; in
   the line-to-line voltage of a three-phase bridge the triplen sidebands cancel).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from numpy.typing import NDArray

from service.core.checks import check_int, check_positive
from service.core.errors import InputError
from service.core.tones import ToneSet

from .source_base import (
    MAX_HARMONICS,
    MAX_POLE_PAIRS,
    MAX_SIDEBANDS,
    MINUS,
    Expandable,
    as_sequence,
    check_amplitude,
    check_label,
    family_amplitudes,
    settle_amplitudes,
    short_repr,
)

__all__ = [
    "LineHarmonics",
    "PwmCarrier",
    "fundamental_from_shaft",
]

FloatArray = NDArray[np.float64]


def fundamental_from_shaft(speed_hz: float, pole_pairs: int) -> float:
    """Electrical fundamental of a synchronous machine, Hz.

    Parameters
    ----------
    speed_hz : float
        Shaft speed, Hz (> 0).
    pole_pairs : int
        Number of pole pairs (1..1000).

    Returns
    -------
    float
        ``f1 = pole_pairs · speed_hz``, Hz.

    References
    ----------
    Standard relation for a synchronous (e.g. permanent-magnet) machine; for an
    induction machine the slip makes ``f1`` slightly higher than this.
    """
    fr = check_positive(speed_hz, "speed_hz", cut=80)
    p = check_int(
        pole_pairs, "pole_pairs", 1, MAX_POLE_PAIRS, integral_floats=True, one_message=True, cut=80
    )
    return p * fr


@dataclass(frozen=True)
class LineHarmonics(Expandable):
    """Harmonics of the supply (line) frequency.

    Parameters
    ----------
    label : str
        Name, e.g. ``"mains"``.
    line_hz : float, optional
        Line frequency, Hz (> 0). Default 50.
    harmonics : int or tuple of int, optional
        Which harmonics: a tuple of distinct integers in 1..100 (at most 100 entries),
        or an integer N meaning 1..N. Stored as the tuple. Default (1, 2, 3, 5, 7).
    amplitude : float, optional
        Amplitude of the first listed harmonic (normally the fundamental).
    harmonic_amplitudes : tuple of float, optional
        Amplitude of each entry of ``harmonics`` in the same sequence.

    Notes
    -----
    Labels ``"line 3×"``; family ``"harmonics of '<label>'"``. Fixed frequencies
    (they do not move with machine speed).
    """

    kind: ClassVar[str] = "line"

    label: str
    line_hz: float = 50.0
    harmonics: int | tuple[int, ...] = (1, 2, 3, 5, 7)
    amplitude: float | None = None
    harmonic_amplitudes: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", check_label(self.label))
        set_(self, "line_hz", check_positive(self.line_hz, "line_hz", cut=80))
        if isinstance(self.harmonics, int | np.integer) and not isinstance(self.harmonics, bool):
            count = check_int(
                self.harmonics,
                "harmonics",
                1,
                MAX_HARMONICS,
                integral_floats=True,
                one_message=True,
                cut=80,
            )
            harm: tuple[int, ...] = tuple(range(1, count + 1))
        else:
            seq = as_sequence(self.harmonics, "harmonics")
            if not 1 <= len(seq) <= MAX_HARMONICS:
                raise InputError(
                    f"harmonics has {len(seq)} entries; must have between 1 and {MAX_HARMONICS}",
                    field="harmonics",
                    code="out_of_range",
                )
            harm = tuple(
                check_int(
                    v,
                    f"harmonics[{i}]",
                    1,
                    MAX_HARMONICS,
                    integral_floats=True,
                    one_message=True,
                    cut=80,
                )
                for i, v in enumerate(seq)
            )
            if len(set(harm)) != len(harm):
                dup = next(v for v in harm if harm.count(v) > 1)
                raise InputError(
                    f"harmonics lists {dup} more than once", field="harmonics", code="duplicate"
                )
        set_(self, "harmonics", harm)
        settle_amplitudes(self, len(harm))

    def expand(self) -> ToneSet:
        """Line harmonics as tones (fixed frequencies)."""
        harm = self.harmonics
        assert isinstance(harm, tuple)  # normalised in __post_init__
        h = np.asarray(harm, dtype=np.float64)
        return self._make(
            labels=[f"line {k}×" for k in harm],
            fixed_hz=h * self.line_hz,
            speed_hz=np.zeros(h.size),
            amplitude=family_amplitudes(h.size, self.amplitude, self.harmonic_amplitudes),
            family=[f"harmonics of '{self.label}'"] * h.size,
            harmonic=h,
        )


@dataclass(frozen=True)
class PwmCarrier(Expandable):
    """Inverter switching lines: carrier multiples with sidebands at the fundamental.

    Parameters
    ----------
    label : str
        Name, e.g. ``"inverter"``.
    carrier_hz : float
        Switching (carrier) frequency ``fc``, Hz (> 0).
    fundamental_hz : float
        Electrical output frequency ``f1``, Hz (> 0); for a synchronous machine
        ``pole_pairs × shaft speed`` (:func:`fundamental_from_shaft`,
        :meth:`from_shaft`).
    carrier_multiples : int, optional
        Carrier multiples m = 1..carrier_multiples (1..100). Default 3.
    sidebands : int, optional
        Sideband orders n = 0..sidebands (0..50). Default 4.
    line_to_line : bool, optional
        False (default): phase-leg (pole) voltage, lines where m + n is odd. True:
        line-to-line voltage of a three-phase bridge, where in addition the triplen
        sidebands (n a multiple of 3, including the carrier lines themselves, n = 0)
        cancel.
    amplitude : float, optional
        Amplitude of the main line of the first carrier group: the carrier line itself
        for a phase leg, each of the pair fc ± 2·f1 for line-to-line.

    Notes
    -----
    Naturally sampled sine-triangle modulation puts lines at ``m·fc ± n·f1`` only where
    ``m + n`` is odd [2]_; both the upper and the lower side are kept, lines at or below
    0 Hz are dropped. ``m·fc`` is the fixed part of each frequency and ``± n·f1`` the
    speed-proportional part (with its sign), so a speed change moves the sidebands and
    leaves the carrier multiples in place.

    Labels ``"carrier 1×"``, ``"carrier 2× + 1·f1"``, ``"carrier 1× − 2·f1"``. The pure
    carrier multiples (n = 0, odd m) form the family ``"carrier multiples of '<label>'"``
    with harmonic = m; sidebands carry no family (``""``, harmonic NaN) because they are
    not integer multiples of one fundamental.

    References
    ----------
    .. [2] Holmes and Lipo, *Pulse Width Modulation for Power Converters*, 2003, ch. 3.
    """

    kind: ClassVar[str] = "pwm"

    label: str
    carrier_hz: float
    fundamental_hz: float
    carrier_multiples: int = 3
    sidebands: int = 4
    line_to_line: bool = False
    amplitude: float | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", check_label(self.label))
        set_(self, "carrier_hz", check_positive(self.carrier_hz, "carrier_hz", cut=80))
        set_(self, "fundamental_hz", check_positive(self.fundamental_hz, "fundamental_hz", cut=80))
        set_(
            self,
            "carrier_multiples",
            check_int(
                self.carrier_multiples,
                "carrier_multiples",
                1,
                MAX_HARMONICS,
                integral_floats=True,
                one_message=True,
                cut=80,
            ),
        )
        set_(
            self,
            "sidebands",
            check_int(
                self.sidebands,
                "sidebands",
                0,
                MAX_SIDEBANDS,
                integral_floats=True,
                one_message=True,
                cut=80,
            ),
        )
        if not isinstance(self.line_to_line, bool | np.bool_):
            raise InputError(
                f"line_to_line={short_repr(self.line_to_line)} must be true or false",
                field="line_to_line",
                code="bad_type",
                value=self.line_to_line,
            )
        set_(self, "line_to_line", bool(self.line_to_line))
        set_(self, "amplitude", check_amplitude(self.amplitude))

    @classmethod
    def from_shaft(
        cls, label: str, carrier_hz: float, speed_hz: float, pole_pairs: int, **kwargs: Any
    ) -> PwmCarrier:
        """Build with ``fundamental_hz = pole_pairs × speed_hz`` (shaft speed, Hz)."""
        return cls(
            label=label,
            carrier_hz=carrier_hz,
            fundamental_hz=fundamental_from_shaft(speed_hz, pole_pairs),
            **kwargs,
        )

    def expand(self) -> ToneSet:
        """Carrier multiples and sidebands as tones."""
        m = np.arange(1, self.carrier_multiples + 1)[:, None]
        n = np.arange(0, self.sidebands + 1)[None, :]
        present = (m + n) % 2 == 1
        if self.line_to_line:
            present &= n % 3 != 0
        mm, nn = np.broadcast_arrays(m, n)
        mm, nn = mm[present], nn[present]
        # Both sides for n > 0, one line for n = 0.
        side = nn > 0
        m_all = np.concatenate([mm, mm[side]])
        n_all = np.concatenate([nn, -nn[side]])
        order = np.lexsort((n_all, m_all))
        m_all, n_all = m_all[order], n_all[order]
        fixed = m_all * self.carrier_hz
        speed = n_all * self.fundamental_hz
        keep = fixed + speed > 0
        m_all, n_all, fixed, speed = m_all[keep], n_all[keep], fixed[keep], speed[keep]

        carrier = n_all == 0
        amp = np.full(m_all.size, np.nan)
        if self.amplitude is not None:
            main_n = 2 if self.line_to_line else 0
            amp[(m_all == 1) & (np.abs(n_all) == main_n)] = self.amplitude
        labels = [
            f"carrier {a}×" if b == 0 else f"carrier {a}× {'+' if b > 0 else MINUS} {abs(b)}·f1"
            for a, b in zip(m_all.tolist(), n_all.tolist(), strict=True)
        ]
        fam = f"carrier multiples of '{self.label}'"
        return self._make(
            labels=labels,
            fixed_hz=fixed,
            speed_hz=speed,
            amplitude=amp,
            family=[fam if c else "" for c in carrier.tolist()],
            harmonic=np.where(carrier, m_all, np.nan),
        )
