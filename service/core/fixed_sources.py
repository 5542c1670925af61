"""Sources at fixed frequencies: a structural or sensor resonance and explicit tones."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from numpy.typing import NDArray

from service.core.checks import check_positive
from service.core.errors import InputError
from service.core.tones import ToneSet

from .source_base import (
    MAX_EXPLICIT_TONES,
    Expandable,
    as_float,
    as_sequence,
    check_amplitude,
    check_amplitudes,
    check_label,
    fmt_number,
    short_repr,
)

__all__ = [
    "ExplicitTones",
    "Resonance",
]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class Resonance(Expandable):
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
        set_(self, "label", check_label(self.label))
        set_(self, "freq_hz", check_positive(self.freq_hz, "freq_hz", cut=80))
        set_(self, "amplitude", check_amplitude(self.amplitude))

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
class ExplicitTones(Expandable):
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
        set_(self, "label", check_label(self.label))
        if isinstance(self.freq_hz, np.ndarray):
            f = np.asarray(self.freq_hz, dtype=np.float64).ravel()
        else:
            seq = as_sequence(self.freq_hz, "freq_hz")
            f = np.asarray([as_float(v, f"freq_hz[{i}]") for i, v in enumerate(seq)])
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
                f"freq_hz[{i}]={short_repr(f[i])} must be a finite number > 0",
                field=f"freq_hz[{i}]",
                code="not_positive",
                value=f[i],
            )
        set_(self, "freq_hz", tuple(f.tolist()))
        if self.tone_labels is not None:
            labels = as_sequence(self.tone_labels, "tone_labels")
            if len(labels) != f.size:
                raise InputError(
                    f"tone_labels has {len(labels)} entries; expected {f.size}",
                    field="tone_labels",
                    code="mismatched_lengths",
                )
            set_(
                self,
                "tone_labels",
                tuple(check_label(v, f"tone_labels[{i}]") for i, v in enumerate(labels)),
            )
        set_(self, "amplitude", check_amplitude(self.amplitude))
        if self.amplitude is not None and self.amplitudes is not None:
            raise InputError(
                "give either amplitude (for every tone) or amplitudes, not both",
                field="amplitudes",
                code="conflict",
            )
        set_(
            self,
            "amplitudes",
            check_amplitudes(self.amplitudes, "amplitudes", f.size, exact=True),
        )
        if not isinstance(self.scales_with_speed, bool | np.bool_):
            raise InputError(
                f"scales_with_speed={short_repr(self.scales_with_speed)} must be true or false",
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
            else [f"{fmt_number(x)} Hz" for x in self.freq_hz]
        )
        return self._make(
            labels=labels,
            fixed_hz=zero if self.scales_with_speed else f,
            speed_hz=f if self.scales_with_speed else zero,
            amplitude=amp,
            family=[""] * f.size,
            harmonic=np.full(f.size, np.nan),
        )
