"""Acquisition planning (compatibility surface): re-exports the planning modules.

The concepts live in their own modules: :mod:`service.core.analysis_lines` (lines, bin
width, record length, resolution rule), :mod:`service.core.filter_catalogue` (filter
options), :mod:`service.core.plan_model`, :mod:`service.core.plan_engine` and
:mod:`service.core.plan_search` (the plan search) and :mod:`service.core.runup`
(run-up prediction). New code imports from those; the names below stay importable
from here for existing importers.

:func:`plan` searches candidate sample rates and analog anti-alias filters for the
cheapest setup (lowest rate, then fewest poles, then the plainest family) that keeps
every tone's alias out of the band of interest, or below a required level, over the
whole speed range; it then picks the analysis lines that meet the required resolution
and reports record length, each tone's worst alias and why every cheaper option fails.

:func:`run_up` follows every tone through a chain along a speed grid and finds the
fold lines (speeds where a tone crosses a multiple of fs/2) and the speeds where an
aliased line crosses a line of interest.

Conventions: frequencies in Hz, levels as ``20·log10(amplitude)`` in dB re one unit of
the user's amplitude unit, attenuation positive for a loss. Speeds are factors of the
nominal speed (1 = nominal); a tone's true frequency at factor ``s`` is
``|fixed_hz + s·speed_hz|`` (a lower sideband that passes through 0 Hz reappears at
positive frequency).

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing of a sampled sinusoid).
.. [2] J. O. Smith III, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Resolving sinusoids" (two tones are cleanly resolved when they are at least one
   main-lobe width apart; an L-term cosine window's main lobe is 2L bins wide).
.. [3] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", *Proc. IEEE* 66(1), 1978, pp. 51-83 (main-lobe widths).
.. [4] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", *IEEE Trans. Audio Electroacoust.* 15(2), 1967, pp. 70-73 (averaging
   overlapped segments).
.. [5] Common practice (no single source): the analysed span is fs/2.56, the
   record holds N = 2.56·lines samples, bin width = span / lines = fs / N.
"""

from __future__ import annotations

from .analysis_lines import (
    MAINLOBE_BINS,
    SPAN_DIVISOR,
    STANDARD_LINES,
    RecordLength,
    record_length,
    resolution_bins,
)
from .filter_catalogue import DEFAULT_FILTERS, FilterOption
from .plan_common import (
    ANALYSER_RATES_HZ,
    CONVERTER_RATES_HZ,
    PlanImpossible,
    speed_range_from_tolerance,
)
from .plan_model import Plan, PlanRequest, RejectedOption, ToneAlias
from .plan_search import plan
from .runup import Crossings, FoldLines, RunUp, run_up

__all__ = [
    "ANALYSER_RATES_HZ",
    "CONVERTER_RATES_HZ",
    "DEFAULT_FILTERS",
    "MAINLOBE_BINS",
    "SPAN_DIVISOR",
    "STANDARD_LINES",
    "Crossings",
    "FilterOption",
    "FoldLines",
    "Plan",
    "PlanImpossible",
    "PlanRequest",
    "RecordLength",
    "RejectedOption",
    "RunUp",
    "ToneAlias",
    "plan",
    "record_length",
    "resolution_bins",
    "run_up",
    "speed_range_from_tolerance",
]
