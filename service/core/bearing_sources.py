"""Rolling-element bearing defect frequencies (FTF, BPFO, BPFI, BSF) as a source.

The multiples of shaft speed follow from the element count, element and pitch diameters
and contact angle [1]_.

References
----------
.. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   *Mechanical Systems and Signal Processing* 25 (2011) 485–520, sec. 2.1 (defect
   frequencies FTF, BPFO, BPFI, BSF).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from numpy.typing import NDArray

from service.core.checks import check_int, check_positive
from service.core.errors import InputError
from service.core.tones import ToneSet

from .source_base import (
    MAX_ELEMENTS,
    MAX_HARMONICS,
    Expandable,
    as_float,
    as_sequence,
    check_label,
    family_amplitudes,
    settle_amplitudes,
    short_repr,
)

__all__ = [
    "BEARING_DEFECTS",
    "Bearing",
    "bearing_multiples",
]

FloatArray = NDArray[np.float64]


#: Bearing defect families in output order.
BEARING_DEFECTS: tuple[str, ...] = ("FTF", "BPFO", "BPFI", "BSF")


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
            f"element_diameter={short_repr(element_diameter)} must be less than "
            f"pitch_diameter={short_repr(pitch_diameter)}",
            field="element_diameter",
            code="above_limit",
            value=element_diameter,
        )
    phi = as_float(angle, "contact_angle_deg")
    if not math.isfinite(phi) or not 0.0 <= phi < 90.0:
        raise InputError(
            f"contact_angle_deg={short_repr(angle)} must be >= 0 and < 90 degrees",
            field="contact_angle_deg",
            code="below_limit",
            value=angle,
        )
    return n, d, big_d, phi


@dataclass(frozen=True)
class Bearing(Expandable):
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
        set_(self, "label", check_label(self.label))
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
        seq = as_sequence(self.defects, "defects")
        wanted = [str(x).upper() if isinstance(x, str) else x for x in seq]
        for i, x in enumerate(wanted):
            if x not in BEARING_DEFECTS:
                raise InputError(
                    f"defects[{i}]={short_repr(seq[i])} must be one of {list(BEARING_DEFECTS)}",
                    field=f"defects[{i}]",
                    code="not_allowed",
                    value=seq[i],
                )
        if not wanted or len(set(wanted)) != len(wanted):
            raise InputError(
                f"defects={short_repr(seq)} must list each of {list(BEARING_DEFECTS)} "
                "at most once, and at least one",
                field="defects",
                code="duplicate",
                value=seq,
            )
        set_(self, "defects", tuple(x for x in BEARING_DEFECTS if x in wanted))
        settle_amplitudes(self, self.harmonics)

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
            family_amplitudes(self.harmonics, self.amplitude, self.harmonic_amplitudes),
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
