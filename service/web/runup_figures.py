"""The run-up page's Plotly figures, built from the API's run-up answer alone.

The answer's ``display`` payload (the map reduced per block, lines decimated, the order
spectrum reduced by a maximum per bucket) is all a figure needs, so a saved result
redraws exactly as it was computed. Shared look (palette, font, axes) comes from
:mod:`service.web.figures`.
"""

from __future__ import annotations

import math
from typing import Any

from .figures import COLOURS, _axis, _base_layout, _esc

__all__ = ["runup_map_figure", "runup_order_figure"]

#: Colours of a line's verdict on the map.
KIND_COLOURS = {
    "order": COLOURS["direct"],
    "folded_order": COLOURS["alias"],
    "fixed_alias": COLOURS["alias"],
    "sideband": "#b45309",
    "resonance": COLOURS["gain"],
    "fixed": COLOURS["unknown"],
    "unexplained": COLOURS["unknown"],
}
#: Lines labelled on the map (the rest keep their hover text).
MAX_LABELS = 16


def runup_map_figure(out: dict[str, Any]) -> dict[str, Any]:
    """The map: frequency × speed with level as colour, the lines found (labelled) and the
    chain's predicted folded lines (dotted)."""
    disp = out["display"]
    mp = disp["map"]
    nyq = float(out["map"]["nyquist_hz"])
    data: list[dict[str, Any]] = [
        {
            "type": "heatmap",
            "x": mp["rpm"],
            "y": mp["freq_hz"],
            # The payload is speed-major; Plotly's z is rows of y (frequency).
            "z": [list(col) for col in zip(*mp["level_db"], strict=True)] if mp["level_db"] else [],
            "colorscale": "Viridis",
            "colorbar": {"title": {"text": "dB"}},
            "zsmooth": False,
            "hovertemplate": "%{x:.0f} rpm, %{y:.0f} Hz: %{z:.1f} dB<extra></extra>",
            "name": "level",
            "showlegend": False,
        }
    ]
    annotations = []
    for i, pred in enumerate(out.get("predicted", [])):
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "x": pred["rpm"],
                "y": pred["apparent_hz"],
                "line": {"color": "#ffffff", "width": 1, "dash": "dot"},
                "opacity": 0.8,
                "name": "chain's prediction" if i == 0 else _esc(pred["label"]),
                "legendgroup": "predicted",
                "showlegend": i == 0,
                "hovertemplate": _esc(pred["label"]) + " (predicted): %{y:.0f} Hz<extra></extra>",
            }
        )
    shown: set[str] = set()
    for i, ln in enumerate(disp["lines"]):
        kind = ln["kind"]
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "x": ln["rpm"],
                "y": ln["freq_hz"],
                "marker": {"size": 4, "color": KIND_COLOURS.get(kind, COLOURS["unknown"])},
                "name": kind.replace("_", " "),
                "legendgroup": kind,
                "showlegend": kind not in shown,
                "hovertemplate": _esc(ln["label"]) + ": %{x:.0f} rpm, %{y:.0f} Hz"
                "<extra>" + _esc(kind.replace("_", " ")) + "</extra>",
            }
        )
        shown.add(kind)
        if i < MAX_LABELS and ln["rpm"]:
            annotations.append(
                {
                    "x": ln["rpm"][-1],
                    "y": ln["freq_hz"][-1],
                    "text": _esc(ln["label"]),
                    "showarrow": False,
                    "xanchor": "right",
                    "yanchor": "bottom",
                    "font": {"size": 11, "color": "#ffffff"},
                }
            )
    layout = _base_layout("Frequency against speed")
    layout["xaxis"] = _axis("Shaft speed, rpm")
    layout["yaxis"] = _axis("Apparent frequency, Hz", range=[0, nyq])
    layout["annotations"] = annotations
    layout["height"] = 560
    return {"data": data, "layout": layout}


def runup_order_figure(out: dict[str, Any]) -> dict[str, Any]:
    """The order spectrum, with each folded known order's span of apparent orders shaded
    (it moves with speed: ``fold(k·r, fs) / r``) and its true order marked."""
    osp = out["display"]["order_spectrum"]
    data: list[dict[str, Any]] = [
        {
            "type": "scatter",
            "mode": "lines",
            "x": osp["order"],
            "y": osp["level_db"],
            "line": {"color": COLOURS["spectrum"], "width": 1},
            "name": "order spectrum",
            "hovertemplate": "order %{x:.2f}: %{y:.1f} dB<extra></extra>",
        }
    ]
    shapes = []
    annotations = []
    for pred in out.get("predicted", []):
        span = pred.get("apparent_order_range")
        if not pred.get("aliased") or not span:
            continue
        lo, hi = span
        if math.isclose(lo, hi):
            hi = lo + 0.05
        shapes.append(
            {
                "type": "rect",
                "xref": "x",
                "yref": "paper",
                "x0": lo,
                "x1": hi,
                "y0": 0,
                "y1": 1,
                "fillcolor": "rgba(194, 65, 12, 0.12)",
                "line": {"width": 0},
            }
        )
        annotations.append(
            {
                "x": (lo + hi) / 2,
                "y": 1.0,
                "yref": "paper",
                "text": _esc(f"{pred['label']} (folded)"),
                "showarrow": False,
                "textangle": -90,
                "yanchor": "top",
                "font": {"size": 10, "color": COLOURS["alias"]},
            }
        )
    layout = _base_layout("Order spectrum (computed order tracking)")
    layout["xaxis"] = _axis("Order, per revolution")
    layout["yaxis"] = _axis("Level, dB")
    layout["shapes"] = shapes
    layout["annotations"] = annotations
    layout["height"] = 420
    return {"data": data, "layout": layout}
