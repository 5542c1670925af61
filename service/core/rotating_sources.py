"""Rotating-machinery sources whose tones move with shaft speed: shaft orders, gear
mesh (with harmonics and ± shaft-speed sidebands) and blade or vane pass.

Every frequency here is speed-proportional, so it goes into ``speed_hz``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from numpy.typing import NDArray

from service.core.checks import check_int, check_positive
from service.core.errors import InputError
from service.core.tones import ToneSet

from .source_base import (
    MAX_BLADES,
    MAX_HARMONICS,
    MAX_ORDER,
    MAX_ORDERS,
    MAX_SIDEBANDS,
    MAX_TEETH,
    MINUS,
    Expandable,
    as_sequence,
    check_label,
    family_amplitudes,
    fmt_number,
    settle_amplitudes,
)

__all__ = [
    "BladePass",
    "GearMesh",
    "Shaft",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class Shaft(Expandable):
    """Orders of a rotating shaft.

    Parameters
    ----------
    label : str
        Name of the shaft, e.g. ``"motor shaft"``.
    speed_hz : float
        Shaft speed, Hz (> 0); see :func:`speed_to_hz`.
    orders : tuple of float, optional
        Orders to output (multiples of shaft speed), integer or fractional (0.5, 1.5),
        each in (0, 1000], at most 200, no repeats. Default (1, 2, 3).
    amplitude : float, optional
        Amplitude of the 1× line (of the first listed order if 1 is not listed).
    harmonic_amplitudes : tuple of float, optional
        Amplitude of each entry of ``orders`` in the same sequence (shorter: the rest
        unknown). Give this or ``amplitude``, not both.

    Notes
    -----
    Tone labels ``"1×"``, ``"0.5×"``; family ``"orders of '<label>'"`` with
    ``harmonic`` = the order (fractional orders carry fractional harmonic numbers).
    """

    kind: ClassVar[str] = "shaft"

    label: str
    speed_hz: float
    orders: tuple[float, ...] = (1, 2, 3)
    amplitude: float | None = None
    harmonic_amplitudes: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", check_label(self.label))
        set_(self, "speed_hz", check_positive(self.speed_hz, "speed_hz", cut=80))
        seq = as_sequence(self.orders, "orders")
        if not 1 <= len(seq) <= MAX_ORDERS:
            raise InputError(
                f"orders has {len(seq)} entries; must have between 1 and {MAX_ORDERS}",
                field="orders",
                code="out_of_range",
            )
        orders = tuple(
            check_positive(o, f"orders[{i}]", MAX_ORDER, upper_words="at most", cut=80)
            for i, o in enumerate(seq)
        )
        if len(set(orders)) != len(orders):
            dup = next(o for o in orders if orders.count(o) > 1)
            raise InputError(
                f"orders lists {fmt_number(dup)} more than once", field="orders", code="duplicate"
            )
        set_(self, "orders", orders)
        settle_amplitudes(self, len(orders))

    def expand(self) -> ToneSet:
        """The shaft's orders as tones (all speed-proportional)."""
        o = np.asarray(self.orders, dtype=np.float64)
        amp = np.full(o.size, np.nan)
        if self.harmonic_amplitudes is not None:
            amp[: len(self.harmonic_amplitudes)] = self.harmonic_amplitudes
        elif self.amplitude is not None:
            main = np.flatnonzero(o == 1.0)
            amp[int(main[0]) if main.size else 0] = self.amplitude
        return self._make(
            labels=[f"{fmt_number(x)}×" for x in self.orders],
            fixed_hz=np.zeros(o.size),
            speed_hz=o * self.speed_hz,
            amplitude=amp,
            family=[f"orders of '{self.label}'"] * o.size,
            harmonic=o,
        )


@dataclass(frozen=True)
class GearMesh(Expandable):
    """Gear mesh frequency with harmonics and shaft-speed sidebands.

    Parameters
    ----------
    label : str
        Name of the mesh, e.g. ``"first stage 17/53"``.
    speed_hz : float
        Speed of the shaft carrying the gear with ``teeth`` teeth, Hz (> 0).
    teeth : int
        Teeth on that gear (1..10000).
    harmonics : int, optional
        Mesh harmonics h = 1..harmonics (1..100). Default 3.
    sidebands : int, optional
        Sidebands k = 1..sidebands each side of every mesh harmonic at ± k·speed_hz
        (0..50). Default 2.
    mating_speed_hz : float, optional
        Speed of the mating shaft, Hz (> 0). When given, each mesh harmonic also gets
        ± k·mating_speed_hz sidebands.
    amplitude : float, optional
        Amplitude of the mesh fundamental (GMF 1×).
    harmonic_amplitudes : tuple of float, optional
        Amplitude of GMF 1×, 2×, ... (at most ``harmonics`` entries). Give this or
        ``amplitude``, not both. Sideband amplitudes are unknown (NaN).

    Notes
    -----
    Common practice: GMF = teeth × shaft speed. Lines at h·GMF ± k·speed; those at or
    below 0 Hz are dropped. Labels ``"GMF 2×"``, ``"GMF 1× + 1×shaft"``,
    ``"GMF 1× − 2×shaft"``, ``"GMF 1× + 1×mating shaft"``. Mesh harmonics form the family
    ``"gear mesh of '<label>'"``; sidebands carry no family (``""``, harmonic NaN). All
    lines are speed-proportional (the mating shaft turns with the same machine).
    """

    kind: ClassVar[str] = "gear_mesh"

    label: str
    speed_hz: float
    teeth: int
    harmonics: int = 3
    sidebands: int = 2
    mating_speed_hz: float | None = None
    amplitude: float | None = None
    harmonic_amplitudes: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", check_label(self.label))
        set_(self, "speed_hz", check_positive(self.speed_hz, "speed_hz", cut=80))
        set_(
            self,
            "teeth",
            check_int(
                self.teeth, "teeth", 1, MAX_TEETH, integral_floats=True, one_message=True, cut=80
            ),
        )
        set_(
            self,
            "harmonics",
            check_int(
                self.harmonics,
                "harmonics",
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
        if self.mating_speed_hz is not None:
            set_(
                self,
                "mating_speed_hz",
                check_positive(self.mating_speed_hz, "mating_speed_hz", cut=80),
            )
        settle_amplitudes(self, self.harmonics)

    @property
    def mesh_hz(self) -> float:
        """Gear mesh frequency, Hz (teeth × shaft speed)."""
        return self.teeth * self.speed_hz

    def expand(self) -> ToneSet:
        """Mesh harmonics and their sidebands as tones (all speed-proportional)."""
        h = np.arange(1, self.harmonics + 1)
        k = np.arange(-self.sidebands, self.sidebands + 1)
        hh = np.repeat(h, k.size)
        kk = np.tile(k, h.size)
        freq = hh * self.mesh_hz + kk * self.speed_hz
        mate = np.zeros(hh.size, dtype=bool)
        if self.mating_speed_hz is not None and self.sidebands:
            km = k[k != 0]
            hm = np.repeat(h, km.size)
            kmm = np.tile(km, h.size)
            hh = np.concatenate([hh, hm])
            kk = np.concatenate([kk, kmm])
            freq = np.concatenate([freq, hm * self.mesh_hz + kmm * self.mating_speed_hz])
            mate = np.concatenate([mate, np.ones(hm.size, dtype=bool)])
        keep = freq > 0
        hh, kk, freq, mate = hh[keep], kk[keep], freq[keep], mate[keep]
        order = np.lexsort((freq, hh))
        hh, kk, freq, mate = hh[order], kk[order], freq[order], mate[order]

        main = kk == 0
        amp = np.full(hh.size, np.nan)
        amp[main] = family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes)[
            hh[main] - 1
        ]
        shaft_word = np.where(mate, "×mating shaft", "×shaft")
        labels = [
            f"GMF {h_}×" if k_ == 0 else f"GMF {h_}× {'+' if k_ > 0 else MINUS} {abs(k_)}{w}"
            for h_, k_, w in zip(hh.tolist(), kk.tolist(), shaft_word.tolist(), strict=True)
        ]
        fam = f"gear mesh of '{self.label}'"
        return self._make(
            labels=labels,
            fixed_hz=np.zeros(freq.size),
            speed_hz=freq,
            amplitude=amp,
            family=[fam if m else "" for m in main.tolist()],
            harmonic=np.where(main, hh, np.nan),
        )


@dataclass(frozen=True)
class BladePass(Expandable):
    """Blade (or vane) pass frequency with harmonics.

    Parameters
    ----------
    label : str
        Name of the rotor, e.g. ``"cooling fan"``.
    speed_hz : float
        Rotor speed, Hz (> 0).
    blades : int
        Number of blades or vanes (1..1000).
    harmonics : int, optional
        Harmonics h = 1..harmonics (1..100). Default 3.
    amplitude : float, optional
        Amplitude of BPF 1×.
    harmonic_amplitudes : tuple of float, optional
        Amplitude of BPF 1×, 2×, ... (at most ``harmonics`` entries).

    Notes
    -----
    Common practice: BPF = blades × rotor speed. Labels ``"BPF 2×"``; family
    ``"blade pass of '<label>'"``. Speed-proportional.
    """

    kind: ClassVar[str] = "blade_pass"

    label: str
    speed_hz: float
    blades: int
    harmonics: int = 3
    amplitude: float | None = None
    harmonic_amplitudes: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", check_label(self.label))
        set_(self, "speed_hz", check_positive(self.speed_hz, "speed_hz", cut=80))
        set_(
            self,
            "blades",
            check_int(
                self.blades, "blades", 1, MAX_BLADES, integral_floats=True, one_message=True, cut=80
            ),
        )
        set_(
            self,
            "harmonics",
            check_int(
                self.harmonics,
                "harmonics",
                1,
                MAX_HARMONICS,
                integral_floats=True,
                one_message=True,
                cut=80,
            ),
        )
        settle_amplitudes(self, self.harmonics)

    def expand(self) -> ToneSet:
        """Blade pass harmonics as tones (speed-proportional)."""
        h = np.arange(1, self.harmonics + 1)
        return self._make(
            labels=[f"BPF {k}×" for k in h.tolist()],
            fixed_hz=np.zeros(h.size),
            speed_hz=h * (self.blades * self.speed_hz),
            amplitude=family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes),
            family=[f"blade pass of '{self.label}'"] * h.size,
            harmonic=h,
        )
