"""Machine descriptions expanded into labelled tones.

Each source is a small frozen dataclass (validated on construction) whose ``expand()``
returns a :class:`~service.core.tones.ToneSet`. Every tone keeps the label of the
source it came from, so an answer can say "BPFI 3× of bearing 'input shaft bearing'".

Speeds are in Hz inside the core (:func:`speed_to_hz` converts rpm and cpm). The part
of a tone's frequency that moves with machine speed goes into ``speed_hz`` and the rest
into ``fixed_hz``: shaft orders, gear mesh, bearing tones and blade pass are entirely
speed-proportional; line harmonics, resonances and explicit tones are fixed; an
inverter's carrier multiples are fixed while their sidebands at the electrical
frequency move with speed.

Amplitudes are linear, in the user's unit (for example m/s² or V); NaN where unknown.

References
----------
.. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   *Mechanical Systems and Signal Processing* 25 (2011) 485–520, sec. 2.1 (defect
   frequencies FTF, BPFO, BPFI, BSF).
.. [2] D. G. Holmes and T. A. Lipo, *Pulse Width Modulation for Power Converters:
   Principles and Practice*, IEEE Press/Wiley, 2003, ch. 3 (naturally sampled
   sine-triangle modulation of a phase leg: lines at m·fc ± n·f1 with m + n odd; in
   the line-to-line voltage of a three-phase bridge the triplen sidebands cancel).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, ClassVar, TypeAlias

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.core.tones import ToneSet

from .checks import check_int, check_positive
from .errors import InputError

__all__ = [
    "BEARING_DEFECTS",
    "SOURCE_TYPES",
    "Bearing",
    "BladePass",
    "ExplicitTones",
    "GearMesh",
    "LineHarmonics",
    "PwmCarrier",
    "Resonance",
    "Shaft",
    "Source",
    "bearing_multiples",
    "expand_sources",
    "fundamental_from_shaft",
    "source_from_dict",
    "source_to_dict",
    "speed_to_hz",
]

FloatArray = NDArray[np.float64]

MAX_HARMONICS = 100
MAX_SIDEBANDS = 50
MAX_ORDERS = 200
MAX_ORDER = 1000.0
MAX_EXPLICIT_TONES = 100_000
MAX_TONES_PER_SOURCE = 100_000
MAX_TEETH = 10_000
MAX_BLADES = 1_000
MAX_ELEMENTS = 1_000
MAX_POLE_PAIRS = 1_000
MAX_LABEL_CHARS = 200

#: Bearing defect families in output order.
BEARING_DEFECTS: tuple[str, ...] = ("FTF", "BPFO", "BPFI", "BSF")

_SPEED_UNITS: dict[str, float] = {"hz": 1.0, "rpm": 1.0 / 60.0, "cpm": 1.0 / 60.0}

_MINUS = "\u2212"  # a real minus sign in labels: "carrier 1× − 2·f1"


# --------------------------------------------------------------------------- checks


def _r(value: object) -> str:
    """Short repr for messages: numpy scalars as plain numbers, long values cut."""
    if isinstance(value, np.generic):
        value = value.item()
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _check_label(value: object, name: str = "label") -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(
            f"{name}={_r(value)} must be a non-empty string",
            field=name,
            code="bad_type",
            value=value,
        )
    if len(value) > MAX_LABEL_CHARS:
        raise InputError(
            f"{name} has {len(value)} characters; must be at most {MAX_LABEL_CHARS}",
            field=name,
            code="above_limit",
        )
    return value


def _as_float(value: object, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise InputError(
            f"{name}={_r(value)} must be a number", field=name, code="bad_type", value=value
        )
    return float(value)


def _check_amplitude(value: object, name: str = "amplitude") -> float | None:
    """A linear amplitude >= 0, or None (unknown; NaN also means unknown)."""
    if value is None:
        return None
    x = _as_float(value, name)
    if math.isnan(x):
        return None
    if not math.isfinite(x) or x < 0:
        raise InputError(
            f"{name}={_r(value)} must be a finite number >= 0 (or omitted)",
            field=name,
            code="below_limit",
            value=value,
        )
    return x


def _check_amplitudes(
    values: object, name: str, max_len: int, exact: bool = False
) -> tuple[float, ...] | None:
    """A tuple of linear amplitudes >= 0 (NaN = unknown), or None."""
    if values is None:
        return None
    seq = _as_sequence(values, name)
    if exact and len(seq) != max_len:
        raise InputError(
            f"{name} has {len(seq)} entries; expected {max_len}",
            field=name,
            code="mismatched_lengths",
        )
    if len(seq) > max_len:
        raise InputError(
            f"{name} has {len(seq)} entries; must be at most {max_len}",
            field=name,
            code="above_limit",
        )
    out = tuple(_as_float(v, f"{name}[{i}]") for i, v in enumerate(seq))
    arr = np.asarray(out, dtype=np.float64)
    bad = np.flatnonzero(np.isinf(arr) | (arr < 0))
    if bad.size:
        i = int(bad[0])
        raise InputError(
            f"{name}[{i}]={out[i]!r} must be a finite number >= 0 (or NaN)",
            field=f"{name}[{i}]",
            code="below_limit",
            value=out[i],
        )
    return out


def _check_one_amplitude_form(amplitude: float | None, harmonic_amplitudes: object) -> None:
    if amplitude is not None and harmonic_amplitudes is not None:
        raise InputError(
            "give either amplitude (of the main line) or harmonic_amplitudes (one per "
            "line of the family), not both",
            field="harmonic_amplitudes",
            code="conflict",
        )


def _as_sequence(values: object, name: str) -> list[Any]:
    if isinstance(values, str | bytes | Mapping) or not isinstance(values, Sequence | np.ndarray):
        raise InputError(
            f"{name}={_r(values)} must be a list of values",
            field=name,
            code="bad_type",
            value=values,
        )
    return list(values)


def _fmt(x: float) -> str:
    """A compact number for labels: 1 → "1", 0.5 → "0.5", 1/3 → "0.333333"."""
    return format(float(x), ".6g")


# ---------------------------------------------------------------------- conversions


def speed_to_hz(value: float, unit: str) -> float:
    """Convert a rotational speed to Hz (revolutions per second).

    Parameters
    ----------
    value : float
        Speed in ``unit``, >= 0.
    unit : {"rpm", "hz", "cpm"}
        Revolutions per minute, Hz, or cycles per minute (for a shaft, cpm = rpm).
        Case-insensitive.

    Returns
    -------
    float
        Speed, Hz.
    """
    key = unit.lower() if isinstance(unit, str) else unit
    if key not in _SPEED_UNITS:
        raise InputError(
            f"unit={unit!r} must be one of {sorted(_SPEED_UNITS)}",
            field="unit",
            code="not_allowed",
            value=unit,
        )
    x = _as_float(value, "value")
    if not math.isfinite(x) or x < 0:
        raise InputError(
            f"value={_r(value)} must be a finite number >= 0",
            field="value",
            code="below_limit",
            value=value,
        )
    return x * _SPEED_UNITS[key]


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


def bearing_multiples(
    n_elements: int,
    element_diameter: float,
    pitch_diameter: float,
    contact_angle_deg: float = 0.0,
) -> dict[str, float]:
    """Bearing defect frequencies as multiples of the shaft speed.

    Outer race stationary, inner race turning with the shaft.

    Parameters
    ----------
    n_elements : int
        Number of rolling elements ``n`` (3..1000).
    element_diameter : float
        Rolling-element diameter ``d`` (any length unit, the same as ``pitch_diameter``).
    pitch_diameter : float
        Pitch diameter ``D`` (same length unit), > ``d``.
    contact_angle_deg : float, optional
        Contact angle ``φ``, degrees, 0 <= φ < 90.

    Returns
    -------
    dict
        ``{"FTF": ..., "BPFO": ..., "BPFI": ..., "BSF": ...}``, each a multiple of the
        shaft speed ``fr`` (dimensionless):

        - FTF  = ½·(1 − d/D·cos φ)           (cage)
        - BPFO = n/2·(1 − d/D·cos φ)         (outer race)
        - BPFI = n/2·(1 + d/D·cos φ)         (inner race)
        - BSF  = D/(2d)·(1 − (d/D·cos φ)²)   (ball spin, relative to the cage)

    Notes
    -----
    BSF here is the spin frequency of a rolling element. A defect on an element strikes
    both races once per spin revolution, so its impacts repeat at 2×BSF (some texts and
    tables quote that value as "BSF"); :class:`Bearing` outputs it as the family's
    "BSF 2×" member.

    References
    ----------
    .. [1] Randall and Antoni, MSSP 25 (2011) 485–520, sec. 2.1, eqs. (1)–(4).
    """
    n, d, big_d, phi = _check_bearing(
        n_elements, element_diameter, pitch_diameter, contact_angle_deg
    )
    r = d / big_d * math.cos(math.radians(phi))
    return {
        "FTF": 0.5 * (1.0 - r),
        "BPFO": 0.5 * n * (1.0 - r),
        "BPFI": 0.5 * n * (1.0 + r),
        "BSF": big_d / (2.0 * d) * (1.0 - r * r),
    }


def _check_bearing(
    n_elements: object, element_diameter: object, pitch_diameter: object, angle: object
) -> tuple[int, float, float, float]:
    n = check_int(
        n_elements, "n_elements", 3, MAX_ELEMENTS, integral_floats=True, one_message=True, cut=80
    )
    d = check_positive(element_diameter, "element_diameter", cut=80)
    big_d = check_positive(pitch_diameter, "pitch_diameter", cut=80)
    if d >= big_d:
        raise InputError(
            f"element_diameter={_r(element_diameter)} must be less than "
            f"pitch_diameter={_r(pitch_diameter)}",
            field="element_diameter",
            code="above_limit",
            value=element_diameter,
        )
    phi = _as_float(angle, "contact_angle_deg")
    if not math.isfinite(phi) or not 0.0 <= phi < 90.0:
        raise InputError(
            f"contact_angle_deg={_r(angle)} must be >= 0 and < 90 degrees",
            field="contact_angle_deg",
            code="below_limit",
            value=angle,
        )
    return n, d, big_d, phi


# -------------------------------------------------------------------------- sources


class _Expandable:
    """Shared plumbing: turn arrays of one source into a ToneSet."""

    kind: ClassVar[str]
    label: str

    def _make(
        self,
        labels: Sequence[str],
        fixed_hz: ArrayLike,
        speed_hz: ArrayLike,
        amplitude: ArrayLike,
        family: Sequence[str],
        harmonic: ArrayLike,
    ) -> ToneSet:
        n = len(labels)
        if n > MAX_TONES_PER_SOURCE:
            raise InputError(
                f"source {self.label!r} expands to {n} tones; must be at most "
                f"{MAX_TONES_PER_SOURCE}",
                field=None,
                code="too_large",
            )
        return ToneSet(
            label=_objects(labels),
            source=_objects([self.label] * n),
            kind=_objects([self.kind] * n),
            fixed_hz=np.asarray(fixed_hz, dtype=np.float64),
            speed_hz=np.asarray(speed_hz, dtype=np.float64),
            amplitude=np.asarray(amplitude, dtype=np.float64),
            family=_objects(family),
            harmonic=np.asarray(harmonic, dtype=np.float64),
        )


def _objects(values: Sequence[str]) -> NDArray[np.object_]:
    out = np.empty(len(values), dtype=object)
    out[:] = list(values)
    return out


def _family_amplitudes(
    count: int, amplitude: float | None, harmonic_amplitudes: tuple[float, ...] | None
) -> FloatArray:
    """Amplitude per harmonic 1..count: the given list padded with NaN, or the main line."""
    out = np.full(count, np.nan)
    if harmonic_amplitudes is not None:
        out[: len(harmonic_amplitudes)] = harmonic_amplitudes
    elif amplitude is not None:
        out[0] = amplitude
    return out


@dataclass(frozen=True)
class Shaft(_Expandable):
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
        set_(self, "label", _check_label(self.label))
        set_(self, "speed_hz", check_positive(self.speed_hz, "speed_hz", cut=80))
        seq = _as_sequence(self.orders, "orders")
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
                f"orders lists {_fmt(dup)} more than once", field="orders", code="duplicate"
            )
        set_(self, "orders", orders)
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        _check_one_amplitude_form(self.amplitude, self.harmonic_amplitudes)
        set_(
            self,
            "harmonic_amplitudes",
            _check_amplitudes(self.harmonic_amplitudes, "harmonic_amplitudes", len(orders)),
        )

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
            labels=[f"{_fmt(x)}×" for x in self.orders],
            fixed_hz=np.zeros(o.size),
            speed_hz=o * self.speed_hz,
            amplitude=amp,
            family=[f"orders of '{self.label}'"] * o.size,
            harmonic=o,
        )


@dataclass(frozen=True)
class GearMesh(_Expandable):
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
        set_(self, "label", _check_label(self.label))
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
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        _check_one_amplitude_form(self.amplitude, self.harmonic_amplitudes)
        set_(
            self,
            "harmonic_amplitudes",
            _check_amplitudes(self.harmonic_amplitudes, "harmonic_amplitudes", self.harmonics),
        )

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
        amp[main] = _family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes)[
            hh[main] - 1
        ]
        shaft_word = np.where(mate, "×mating shaft", "×shaft")
        labels = [
            f"GMF {h_}×" if k_ == 0 else f"GMF {h_}× {'+' if k_ > 0 else _MINUS} {abs(k_)}{w}"
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
class Bearing(_Expandable):
    """Rolling-element bearing defect frequencies with harmonics.

    Parameters
    ----------
    label : str
        Name of the bearing, e.g. ``"input shaft bearing"``.
    speed_hz : float
        Speed of the inner race (the shaft), Hz (> 0); outer race stationary.
    n_elements : int
        Number of balls or rollers (3..1000).
    element_diameter : float
        Ball/roller diameter ``d`` (any length unit, the same as ``pitch_diameter``).
    pitch_diameter : float
        Pitch diameter ``D`` (same unit), > ``d``.
    contact_angle_deg : float, optional
        Contact angle, degrees, 0 <= angle < 90. Default 0.
    harmonics : int, optional
        Harmonics h = 1..harmonics of each defect frequency (1..100). Default 3.
    defects : tuple of str, optional
        Which families to output, any of ``"FTF"``, ``"BPFO"``, ``"BPFI"``, ``"BSF"``
        (case-insensitive). Default all four.
    amplitude : float, optional
        Amplitude of the fundamental (1×) of each selected defect family.
    harmonic_amplitudes : tuple of float, optional
        Amplitude of harmonics 1×, 2×, ... applied to each selected family (at most
        ``harmonics`` entries). Give this or ``amplitude``, not both.

    Notes
    -----
    Frequencies from :func:`bearing_multiples` [1]_. Labels ``"BPFI 3×"``; families
    ``"BPFI of '<label>'"`` etc. "BSF" is the ball spin frequency; a defect on a rolling
    element repeats at twice that, which is the "BSF 2×" line (present when
    ``harmonics >= 2``). All lines are speed-proportional.

    References
    ----------
    .. [1] Randall and Antoni, MSSP 25 (2011) 485–520, sec. 2.1.
    """

    kind: ClassVar[str] = "bearing"

    label: str
    speed_hz: float
    n_elements: int
    element_diameter: float
    pitch_diameter: float
    contact_angle_deg: float = 0.0
    harmonics: int = 3
    defects: tuple[str, ...] = BEARING_DEFECTS
    amplitude: float | None = None
    harmonic_amplitudes: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", _check_label(self.label))
        set_(self, "speed_hz", check_positive(self.speed_hz, "speed_hz", cut=80))
        n, d, big_d, phi = _check_bearing(
            self.n_elements, self.element_diameter, self.pitch_diameter, self.contact_angle_deg
        )
        set_(self, "n_elements", n)
        set_(self, "element_diameter", d)
        set_(self, "pitch_diameter", big_d)
        set_(self, "contact_angle_deg", phi)
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
        seq = _as_sequence(self.defects, "defects")
        wanted = [str(x).upper() if isinstance(x, str) else x for x in seq]
        for i, x in enumerate(wanted):
            if x not in BEARING_DEFECTS:
                raise InputError(
                    f"defects[{i}]={_r(seq[i])} must be one of {list(BEARING_DEFECTS)}",
                    field=f"defects[{i}]",
                    code="not_allowed",
                    value=seq[i],
                )
        if not wanted or len(set(wanted)) != len(wanted):
            raise InputError(
                f"defects={_r(seq)} must list each of {list(BEARING_DEFECTS)} at most once, "
                "and at least one",
                field="defects",
                code="duplicate",
                value=seq,
            )
        set_(self, "defects", tuple(x for x in BEARING_DEFECTS if x in wanted))
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        _check_one_amplitude_form(self.amplitude, self.harmonic_amplitudes)
        set_(
            self,
            "harmonic_amplitudes",
            _check_amplitudes(self.harmonic_amplitudes, "harmonic_amplitudes", self.harmonics),
        )

    def multiples(self) -> dict[str, float]:
        """FTF, BPFO, BPFI, BSF as multiples of the shaft speed (see bearing_multiples)."""
        return bearing_multiples(
            self.n_elements, self.element_diameter, self.pitch_diameter, self.contact_angle_deg
        )

    def expand(self) -> ToneSet:
        """Defect frequencies and harmonics as tones (all speed-proportional)."""
        mult = self.multiples()
        names = np.asarray(self.defects, dtype=object)
        base = np.asarray([mult[x] for x in self.defects], dtype=np.float64)
        h = np.arange(1, self.harmonics + 1)
        freq = (base[:, None] * h[None, :] * self.speed_hz).ravel()
        nn = np.repeat(names, h.size)
        hh = np.tile(h, names.size)
        amp = np.tile(
            _family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes),
            names.size,
        )
        return self._make(
            labels=[f"{x} {k}×" for x, k in zip(nn.tolist(), hh.tolist(), strict=True)],
            fixed_hz=np.zeros(freq.size),
            speed_hz=freq,
            amplitude=amp,
            family=[f"{x} of '{self.label}'" for x in nn.tolist()],
            harmonic=hh,
        )


@dataclass(frozen=True)
class BladePass(_Expandable):
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
        set_(self, "label", _check_label(self.label))
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
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        _check_one_amplitude_form(self.amplitude, self.harmonic_amplitudes)
        set_(
            self,
            "harmonic_amplitudes",
            _check_amplitudes(self.harmonic_amplitudes, "harmonic_amplitudes", self.harmonics),
        )

    def expand(self) -> ToneSet:
        """Blade pass harmonics as tones (speed-proportional)."""
        h = np.arange(1, self.harmonics + 1)
        return self._make(
            labels=[f"BPF {k}×" for k in h.tolist()],
            fixed_hz=np.zeros(h.size),
            speed_hz=h * (self.blades * self.speed_hz),
            amplitude=_family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes),
            family=[f"blade pass of '{self.label}'"] * h.size,
            harmonic=h,
        )


@dataclass(frozen=True)
class LineHarmonics(_Expandable):
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
        set_(self, "label", _check_label(self.label))
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
            seq = _as_sequence(self.harmonics, "harmonics")
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
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        _check_one_amplitude_form(self.amplitude, self.harmonic_amplitudes)
        set_(
            self,
            "harmonic_amplitudes",
            _check_amplitudes(self.harmonic_amplitudes, "harmonic_amplitudes", len(harm)),
        )

    def expand(self) -> ToneSet:
        """Line harmonics as tones (fixed frequencies)."""
        harm = self.harmonics
        assert isinstance(harm, tuple)  # normalised in __post_init__
        h = np.asarray(harm, dtype=np.float64)
        return self._make(
            labels=[f"line {k}×" for k in harm],
            fixed_hz=h * self.line_hz,
            speed_hz=np.zeros(h.size),
            amplitude=_family_amplitudes(h.size, self.amplitude, self.harmonic_amplitudes),
            family=[f"harmonics of '{self.label}'"] * h.size,
            harmonic=h,
        )


@dataclass(frozen=True)
class PwmCarrier(_Expandable):
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
        set_(self, "label", _check_label(self.label))
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
                f"line_to_line={_r(self.line_to_line)} must be true or false",
                field="line_to_line",
                code="bad_type",
                value=self.line_to_line,
            )
        set_(self, "line_to_line", bool(self.line_to_line))
        set_(self, "amplitude", _check_amplitude(self.amplitude))

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
            f"carrier {a}×" if b == 0 else f"carrier {a}× {'+' if b > 0 else _MINUS} {abs(b)}·f1"
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


@dataclass(frozen=True)
class Resonance(_Expandable):
    """A fixed tone, e.g. a sensor's mounted resonance excited by broadband energy.

    Parameters
    ----------
    label : str
        Name, e.g. ``"accelerometer mounted resonance"``.
    freq_hz : float
        Frequency, Hz (> 0).
    amplitude : float, optional
        Amplitude of the line.

    Notes
    -----
    One tone labelled ``"resonance"``, no family, fixed frequency.
    """

    kind: ClassVar[str] = "resonance"

    label: str
    freq_hz: float
    amplitude: float | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", _check_label(self.label))
        set_(self, "freq_hz", check_positive(self.freq_hz, "freq_hz", cut=80))
        set_(self, "amplitude", _check_amplitude(self.amplitude))

    def expand(self) -> ToneSet:
        """The resonance as one fixed tone."""
        return self._make(
            labels=["resonance"],
            fixed_hz=[self.freq_hz],
            speed_hz=[0.0],
            amplitude=[np.nan if self.amplitude is None else self.amplitude],
            family=[""],
            harmonic=[np.nan],
        )


@dataclass(frozen=True)
class ExplicitTones(_Expandable):
    """Tones given directly by frequency.

    Parameters
    ----------
    label : str
        Name of the group, e.g. ``"known test-cell lines"``.
    freq_hz : tuple of float
        Frequencies, Hz (each > 0), 1..100000 of them.
    tone_labels : tuple of str, optional
        One label per tone; default ``"<f> Hz"``.
    amplitudes : tuple of float, optional
        One amplitude per tone (NaN = unknown).
    amplitude : float, optional
        One amplitude for every tone. Give this or ``amplitudes``, not both.
    scales_with_speed : bool, optional
        False (default): fixed frequencies. True: the frequencies were read at the
        nominal speed and move in proportion with it (kept in ``speed_hz``).

    Notes
    -----
    Kind ``"tone"``, no family.
    """

    kind: ClassVar[str] = "tone"

    label: str
    freq_hz: tuple[float, ...]
    tone_labels: tuple[str, ...] | None = None
    amplitudes: tuple[float, ...] | None = None
    amplitude: float | None = None
    scales_with_speed: bool = False

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "label", _check_label(self.label))
        if isinstance(self.freq_hz, np.ndarray):
            f = np.asarray(self.freq_hz, dtype=np.float64).ravel()
        else:
            seq = _as_sequence(self.freq_hz, "freq_hz")
            f = np.asarray([_as_float(v, f"freq_hz[{i}]") for i, v in enumerate(seq)])
        if not 1 <= f.size <= MAX_EXPLICIT_TONES:
            raise InputError(
                f"freq_hz has {f.size} entries; must have between 1 and {MAX_EXPLICIT_TONES}",
                field="freq_hz",
                code="out_of_range",
            )
        bad = np.flatnonzero(~np.isfinite(f) | (f <= 0))
        if bad.size:
            i = int(bad[0])
            raise InputError(
                f"freq_hz[{i}]={_r(f[i])} must be a finite number > 0",
                field=f"freq_hz[{i}]",
                code="not_positive",
                value=f[i],
            )
        set_(self, "freq_hz", tuple(f.tolist()))
        if self.tone_labels is not None:
            labels = _as_sequence(self.tone_labels, "tone_labels")
            if len(labels) != f.size:
                raise InputError(
                    f"tone_labels has {len(labels)} entries; expected {f.size}",
                    field="tone_labels",
                    code="mismatched_lengths",
                )
            set_(
                self,
                "tone_labels",
                tuple(_check_label(v, f"tone_labels[{i}]") for i, v in enumerate(labels)),
            )
        set_(self, "amplitude", _check_amplitude(self.amplitude))
        if self.amplitude is not None and self.amplitudes is not None:
            raise InputError(
                "give either amplitude (for every tone) or amplitudes, not both",
                field="amplitudes",
                code="conflict",
            )
        set_(
            self,
            "amplitudes",
            _check_amplitudes(self.amplitudes, "amplitudes", f.size, exact=True),
        )
        if not isinstance(self.scales_with_speed, bool | np.bool_):
            raise InputError(
                f"scales_with_speed={_r(self.scales_with_speed)} must be true or false",
                field="scales_with_speed",
                code="bad_type",
                value=self.scales_with_speed,
            )
        set_(self, "scales_with_speed", bool(self.scales_with_speed))

    def expand(self) -> ToneSet:
        """The tones, fixed or speed-proportional as configured."""
        f = np.asarray(self.freq_hz, dtype=np.float64)
        zero = np.zeros(f.size)
        if self.amplitudes is not None:
            amp = np.asarray(self.amplitudes, dtype=np.float64)
        else:
            amp = np.full(f.size, np.nan if self.amplitude is None else self.amplitude)
        labels = (
            list(self.tone_labels)
            if self.tone_labels is not None
            else [f"{_fmt(x)} Hz" for x in self.freq_hz]
        )
        return self._make(
            labels=labels,
            fixed_hz=zero if self.scales_with_speed else f,
            speed_hz=f if self.scales_with_speed else zero,
            amplitude=amp,
            family=[""] * f.size,
            harmonic=np.full(f.size, np.nan),
        )


Source: TypeAlias = (
    Shaft | GearMesh | Bearing | BladePass | LineHarmonics | PwmCarrier | Resonance | ExplicitTones
)

#: Source classes by the type name used in the JSON API.
SOURCE_TYPES: dict[str, type[Any]] = {
    "shaft": Shaft,
    "gear_mesh": GearMesh,
    "bearing": Bearing,
    "blade_pass": BladePass,
    "line": LineHarmonics,
    "pwm": PwmCarrier,
    "resonance": Resonance,
    "tones": ExplicitTones,
}

_TYPE_NAMES: dict[type[Any], str] = {cls: name for name, cls in SOURCE_TYPES.items()}


def expand_sources(sources: Sequence[Source]) -> ToneSet:
    """Expand several sources into one ToneSet, in the given sequence.

    Parameters
    ----------
    sources : sequence of Source
        Source objects (:data:`SOURCE_TYPES` values).

    Returns
    -------
    ToneSet
        All their tones, concatenated; empty for no sources.
    """
    parts = []
    for i, s in enumerate(sources):
        if type(s) not in _TYPE_NAMES:
            raise InputError(
                f"sources[{i}] is a {type(s).__name__}; expected one of "
                f"{[c.__name__ for c in SOURCE_TYPES.values()]}",
                field=f"sources[{i}]",
                code="invalid",
            )
        parts.append(s.expand())
    return ToneSet.concat(parts)


# ------------------------------------------------------------------ plain dict form

_SPEED_KEYS = ("hz", "rpm", "cpm")


def _pop_speed(d: dict[str, Any], prefix: str, type_name: str, required: bool) -> float | None:
    """Pop ``<prefix>_hz`` / ``_rpm`` / ``_cpm`` (exactly one if required) and return Hz."""
    given = [u for u in _SPEED_KEYS if d.get(f"{prefix}_{u}") is not None]
    for u in _SPEED_KEYS:
        if d.get(f"{prefix}_{u}", 0) is None:
            del d[f"{prefix}_{u}"]
    names = [f"{prefix}_{u}" for u in _SPEED_KEYS]
    if len(given) > 1:
        raise InputError(
            f"source type {type_name!r} got {', '.join(f'{prefix}_{u}' for u in given)}; "
            f"give exactly one of {', '.join(names)}",
            field=None,
            code="conflict",
        )
    if not given:
        if required:
            raise InputError(
                f"source type {type_name!r} needs a speed: give exactly one of {', '.join(names)}",
                field=None,
                code="missing",
            )
        return None
    unit = given[0]
    key = f"{prefix}_{unit}"
    value = d.pop(key)
    check_positive(value, key, cut=80)
    return speed_to_hz(value, unit)


def source_from_dict(d: Mapping[str, Any]) -> Source:
    """Build a source from a plain dict (e.g. parsed JSON).

    Parameters
    ----------
    d : mapping
        ``"type"`` (a key of :data:`SOURCE_TYPES`) plus the class's fields. Where a class
        has ``speed_hz``, the speed may instead be given as ``speed_rpm`` or ``speed_cpm``
        (exactly one of the three); likewise ``mating_speed_hz`` / ``_rpm`` / ``_cpm``
        for a gear mesh (optional). For ``"pwm"``, ``fundamental_hz`` may be replaced by
        a shaft speed (``speed_hz`` / ``_rpm`` / ``_cpm``) and ``pole_pairs``. Lists are
        accepted where the class takes tuples; None means "not given".

    Returns
    -------
    Source
        The validated source object.
    """
    if not isinstance(d, Mapping):
        raise InputError(
            f"a source must be an object with a 'type' key, got {_r(d)}",
            field=None,
            code="bad_type",
        )
    body = dict(d)
    type_name = body.pop("type", None)
    if not isinstance(type_name, str) or type_name not in SOURCE_TYPES:
        raise InputError(
            f"unknown source type {_r(type_name)}; expected one of {', '.join(SOURCE_TYPES)}",
            field="type",
            code="not_allowed",
        )
    cls = SOURCE_TYPES[type_name]
    fields = {f.name: f for f in dataclasses.fields(cls)}

    if "speed_hz" in fields:
        body["speed_hz"] = _pop_speed(body, "speed", type_name, required=True)
    if "mating_speed_hz" in fields:
        body["mating_speed_hz"] = _pop_speed(body, "mating_speed", type_name, required=False)
    if cls is PwmCarrier:
        shaft_hz = _pop_speed(body, "speed", type_name, required=False)
        pole_pairs = body.pop("pole_pairs", None)
        if shaft_hz is not None or pole_pairs is not None:
            if body.get("fundamental_hz") is not None:
                raise InputError(
                    "source type 'pwm' got fundamental_hz and a shaft speed/pole_pairs; "
                    "give fundamental_hz, or a shaft speed with pole_pairs",
                    field="fundamental_hz",
                    code="conflict",
                )
            if shaft_hz is None or pole_pairs is None:
                raise InputError(
                    "source type 'pwm' needs both a shaft speed (speed_hz, speed_rpm or "
                    "speed_cpm) and pole_pairs to derive fundamental_hz",
                    field="pole_pairs",
                    code="missing",
                )
            body["fundamental_hz"] = fundamental_from_shaft(shaft_hz, pole_pairs)

    unknown = sorted(k for k in body if k not in fields)
    if unknown:
        raise InputError(
            f"unknown field {unknown[0]!r} for source type {type_name!r}; expected "
            f"fields: {', '.join(fields)}",
            field=unknown[0],
            code="not_allowed",
        )
    kwargs = {k: v for k, v in body.items() if v is not None}
    for name, f in fields.items():
        required = f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        if required and name not in kwargs:
            raise InputError(
                f"source type {type_name!r} needs field {name!r}", field=name, code="missing"
            )
    for k, v in kwargs.items():
        if isinstance(v, list):
            kwargs[k] = tuple(v)
    src: Source = cls(**kwargs)
    return src


def source_to_dict(source: Source) -> dict[str, Any]:
    """Plain-dict form of a source (``"type"`` plus fields; tuples as lists).

    ``source_from_dict(source_to_dict(s)) == s`` for every source ``s``.
    """
    if type(source) not in _TYPE_NAMES:
        raise InputError(
            f"{type(source).__name__} is not a source type", field=None, code="bad_type"
        )
    out: dict[str, Any] = {"type": _TYPE_NAMES[type(source)]}
    for f in dataclasses.fields(source):
        v = getattr(source, f.name)
        out[f.name] = list(v) if isinstance(v, tuple) else v
    return out
