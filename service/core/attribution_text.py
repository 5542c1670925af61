"""The attribution's sentences: one plain sentence per explanation, the hedge that
matches its confidence, and the assembled :class:`~service.core.attribution_model.Attribution`.

References
----------
.. [1] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed.,
   Pearson, 2010, sec. 4.2 (aliasing; the image of ``fs − f``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.core.harmonics import (
    Family,
    format_db,
    format_hz,
)
from service.core.tones import ToneSet

from .attribution_model import (
    BELOW_FLOOR_DB,
    KIND_ALIAS,
    KIND_FAMILY,
    KIND_MIRROR,
    KINDS,
    MIN_CONFIDENCE,
    TIE_RATIO,
    Attribution,
    Explanation,
)

__all__ = [
    "SentenceContext",
    "assemble",
    "explanation_for",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
ObjArray = NDArray[np.object_]


@dataclass(frozen=True)
class SentenceContext:
    """Formatted peak values and the inputs every sentence of one attribution needs."""

    freq: dict[int, str]  # formatted peak frequency
    seen_db: dict[int, str]  # formatted peak level
    floor_db: list[float]
    tones: ToneSet | None
    families: list[Family]
    edge: float
    nyq: float
    rate: float


def _hedge(conf: float) -> str:
    if conf >= 0.7:
        return "is probably"
    if conf >= MIN_CONFIDENCE:
        return "may be"
    return "is unlikely to be"


def explanation_for(
    ctx: SentenceContext,
    peak: int,
    kind: int,
    conf: float,
    raw: float,
    tone: int,
    family: int,
    harmonic: float,
    true_hz: float,
    zone: int,
    atten: float,
    predicted: float,
    error: float,
) -> Explanation:
    """One kept candidate row as an :class:`Explanation` with its sentence."""
    label: str | None
    source: str | None
    if tone >= 0:
        assert ctx.tones is not None
        label, source = str(ctx.tones.label[tone]), str(ctx.tones.source[tone])
        what = f"{label} of '{source}'"
    elif family >= 0:
        fam = ctx.families[family]
        label, source = f"{int(harmonic)}×", fam.label
        what = (
            f"harmonic {int(harmonic)}× of a {format_hz(fam.fundamental_hz, 4)} harmonic "
            "family found without sources"
        )
    else:
        label = source = None
        what = ""
    inverted = zone % 2 == 0
    p = ctx.freq[peak]
    hedge = _hedge(conf)
    seen = ctx.seen_db[peak]
    if math.isfinite(predicted):
        pred_db = 20.0 * math.log10(max(predicted, 1e-300))
        level = f"; expected {format_db(pred_db)}, seen {seen}"
        if pred_db < ctx.floor_db[peak] - BELOW_FLOOR_DB:
            level += f", but that is far below the floor ({format_db(ctx.floor_db[peak])})"
    else:
        level = f"; seen {seen}" if tone < 0 else f"; its level is not given, seen {seen}"
    kind_name = KINDS[kind]
    if kind == KIND_MIRROR:
        sentence = (
            f"{p} lies above the analysed span ({format_hz(ctx.edge)}) and {hedge} the "
            f"image of energy at {format_hz(true_hz)}, just above the Nyquist frequency "
            f"{format_hz(ctx.nyq)}, that the filter's transition band let through; the "
            f"chain takes {format_db(atten)} off {format_hz(true_hz)}"
        )
    elif kind == KIND_ALIAS:
        flip = " (inverted)" if inverted else ""
        sentence = (
            f"{p} {hedge} {'the ' if tone >= 0 else ''}{what} at {format_hz(true_hz, 4)} "
            f"folded from zone {zone}"
            f"{flip}; the chain takes {format_db(atten)} off it{level}"
        )
    elif kind == KIND_FAMILY and tone >= 0:
        assert ctx.tones is not None
        fam_name = str(ctx.tones.family[tone])
        sentence = (
            f"{p} {hedge} harmonic {_fmt_harmonic(harmonic)}× of {fam_name} ({label}, "
            f"at {format_hz(true_hz, 4)}, in band){level}"
        )
    elif kind == KIND_FAMILY:
        sentence = f"{p} {hedge} {what} (at {format_hz(true_hz, 4)}, in band){level}"
    else:
        sentence = f"{p} {hedge} {what} (at {format_hz(true_hz, 4)}, in band){level}"
    return Explanation(
        kind=kind_name,
        confidence=conf,
        raw_confidence=raw,
        tone_index=tone,
        label=label,
        source=source,
        true_hz=true_hz,
        zone=zone,
        inverted=bool(inverted),
        attenuation_db=atten,
        predicted_amplitude=predicted,
        sentence=sentence,
        freq_error_hz=error,
        harmonic=harmonic,
        family_index=family,
    )


def _fmt_harmonic(h: float) -> str:
    return f"{int(h)}" if float(h).is_integer() else f"{h:g}"


def _short(e: Explanation) -> str:
    """A short phrase naming an alternative explanation."""
    if e.kind == "mirror":
        return f"the image of energy at {format_hz(e.true_hz)} (mirror)"
    if e.tone_index >= 0:
        what = f"the {e.label} of '{e.source}'"
    else:
        what = f"harmonic {e.label} of the {e.source}"
    if e.kind == "alias":
        return f"{what} folded from zone {e.zone} (true {format_hz(e.true_hz, 4)})"
    return f"{what} (in band)"


def assemble(
    freq: FloatArray,
    amp: FloatArray,
    alternatives: list[list[Explanation]],
    beyond_span: BoolArray,
    band: tuple[float, float],
    tol: float,
    edge: float,
    notes: tuple[str, ...],
    ctx: SentenceContext,
) -> Attribution:
    """Verdict, confidence and sentences per peak, assembled into an :class:`Attribution`."""
    n = freq.size
    verdict = np.empty(n, dtype=object)
    source = np.empty(n, dtype=object)
    label = np.empty(n, dtype=object)
    sentence = np.empty(n, dtype=object)
    conf = np.zeros(n)
    raw = np.zeros(n)
    true = np.full(n, np.nan)
    zone = np.zeros(n, dtype=np.int64)
    inverted = np.zeros(n, dtype=bool)
    for i, alts in enumerate(alternatives):  # one sentence per peak
        best = alts[0] if alts else None
        if best is None or best.raw_confidence < MIN_CONFIDENCE:
            verdict[i] = "unexplained"
            conf[i] = best.confidence if best is not None else 0.0
            raw[i] = best.raw_confidence if best is not None else 0.0
            text = f"no known tone, family or mirror convincingly explains {format_hz(freq[i])}"
            if best is not None:
                text += f"; the closest is {_short(best)}, confidence {best.confidence:.2f}"
            if beyond_span[i]:
                text += f"; it lies above the analysed span ({format_hz(edge)})"
            # Say what would settle it: the engineer's next step, not only the verdict.
            text += (
                "; to settle it, name the machine's sources or capture again at a second "
                "sample rate"
            )
            sentence[i] = text
            continue
        verdict[i] = best.kind
        conf[i] = best.confidence
        raw[i] = best.raw_confidence
        if best.kind != "mirror":
            source[i], label[i] = best.source, best.label
        true[i], zone[i], inverted[i] = best.true_hz, best.zone, best.inverted
        text = best.sentence
        if len(alts) > 1 and alts[1].raw_confidence >= TIE_RATIO * best.raw_confidence:
            text += f"; or, about as likely, {_short(alts[1])}"
        sentence[i] = text
    in_band = (freq >= band[0]) & (freq <= band[1])
    aliased = (verdict == "alias") | (verdict == "mirror") | ((verdict == "family") & (zone > 1))
    return Attribution(
        freq_hz=freq,
        amplitude=amp,
        verdict=verdict,
        confidence=conf,
        raw_confidence=raw,
        aliased=aliased.astype(bool),
        source=source,
        tone_label=label,
        true_hz=true,
        zone=zone,
        inverted=inverted,
        explanation=sentence,
        beyond_span=beyond_span,
        in_band=in_band,
        alternatives=alternatives,
        tolerance_hz=tol,
        span_hz=edge,
        band_hz=band,
        notes=notes,
    )
