"""The catalogue of analog anti-alias filters the plan search may choose from.

A :class:`FilterOption` is a filter design whose cutoff is fixed or follows the sample
rate; :data:`DEFAULT_FILTERS` lists the usual choices in cost order (fewest poles, then
the plainest family).

References
----------
.. [1] L. D. Paarmann, *Design and Analysis of Analog Filters*, Kluwer, 2001
   (Butterworth, Chebyshev I/II, elliptic and Bessel low-pass prototypes).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import brentq

from service.core import filters as _flt
from service.core.stages import AnalogLowpass

from .checks import check_int, check_positive
from .errors import InputError
from .plan_common import fmt_hz, fmt_num, ordinal

__all__ = [
    "DEFAULT_FILTERS",
    "FilterOption",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


_FAMILY_RANK = {
    "none": 0,
    "table": 1,
    "bessel": 2,
    "butterworth": 3,
    "chebyshev1": 4,
    "chebyshev2": 5,
    "elliptic": 6,
}


_FAMILY_TEXT = {
    "bessel": "Bessel",
    "butterworth": "Butterworth",
    "chebyshev1": "Chebyshev I",
    "chebyshev2": "Chebyshev II",
    "elliptic": "elliptic",
}


@dataclass(frozen=True)
class FilterOption:
    """One analog anti-alias filter the planner may choose.

    Attributes
    ----------
    family : str
        ``"none"`` (no filter), ``"butterworth"``, ``"bessel"``, ``"chebyshev1"``,
        ``"chebyshev2"``, ``"elliptic"``, or ``"table"`` (a measured response).
    order : int
        Filter order, 1 to 20 for a family design; 0 for ``"none"`` and ``"table"``.
    ripple_db, stop_atten_db : float, optional
        Passband ripple and stopband attenuation, dB, where the family needs them.
    cutoff_hz : float, optional
        Fixed cutoff, Hz (a filter that does not follow the sample rate).
    cutoff_fraction : float, optional
        Cutoff as a fraction of the sample rate (0 < fraction <= 0.5), e.g. 0.39 for
        fs/2.56. With neither cutoff given, the cutoff sits at the band's upper edge:
        the -3 dB point for Butterworth and Bessel, the passband edge (ripple) for
        Chebyshev I and elliptic, the -3 dB point (found numerically) for Chebyshev II.
    table_hz, table_gain_db : tuple of float, optional
        A measured response, Hz and dB (gain, negative = loss), for ``"table"``.
    name : str
        Optional display name (used for tables).
    """

    family: str = "butterworth"
    order: int = 0
    ripple_db: float | None = None
    stop_atten_db: float | None = None
    cutoff_hz: float | None = None
    cutoff_fraction: float | None = None
    table_hz: tuple[float, ...] | None = None
    table_gain_db: tuple[float, ...] | None = None
    name: str = ""

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        fam = self.family
        if fam not in _FAMILY_RANK:
            raise InputError(
                f"family={fam!r} must be one of {', '.join(_FAMILY_RANK)}",
                field="family",
                code="not_allowed",
                value=fam,
            )
        if self.cutoff_hz is not None and self.cutoff_fraction is not None:
            raise InputError(
                "give cutoff_hz or cutoff_fraction, not both",
                field="cutoff_fraction",
                code="conflict",
            )
        if self.cutoff_hz is not None:
            set_(
                self,
                "cutoff_hz",
                _flt.check_cutoff(self.cutoff_hz),
            )
        if self.cutoff_fraction is not None:
            frac = check_positive(self.cutoff_fraction, "cutoff_fraction", separate=True)
            if frac > 0.5:
                raise InputError(
                    f"cutoff_fraction={frac!r} must be <= 0.5 (of the sample rate)",
                    field="cutoff_fraction",
                    code="above_limit",
                    value=frac,
                )
            set_(self, "cutoff_fraction", frac)
        if fam in ("none", "table"):
            if self.order not in (0, None):
                raise InputError(
                    f"order={self.order!r} does not apply to family {fam!r}; use 0",
                    field="order",
                    code="conflict",
                    value=self.order,
                )
            set_(self, "order", 0)
            if fam == "none" and (self.cutoff_hz is not None or self.cutoff_fraction is not None):
                raise InputError(
                    "family 'none' (no filter) takes no cutoff", field="cutoff_hz", code="conflict"
                )
        if fam == "table":
            if self.table_hz is None or self.table_gain_db is None:
                raise InputError(
                    "family 'table' needs table_hz and table_gain_db",
                    field="table_hz",
                    code="missing",
                )
            if self.cutoff_hz is not None or self.cutoff_fraction is not None:
                raise InputError(
                    "a measured table is fixed; it takes no cutoff",
                    field="cutoff_hz",
                    code="conflict",
                )
            fx, gy = _flt.check_table(self.table_hz, self.table_gain_db)
            set_(self, "table_hz", tuple(float(v) for v in fx))
            set_(self, "table_gain_db", tuple(float(v) for v in gy))
            return
        if self.table_hz is not None or self.table_gain_db is not None:
            raise InputError(
                f"table_hz/table_gain_db apply only to family 'table', not {fam!r}",
                field="table_hz",
                code="conflict",
            )
        if fam == "none":
            if self.ripple_db is not None or self.stop_atten_db is not None:
                raise InputError(
                    "family 'none' (no filter) takes no ripple_db or stop_atten_db",
                    field="ripple_db",
                    code="conflict",
                )
            return
        set_(self, "order", check_int(self.order, "order", 1, 20, word="a whole number"))
        rp, rs = _flt.check_family(fam, self.ripple_db, self.stop_atten_db)
        set_(self, "ripple_db", rp)
        set_(self, "stop_atten_db", rs)

    @property
    def poles(self) -> int:
        """Number of poles (0 for no filter and for a measured table)."""
        return self.order

    @property
    def follows_rate(self) -> bool:
        """Whether the cutoff moves with the sample rate."""
        return self.cutoff_fraction is not None

    def cost(self) -> tuple[int, int]:
        """Sort key among filters: fewer poles first, then the plainer family."""
        return (self.poles, _FAMILY_RANK[self.family])

    def cutoff_for(self, sample_rate_hz: float, band_hz: tuple[float, float]) -> float | None:
        """Cutoff in Hz at this rate and band (None for no filter and tables)."""
        if self.family in ("none", "table"):
            return None
        if self.cutoff_hz is not None:
            return self.cutoff_hz
        if self.cutoff_fraction is not None:
            return self.cutoff_fraction * sample_rate_hz
        if self.family == "chebyshev2":
            return band_hz[1] / _cheby2_3db_ratio(self.order, float(self.stop_atten_db or 0))
        return band_hz[1]

    def describe(self, cutoff_hz: float | None = None) -> str:
        """E.g. ``"4th-order Butterworth at 10 kHz"``."""
        if self.family == "none":
            return "no anti-alias filter"
        if self.family == "table":
            return f"the measured filter {self.name!r}" if self.name else "the measured filter"
        text = f"{ordinal(self.order)}-order {_FAMILY_TEXT[self.family]}"
        extras = []
        if self.ripple_db is not None:
            extras.append(f"{fmt_num(self.ripple_db)} dB ripple")
        if self.stop_atten_db is not None:
            extras.append(f"{fmt_num(self.stop_atten_db)} dB stopband")
        if extras:
            text += f" ({', '.join(extras)})"
        if cutoff_hz is not None:
            text += f" at {fmt_hz(cutoff_hz)}"
        return text

    def stage(self, cutoff_hz: float | None) -> AnalogLowpass | None:
        """The chain stage for this option (None for no filter)."""
        if self.family == "none":
            return None
        if self.family == "table":
            return AnalogLowpass(table_hz=self.table_hz, table_gain_db=self.table_gain_db)
        return AnalogLowpass(
            family=self.family,
            order=self.order,
            cutoff_hz=cutoff_hz,
            ripple_db=self.ripple_db,
            stop_atten_db=self.stop_atten_db,
        )

    def attenuation_db(self, f: FloatArray, cutoff_hz: float) -> FloatArray:
        """Attenuation, dB, at checked frequencies ``f`` (Hz) for a cutoff in Hz.

        No input checks: the plan search calls it on its own grids. A cutoff that
        follows the rate is passed as ``cutoff_hz``; ``none`` gives 0 dB.
        """
        if self.family == "none":
            return np.zeros_like(f)
        if self.family == "table":
            assert self.table_hz is not None and self.table_gain_db is not None
            return _flt.table_unchecked(
                f, np.asarray(self.table_hz), np.asarray(self.table_gain_db)
            )
        return _flt.analog_unchecked(
            np.array(f, dtype=np.float64),
            self.family,
            self.order,
            cutoff_hz,
            self.ripple_db,
            self.stop_atten_db,
        )


def _cheby2_3db_ratio(order: int, stop_atten_db: float) -> float:
    """Where a Chebyshev II prototype (stopband edge 1) is 3 dB down, as a fraction of 1."""

    def loss(x: float) -> float:
        return (
            float(
                _flt.analog_unchecked(np.array([x]), "chebyshev2", order, 1.0, None, stop_atten_db)[
                    0
                ]
            )
            - 3.0103
        )

    return float(brentq(loss, 1e-6, 1.0, xtol=1e-12))


#: The filters tried when none are given, cheapest first: none; Butterworth 2, 4, 6, 8;
#: Chebyshev I (0.5 dB ripple) 8; elliptic 8 (0.1 dB ripple, 90 dB stopband); all with
#: the cutoff at the band's upper edge.
DEFAULT_FILTERS: tuple[FilterOption, ...] = (
    FilterOption("none"),
    FilterOption("butterworth", 2),
    FilterOption("butterworth", 4),
    FilterOption("butterworth", 6),
    FilterOption("butterworth", 8),
    FilterOption("chebyshev1", 8, ripple_db=0.5),
    FilterOption("elliptic", 8, ripple_db=0.1, stop_atten_db=90.0),
)
