"""Every Plotly figure of the pages, built in Python as plain JSON-ready dicts.

Templates only place these figures; a small static script hands them to Plotly. Inputs are
the JSON payloads of the API (``fold_payload`` and friends), so a figure shows exactly
what the API answers. Outputs hold lists of Python floats, never numpy objects.

Text that came from a user (tone labels, source names) is HTML-escaped before it goes
into a figure, because Plotly reads a small subset of HTML in labels and hover text.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..core.chain import Chain
from ..core.folding import fold_line
from .display import DEFAULT_BUCKETS, minmax_decimate

__all__ = [
    "COLOURS",
    "chain_gain_curve",
    "compare_spectra",
    "diagnosis_folding_diagram",
    "fold_axis_end_hz",
    "folding_diagram",
    "measured_spectrum",
    "predicted_spectrum",
]

#: Foldwise's palette (shared with static/foldwise.css).
COLOURS = {
    "ink": "#1b2430",
    "muted": "#5b6472",
    "grid": "#e3e6ea",
    "fold": "#2f3e5c",
    "direct": "#0d7a68",
    "alias": "#c2410c",
    "unknown": "#7a8290",
    "gain": "#6d4bb3",
    "band": "rgba(217, 160, 20, 0.11)",
    "band_edge": "#a07509",
    "zone_even": "rgba(47, 62, 92, 0.075)",
    "floor": "#8a6d3b",
    "spectrum": "#33415c",
}

#: Above this many zones the diagram stops shading them (the zig-zag is still exact).
MAX_SHADED_ZONES = 60
#: Tones labelled on the diagram; the others keep their hover text.
DEFAULT_MAX_LABELS = 24
FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, 'Helvetica Neue', Arial, sans-serif"


def _esc(text: Any) -> str:
    return html.escape(str(text), quote=False)


def _base_layout(title: str) -> dict[str, Any]:
    return {
        "title": {"text": title, "x": 0.0, "xanchor": "left", "font": {"size": 16}},
        "font": {"family": FONT, "size": 13, "color": COLOURS["ink"]},
        "paper_bgcolor": "#ffffff",
        "plot_bgcolor": "#ffffff",
        "margin": {"l": 70, "r": 70, "t": 50, "b": 120},
        "hovermode": "closest",
        "hoverlabel": {"font": {"family": FONT}},
        # Below the plot, under the axis title: never over the figure's title.
        "legend": {"orientation": "h", "x": 0.0, "y": -0.22, "yanchor": "top"},
        "showlegend": True,
    }


def _axis(title: str, **extra: Any) -> dict[str, Any]:
    out: dict[str, Any] = {
        "title": {"text": title},
        "gridcolor": COLOURS["grid"],
        "zeroline": False,
        "linecolor": COLOURS["muted"],
        "ticks": "outside",
        "showline": True,
    }
    out.update(extra)
    return out


def fold_axis_end_hz(top_hz: float, rate_hz: float) -> float:
    """End of the true-frequency axis: the zone edge past ``top_hz`` plus a 3 % margin."""
    true_hz, _ = fold_line(top_hz * 1.03, rate_hz)
    return float(true_hz[-1])


def chain_gain_curve(chain: Chain, max_freq_hz: float, points: int = 800) -> dict[str, list[float]]:
    """The chain's gain in dB (minus its total attenuation) over true frequency.

    Parameters
    ----------
    chain : service.core.chain.Chain
        The acquisition chain.
    max_freq_hz : float
        Highest true frequency of the curve, Hz.
    points : int
        Number of points, evenly spaced from 0 Hz.

    Returns
    -------
    dict
        ``freq_hz`` and ``gain_db`` lists (gain = -attenuation, dB).
    """
    f = np.linspace(0.0, float(max_freq_hz), int(points))
    resp = chain.evaluate(f)
    gain = -np.asarray(resp.attenuation_db, dtype=np.float64)
    return {"freq_hz": f.round(6).tolist(), "gain_db": gain.round(3).tolist()}


def _level_db(amplitude: float | None) -> float | None:
    if amplitude is None or not amplitude > 0:
        return None
    return 20.0 * math.log10(amplitude)


def _fmt_hz(v: float) -> str:
    return f"{v:,.1f} Hz" if v < 10_000 else f"{v / 1000:,.3f} kHz"


def _hover(t: dict[str, Any]) -> str:
    level = _level_db(t.get("apparent_amplitude"))
    parts = [
        f"<b>{_esc(t['label'])}</b> · {_esc(t['source'])}",
        f"true {_fmt_hz(t['freq_hz'])} → shows at {_fmt_hz(t['apparent_hz'])}",
        f"Nyquist zone {t['zone']}" + (", inverted" if t["inverted"] else ""),
        f"chain attenuation {t['attenuation_db']:.1f} dB",
        "predicted level " + ("not given" if level is None else f"{level:.1f} dB"),
    ]
    if t["aliased"]:
        parts.append("<b>alias</b>" + (" in the band of interest" if t["in_band"] else ""))
    return "<br>".join(parts)


def _pick_labels(tones: Sequence[dict[str, Any]]) -> list[int]:
    """Indices of the tones in the order they claim a label: aliases in band first,
    then in-band tones, then the strongest."""

    def rank(i: int) -> tuple[int, int, float]:
        t = tones[i]
        level = _level_db(t.get("apparent_amplitude"))
        return (
            0 if (t["aliased"] and t["in_band"]) else 1,
            0 if t["in_band"] else 1,
            -(level if level is not None else -1e9),
        )

    order = sorted(range(len(tones)), key=rank)
    # Aliases are what the diagram is for; direct tones crowd zone 1, so only a few.
    aliases = [i for i in order if tones[i]["aliased"]]
    direct = [i for i in order if not tones[i]["aliased"]]
    return aliases + direct


#: The box a label needs beside its mark, as fractions of the axes' spans (a label of
#: about 20 characters at 10 px on a plot about 800 × 340 px).
LABEL_ROOM = (0.17, 0.07)


def _with_room(
    tones: Sequence[dict[str, Any]],
    order: Sequence[int],
    x_span: float,
    y_span: float,
    max_labels: int,
) -> set[int]:
    """The labels that do not print over one another: in ``order``, a tone gets a label
    when no labelled tone sits within its box, up to ``max_labels`` (at most 6 of them
    direct tones, which crowd zone 1); the others keep their hover text."""
    dx, dy = LABEL_ROOM[0] * x_span, LABEL_ROOM[1] * y_span
    kept: list[int] = []
    direct = 0
    for i in order:
        if len(kept) >= max_labels:
            break
        if not tones[i]["aliased"] and direct >= 6:
            continue
        x, y = tones[i]["freq_hz"], tones[i]["apparent_hz"]
        if all(
            abs(x - tones[j]["freq_hz"]) >= dx or abs(y - tones[j]["apparent_hz"]) >= dy
            for j in kept
        ):
            kept.append(i)
            direct += not tones[i]["aliased"]
    return set(kept)


def folding_diagram(
    prediction: dict[str, Any],
    gain_curve: dict[str, list[float]] | None = None,
    max_labels: int = DEFAULT_MAX_LABELS,
) -> dict[str, Any]:
    """True frequency → apparent frequency: the fold line across the Nyquist zones.

    Parameters
    ----------
    prediction : dict
        The payload of POST /api/v1/fold (``final_rate_hz``, ``band_hz``, ``tones``).
    gain_curve : dict, optional
        ``{"freq_hz": [...], "gain_db": [...]}`` from :func:`chain_gain_curve`, drawn
        on a second y axis (chain gain, dB) over the same true-frequency axis.
    max_labels : int
        Most tones written on the diagram; every tone keeps its hover text.

    Returns
    -------
    dict
        A Plotly figure (``data``, ``layout``). Traces are named ``fold line``,
        ``direct tones``, ``aliases`` and, with a curve, ``chain gain``; zones are
        layout shapes named ``zone k``.
    """
    rate = float(prediction["final_rate_hz"])
    nyq = rate / 2.0
    tones = prediction["tones"]
    top = max([t["freq_hz"] for t in tones] + [rate])
    corner_x, corner_y = fold_line(top * 1.03, rate)
    zones = len(corner_x) - 1
    x_max = float(corner_x[-1])
    vx = corner_x.tolist()
    vy = corner_y.tolist()
    data: list[dict[str, Any]] = [
        {
            "type": "scatter",
            "mode": "lines",
            "name": "fold line",
            "x": vx,
            "y": vy,
            "line": {"color": COLOURS["fold"], "width": 2},
            "hoverinfo": "skip",
        }
    ]
    labelled = _with_room(tones, _pick_labels(tones), x_max, nyq, max_labels)
    for name, colour, symbol, want_alias in (
        ("direct tones", COLOURS["direct"], "circle", False),
        ("aliases", COLOURS["alias"], "diamond", True),
    ):
        idx = [i for i, t in enumerate(tones) if bool(t["aliased"]) is want_alias]
        if not idx:
            continue
        data.append(
            {
                "type": "scatter",
                "mode": "markers+text",
                "name": name,
                "x": [tones[i]["freq_hz"] for i in idx],
                "y": [tones[i]["apparent_hz"] for i in idx],
                "text": [
                    f"{_esc(tones[i]['label'])} {_esc(tones[i]['source'])}" if i in labelled else ""
                    for i in idx
                ],
                "textposition": "top right" if want_alias else "bottom right",
                "textfont": {"size": 10, "color": colour},
                "hovertext": [_hover(tones[i]) for i in idx],
                "hoverinfo": "text",
                "marker": {
                    "color": colour,
                    "symbol": symbol,
                    "size": 10 if want_alias else 8,
                    "line": {"color": "#ffffff", "width": 1},
                },
                "customdata": idx,
            }
        )
    shapes: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    if zones <= MAX_SHADED_ZONES:
        for k in range(zones):
            shapes.append(
                {
                    "type": "rect",
                    "name": f"zone {k + 1}",
                    "xref": "x",
                    "yref": "paper",
                    "x0": vx[k],
                    "x1": vx[k + 1],
                    "y0": 0,
                    "y1": 1,
                    "fillcolor": COLOURS["zone_even"] if k % 2 else "rgba(0,0,0,0)",
                    "line": {"width": 0},
                    "layer": "below",
                }
            )
            annotations.append(
                {
                    "x": (vx[k] + vx[k + 1]) / 2.0,
                    "y": 1.0,
                    "xref": "x",
                    "yref": "paper",
                    "yanchor": "bottom",
                    "text": f"zone {k + 1}" + (" ⇄" if k % 2 else ""),
                    "showarrow": False,
                    "font": {"size": 11, "color": COLOURS["muted"]},
                }
            )
    band = prediction.get("band_hz")
    if band:
        shapes.append(
            {
                "type": "rect",
                "name": "band of interest",
                "xref": "paper",
                "yref": "y",
                "x0": 0,
                "x1": 1,
                "y0": band[0],
                "y1": min(band[1], nyq),
                "fillcolor": COLOURS["band"],
                "line": {"width": 1, "color": COLOURS["band_edge"], "dash": "dot"},
                "layer": "below",
            }
        )
        annotations.append(
            {
                "x": 1.0,
                "xref": "paper",
                "xanchor": "right",
                "y": min(band[1], nyq),
                "yref": "y",
                "yanchor": "top",
                "text": "band of interest",
                "showarrow": False,
                "font": {"size": 11, "color": COLOURS["band_edge"]},
            }
        )
    layout = _base_layout("Folding diagram: where each true frequency shows up")
    layout["xaxis"] = _axis("true frequency, Hz", range=[0, x_max])
    layout["yaxis"] = _axis("apparent frequency, Hz", range=[0, nyq * 1.04])
    layout["shapes"] = shapes
    layout["annotations"] = annotations
    if gain_curve is not None:
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": "chain gain",
                "x": list(gain_curve["freq_hz"]),
                "y": list(gain_curve["gain_db"]),
                "yaxis": "y2",
                "line": {"color": COLOURS["gain"], "width": 1.5, "dash": "dash"},
                "hovertemplate": "%{x:.0f} Hz: gain %{y:.1f} dB<extra>chain gain</extra>",
            }
        )
        gains = [g for g in gain_curve["gain_db"] if g is not None]
        low = max(min(gains, default=-60.0), -160.0)
        layout["yaxis2"] = _axis(
            "chain gain, dB",
            overlaying="y",
            side="right",
            range=[math.floor(low / 10.0) * 10.0 - 5.0, max(max(gains, default=0.0), 0.0) + 5.0],
            showgrid=False,
            color=COLOURS["gain"],
            tickmode="linear",
            tick0=0,
            dtick=20 if low < -80 else 10,
        )
        layout["margin"]["r"] = 80
    return {"data": data, "layout": layout}


def _stems(xs: Sequence[float], tops: Sequence[float], base: float) -> tuple[list, list]:
    x: list[float | None] = []
    y: list[float | None] = []
    for xi, yi in zip(xs, tops, strict=True):
        x += [xi, xi, None]
        y += [base, yi, None]
    return x, y


def predicted_spectrum(prediction: dict[str, Any]) -> dict[str, Any]:
    """The apparent spectrum the capture should show: a stem per tone, level in dB.

    Parameters
    ----------
    prediction : dict
        The payload of POST /api/v1/fold.

    Returns
    -------
    dict
        A Plotly figure. Traces ``direct tones`` and ``aliases`` (stems and heads, level
        ``20·log10(apparent_amplitude)`` dB re 1 input unit), and ``level not given`` for
        tones without an amplitude (ticks along the bottom). With a speed tolerance each
        head carries the apparent interval as a horizontal bar.
    """
    nyq = float(prediction["nyquist_hz"])
    tones = prediction["tones"]
    known = [(i, _level_db(t.get("apparent_amplitude"))) for i, t in enumerate(tones)]
    levels = [lv for _, lv in known if lv is not None]
    if levels:
        top = max(levels) + 10.0
        base = max(min(levels), max(levels) - 140.0) - 15.0
    else:
        top, base = 0.0, -100.0
    data: list[dict[str, Any]] = []
    with_tol = float(prediction.get("speed_tolerance_pct") or 0.0) > 0
    for name, colour, symbol, want_alias in (
        ("direct tones", COLOURS["direct"], "circle", False),
        ("aliases", COLOURS["alias"], "diamond", True),
    ):
        pts = [
            (i, lv) for i, lv in known if lv is not None and bool(tones[i]["aliased"]) is want_alias
        ]
        if not pts:
            continue
        xs = [tones[i]["apparent_hz"] for i, _ in pts]
        ys = [max(lv, base) for _, lv in pts]
        sx, sy = _stems(xs, ys, base)
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": name,
                "legendgroup": name,
                "x": sx,
                "y": sy,
                "line": {"color": colour, "width": 1.5},
                "hoverinfo": "skip",
            }
        )
        head: dict[str, Any] = {
            "type": "scatter",
            "mode": "markers",
            "name": name,
            "legendgroup": name,
            "showlegend": False,
            "x": xs,
            "y": ys,
            "marker": {"color": colour, "symbol": symbol, "size": 8},
            "hovertext": [_hover(tones[i]) for i, _ in pts],
            "hoverinfo": "text",
            "customdata": [i for i, _ in pts],
        }
        if with_tol:
            head["error_x"] = {
                "type": "data",
                "symmetric": False,
                "array": [tones[i]["apparent_high_hz"] - tones[i]["apparent_hz"] for i, _ in pts],
                "arrayminus": [
                    tones[i]["apparent_hz"] - tones[i]["apparent_low_hz"] for i, _ in pts
                ],
                "color": colour,
                "thickness": 1,
                "width": 3,
            }
        data.append(head)
    unknown = [i for i, lv in known if lv is None]
    if unknown:
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": "level not given",
                "x": [tones[i]["apparent_hz"] for i in unknown],
                "y": [base for _ in unknown],
                "marker": {
                    "color": [
                        COLOURS["alias"] if tones[i]["aliased"] else COLOURS["unknown"]
                        for i in unknown
                    ],
                    "symbol": "triangle-up-open",
                    "size": 9,
                },
                "hovertext": [_hover(tones[i]) for i in unknown],
                "hoverinfo": "text",
                "customdata": unknown,
            }
        )
    shapes: list[dict[str, Any]] = []
    band = prediction.get("band_hz")
    if band:
        shapes.append(
            {
                "type": "rect",
                "name": "band of interest",
                "xref": "x",
                "yref": "paper",
                "x0": band[0],
                "x1": min(band[1], nyq),
                "y0": 0,
                "y1": 1,
                "fillcolor": COLOURS["band"],
                "line": {"width": 0},
                "layer": "below",
            }
        )
    layout = _base_layout("Predicted apparent spectrum")
    layout["xaxis"] = _axis("apparent frequency, Hz", range=[0, nyq])
    layout["yaxis"] = _axis("predicted level, dB re 1 input unit", range=[base - 3.0, top])
    layout["shapes"] = shapes
    return {"data": data, "layout": layout}


#: How each verdict of a diagnosis is drawn: legend name, colour, marker symbol.
#: ``family_alias`` is a harmonic-family member folded from above the Nyquist frequency.
VERDICT_STYLES: dict[str, tuple[str, str, str]] = {
    "alias": ("alias", COLOURS["alias"], "diamond"),
    "family_alias": ("alias (harmonic family)", COLOURS["alias"], "diamond-open"),
    "mirror": ("mirror near fs/2", COLOURS["gain"], "square"),
    "direct": ("real (direct)", COLOURS["direct"], "circle"),
    "family": ("real (harmonic family)", COLOURS["direct"], "circle-open"),
    "unexplained": ("unexplained", COLOURS["unknown"], "x"),
    "clipping": ("clipping product", COLOURS["unknown"], "triangle-up"),
}


def display_verdict(peak: dict[str, Any]) -> str:
    """The drawing key of a diagnosed peak: a family member above fs/2 draws as an alias."""
    verdict = str(peak.get("verdict") or "unexplained")
    if verdict == "family":
        return "family_alias" if (peak.get("zone") or 1) > 1 else "family"
    return verdict if verdict in VERDICT_STYLES else "unexplained"


def _vline(x: float, name: str, colour: str, text: str, dash: str = "dash") -> tuple[dict, dict]:
    shape = {
        "type": "line",
        "name": name,
        "xref": "x",
        "yref": "paper",
        "x0": x,
        "x1": x,
        "y0": 0,
        "y1": 1,
        "line": {"color": colour, "width": 1.5, "dash": dash},
    }
    note = {
        "x": x,
        "y": 1.0,
        "xref": "x",
        "yref": "paper",
        "xanchor": "right",
        "yanchor": "top",
        "text": text,
        "showarrow": False,
        "font": {"size": 11, "color": colour},
        "bgcolor": "rgba(255,255,255,0.8)",
    }
    return shape, note


def measured_spectrum(
    freq_hz: Sequence[float] | np.ndarray,
    amplitude_db: Sequence[float] | np.ndarray,
    floor_db: Sequence[float] | np.ndarray | None = None,
    peaks: Sequence[dict[str, Any]] | None = None,
    buckets: int = DEFAULT_BUCKETS,
    nyquist_hz: float | None = None,
    span_hz: float | None = None,
    band_hz: Sequence[float] | None = None,
    title: str = "Measured spectrum",
) -> dict[str, Any]:
    """A measured spectrum, thinned per pixel bucket, with its floor and marked peaks.

    Parameters
    ----------
    freq_hz, amplitude_db : array_like
        Line frequencies, Hz, and levels, dB.
    floor_db : array_like, optional
        Estimated noise floor per line, dB (thinned with the same buckets).
    peaks : list of dict, optional
        Each with ``freq_hz``, ``level_db``, ``verdict`` (a key of ``VERDICT_STYLES``:
        ``alias``, ``family_alias``, ``mirror``, ``direct``, ``family`` or
        ``unexplained``) and ``explanation`` (hover text, plain).
    buckets : int
        Display buckets for :func:`minmax_decimate`.
    nyquist_hz, span_hz : float, optional
        Drawn as vertical lines: fs/2, and the edge of the analysed span fs/2.56 (between
        the two, the filter's transition band lets folded energy in).
    band_hz : (float, float), optional
        Band of interest, Hz, shaded.
    title : str
        Figure title.

    Returns
    -------
    dict
        A Plotly figure with traces ``spectrum``, ``noise floor`` and one per verdict
        present, named by ``VERDICT_STYLES``.
    """
    f, a = minmax_decimate(freq_hz, amplitude_db, buckets)
    data: list[dict[str, Any]] = [
        {
            "type": "scatter",
            "mode": "lines",
            "name": "spectrum",
            "x": np.round(f, 4).tolist(),
            "y": np.round(a, 2).tolist(),
            "line": {"color": COLOURS["spectrum"], "width": 1},
            "hovertemplate": "%{x:.2f} Hz: %{y:.1f} dB<extra></extra>",
        }
    ]
    if floor_db is not None:
        # The floor is smooth: thinning it by stride keeps its shape.
        fl = np.asarray(floor_db, dtype=np.float64)
        step = max(1, fl.size // buckets)
        fx = np.asarray(freq_hz, dtype=np.float64)[::step]
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": "noise floor",
                "x": np.round(fx, 4).tolist(),
                "y": np.round(fl[::step], 2).tolist(),
                "line": {"color": COLOURS["floor"], "width": 1.5, "dash": "dot"},
                "hoverinfo": "skip",
            }
        )
    for verdict, (name, colour, symbol) in VERDICT_STYLES.items():
        group = [p for p in peaks or () if p.get("verdict", "unexplained") == verdict]
        if not group:
            continue
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": name,
                "x": [p["freq_hz"] for p in group],
                "y": [p["level_db"] for p in group],
                "marker": {
                    "color": colour,
                    "symbol": symbol,
                    "size": 11 if "alias" in verdict else 9,
                    "line": {"color": colour, "width": 2},
                },
                "hovertext": [
                    f"{p['freq_hz']:.2f} Hz, {p['level_db']:.1f} dB<br>"
                    f"{_esc(p.get('explanation', name))}"
                    for p in group
                ],
                "hoverinfo": "text",
                "customdata": [p.get("index", i) for i, p in enumerate(group)],
            }
        )
    shapes: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    if band_hz:
        shapes.append(
            {
                "type": "rect",
                "name": "band of interest",
                "xref": "x",
                "yref": "paper",
                "x0": band_hz[0],
                "x1": band_hz[1],
                "y0": 0,
                "y1": 1,
                "fillcolor": COLOURS["band"],
                "line": {"width": 0},
                "layer": "below",
            }
        )
    if span_hz is not None and (nyquist_hz is None or span_hz < nyquist_hz):
        sh, an = _vline(float(span_hz), "analysed span edge", COLOURS["band_edge"], "span edge")
        shapes.append(sh)
        annotations.append(an)
    if nyquist_hz is not None:
        sh, an = _vline(float(nyquist_hz), "Nyquist", COLOURS["fold"], "fs/2", dash="solid")
        shapes.append(sh)
        annotations.append(an)
    layout = _base_layout(title)
    layout["xaxis"] = _axis("frequency, Hz")
    layout["yaxis"] = _axis("level, dB")
    layout["shapes"] = shapes
    layout["annotations"] = annotations
    return {"data": data, "layout": layout}


def _peak_tone(p: dict[str, Any]) -> dict[str, Any]:
    """A diagnosed peak as a tone of a fold payload, for :func:`folding_diagram`."""
    zone = int(p.get("zone") or 1)
    att = next(
        (
            e.get("attenuation_db")
            for e in p.get("alternatives") or ()
            if e.get("attenuation_db") is not None and e.get("true_hz") == p.get("true_hz")
        ),
        None,
    )
    return {
        "label": p.get("tone") or p.get("verdict", ""),
        "source": p.get("source") or "",
        "freq_hz": float(p["true_hz"]),
        "apparent_hz": float(p["freq_hz"]),
        "zone": zone,
        "inverted": bool(p.get("inverted")),
        "attenuation_db": float(att) if att is not None else 0.0,
        "apparent_amplitude": p.get("amplitude"),
        "aliased": zone > 1,
        "in_band": bool(p.get("in_band")),
    }


def diagnosis_folding_diagram(
    diagnosis: dict[str, Any],
    gain_curve: dict[str, list[float]] | None = None,
    max_labels: int = DEFAULT_MAX_LABELS,
) -> dict[str, Any] | None:
    """The folding diagram of a diagnosis: each attributed peak from its true frequency
    (across) to where it was measured (up).

    Parameters
    ----------
    diagnosis : dict
        The payload of POST /api/v1/diagnose.
    gain_curve : dict, optional
        As for :func:`folding_diagram`.
    max_labels : int
        Most peaks written on the diagram.

    Returns
    -------
    dict or None
        A Plotly figure as :func:`folding_diagram` draws it (traces ``fold line``,
        ``direct tones``, ``aliases``), or None when no peak has a true frequency.
    """
    peaks = [p for p in diagnosis.get("peaks", ()) if p.get("true_hz") is not None]
    if not peaks:
        return None
    pred = {
        "final_rate_hz": diagnosis["final_rate_hz"],
        "band_hz": diagnosis.get("band_hz"),
        "tones": [_peak_tone(p) for p in peaks],
    }
    fig = folding_diagram(pred, gain_curve=gain_curve, max_labels=max_labels)
    for trace in fig["data"]:
        if trace["name"] == "direct tones":
            trace["name"] = "real peaks"
        elif trace["name"] == "aliases":
            trace["name"] = "alias peaks"
    fig["layout"]["title"]["text"] = "Folding diagram: where each explained peak came from"
    return fig


#: Multi-rate verdicts: legend name, colour, symbol.
COMPARE_STYLES: dict[str, tuple[str, str, str]] = {
    "alias": ("moves: alias", COLOURS["alias"], "diamond"),
    "ambiguous": ("ambiguous: several true frequencies fit", COLOURS["gain"], "square"),
    "real": ("stays: real", COLOURS["direct"], "circle"),
    "unmatched": ("in one capture only, or no common true frequency", COLOURS["unknown"], "x"),
}


def compare_spectra(
    comparison: dict[str, Any],
    spectra: list[tuple[np.ndarray, np.ndarray]] | None,
    buckets: int = DEFAULT_BUCKETS,
) -> dict[str, Any]:
    """The captures of a multi-rate test, one above the other on apparent frequency.

    Parameters
    ----------
    comparison : dict
        The payload of POST /api/v1/compare-rates (``captures`` with ``peaks``).
    spectra : list or None
        (frequency, Hz; level, dB) of each capture in order, or None to draw the peaks
        only.
    buckets : int
        Display buckets for :func:`minmax_decimate`.

    Returns
    -------
    dict
        A Plotly figure with one plot per capture (2 to 6), stacked. Traces
        ``spectrum A (rate)``... and, per capture, one per verdict (see
        :data:`COMPARE_STYLES`) with ``legendgroup`` shared across the captures.
    """
    caps = comparison["captures"]
    n = len(caps)
    data: list[dict[str, Any]] = []
    layout = _base_layout("The captures: peaks that move with the sample rate are aliases")
    shown: set[str] = set()
    top = max(float(c["sample_rate_hz"]) / 2.0 for c in caps)
    gap = 0.06
    height = (1.0 - gap * (n - 1)) / n
    line_colours = (COLOURS["spectrum"], COLOURS["fold"])
    for row, cap in enumerate(caps):
        rate = float(cap["sample_rate_hz"])
        label = str(cap["label"])
        axis = "" if row == 0 else str(row + 1)
        if spectra is not None:
            f, a = minmax_decimate(spectra[row][0], spectra[row][1], buckets)
            data.append(
                {
                    "type": "scatter",
                    "mode": "lines",
                    "name": f"spectrum {label} ({rate:g} S/s)",
                    "x": np.round(f, 4).tolist(),
                    "y": np.round(a, 2).tolist(),
                    "xaxis": f"x{axis}",
                    "yaxis": f"y{axis}",
                    "line": {"color": line_colours[row % 2], "width": 1},
                    "hovertemplate": "%{x:.2f} Hz: %{y:.1f} dB<extra>" + _esc(label) + "</extra>",
                }
            )
        peaks = cap["peaks"]
        for key, (name, colour, symbol) in COMPARE_STYLES.items():
            idx = [i for i, p in enumerate(peaks) if p["verdict"] == key]
            if not idx:
                continue
            data.append(
                {
                    "type": "scatter",
                    "mode": "markers",
                    "name": name,
                    "legendgroup": key,
                    "showlegend": key not in shown,
                    "x": [peaks[i]["freq_hz"] for i in idx],
                    "y": [peaks[i]["level_db"] for i in idx],
                    "xaxis": f"x{axis}",
                    "yaxis": f"y{axis}",
                    "marker": {"color": colour, "symbol": symbol, "size": 10},
                    "hovertext": [
                        f"{_esc(label)}: {peaks[i]['freq_hz']:.2f} Hz<br>"
                        f"{_esc(peaks[i]['explanation'])}"
                        for i in idx
                    ],
                    "hoverinfo": "text",
                    "customdata": [peaks[i]["group"] for i in idx],
                }
            )
            shown.add(key)
        low = 1.0 - (row + 1) * height - row * gap
        last = row == n - 1
        layout[f"xaxis{axis}"] = _axis(
            "apparent frequency, Hz" if last else "",
            anchor=f"y{axis}",
            range=[0, top],
            **({} if row == 0 else {"matches": "x"}),
        )
        layout[f"yaxis{axis}"] = _axis(
            # Short enough not to run into the next plot's title (the legend names each).
            f"{rate / 1000:g} kS/s, dB",
            domain=[max(low, 0.0), low + height],
        )
    # The legend sits below the last plot, under its axis title (as on every figure),
    # a fixed distance in pixels whatever the number of captures; never over a plot.
    layout["height"] = 220 + 190 * n
    layout["margin"]["b"] = 170
    plot_px = layout["height"] - layout["margin"]["t"] - layout["margin"]["b"]
    layout["legend"]["y"] = -70.0 / plot_px
    return {"data": data, "layout": layout}
