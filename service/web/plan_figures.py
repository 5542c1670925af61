"""The run-up figure of the plan page, built in Python as a plain JSON-ready dict.

Input is the plan payload of the JSON API (``plan_payload``) with its ``runup`` part: every
line's apparent frequency on a speed grid, its Nyquist zone there and its fold lines (the
speeds where its true frequency crosses a multiple of fs/2). The apparent frequency
``|f - fs·round(f/fs)|`` is piecewise linear in speed with its corners exactly at the fold
lines, so inserting the fold points between the grid points draws each line exactly.

Outputs hold Python floats, ``None`` (a gap) and strings only, never numpy objects. Text
that came from a user (tone labels, source names) is HTML-escaped, because Plotly reads a
small subset of HTML in names and hover text.
"""

from __future__ import annotations

import bisect
import html
import itertools
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..core.folding import fold_unchecked
from .figures import COLOURS, FONT

__all__ = ["MAX_DRAWN_LINES", "runup_figure"]

#: Most lines drawn (lines of interest first, then those that fold back); a page with
#: thousands of traces would not stay usable. The JSON answer keeps every line.
MAX_DRAWN_LINES = 150

_GREY_LINE = "#858e9b"
_SAME_X = 1e-9  # relative: a fold point on a grid point is the grid point


def _esc(text: Any) -> str:
    return html.escape(str(text), quote=False)


def _fmt_hz(v: float) -> str:
    return f"{v:,.1f} Hz" if v < 10_000 else f"{v / 1000:,.3f} kHz"


@dataclass(frozen=True)
class _Point:
    x: float
    y: float
    zone: int | None  # grid points: the zone there; fold points: None
    multiple: int | None  # fold points: k of k·fs/2


def _corner_hz(k: int, half: float) -> float:
    """Where the true frequency k·fs/2 shows: fs/2 for odd k, 0 Hz for even k (the fold)."""
    return float(fold_unchecked(np.array([k * half]), 2.0 * half)[0])


def _points(xs: Sequence[float], line: Mapping[str, Any], use_rpm: bool, half: float) -> list:
    """Grid points and fold points of one line, in order of speed."""
    pts = [
        _Point(float(x), float(y), int(z), None)
        for x, y, z in zip(xs, line["apparent_hz"], line["zone"], strict=True)
    ]
    lo, hi = pts[0].x, pts[-1].x
    scale = max(abs(lo), abs(hi), 1.0)
    folds = []
    for f in line["fold_lines"]:
        x = f["rpm"] if use_rpm else f["speed_factor"]
        if x is None or not lo < x < hi:
            continue
        k = int(f["multiple"])
        folds.append(_Point(float(x), _corner_hz(k, half), None, k))
    if not folds:
        return pts
    grid_x = [p.x for p in pts]

    def on_grid(x: float) -> bool:
        i = bisect.bisect_left(grid_x, x)
        near = grid_x[max(i - 1, 0) : i + 1]
        return any(abs(x - g) <= _SAME_X * scale for g in near)

    folds = [f for f in folds if not on_grid(f.x)]
    return sorted(pts + folds, key=lambda p: p.x)


def _zone_between(a: _Point, b: _Point) -> int:
    """Nyquist zone of the stretch between two neighbouring points."""
    if a.zone is not None and b.zone is not None:
        return max(a.zone, b.zone)
    if a.zone is not None:
        return a.zone
    if b.zone is not None:
        return b.zone
    # Between the folds at k·fs/2 and (k+1)·fs/2 lies zone k + 1.
    return max(a.multiple or 0, b.multiple or 0)


def _split(pts: Sequence[_Point]) -> tuple[list, list, list, list]:
    """The direct and the aliased stretches as x/y lists with ``None`` between runs."""
    dx: list[float | None] = []
    dy: list[float | None] = []
    ax: list[float | None] = []
    ay: list[float | None] = []
    prev: bool | None = None
    for a, b in itertools.pairwise(pts):
        aliased = _zone_between(a, b) > 1
        tx, ty = (ax, ay) if aliased else (dx, dy)
        if aliased is not prev:
            if tx:
                tx.append(None)
                ty.append(None)
            tx.append(a.x)
            ty.append(a.y)
        tx.append(b.x)
        ty.append(b.y)
        prev = aliased
    return dx, dy, ax, ay


def _pick_lines(lines: Sequence[Mapping[str, Any]], max_lines: int) -> list[int]:
    """Lines to draw: of interest first, then those that fold back, in their order."""
    rank = sorted(
        range(len(lines)),
        key=lambda j: (not lines[j]["interest"], not any(z > 1 for z in lines[j]["zone"]), j),
    )
    return sorted(rank[:max_lines])


def _legend_key(name: str, rank: int, **style: Any) -> dict[str, Any]:
    """A trace that only shows in the legend (the tone lines themselves do not)."""
    return {
        "type": "scatter",
        "x": [None],
        "y": [None],
        "name": name,
        "hoverinfo": "skip",
        "showlegend": True,
        "legendrank": rank,
        "meta": {"part": "key"},
        **style,
    }


def runup_figure(plan: Mapping[str, Any], max_lines: int = MAX_DRAWN_LINES) -> dict[str, Any]:
    """Apparent frequency of every line against speed through the recommended chain.

    Parameters
    ----------
    plan : mapping
        The plan payload (``service.api.plan_compute.plan_payload``) with a ``runup``.
    max_lines : int
        Most lines drawn; lines of interest and lines that fold back come first.

    Returns
    -------
    dict
        A Plotly figure (``data`` and ``layout``). Each drawn line has one trace for its
        direct stretches (``meta.part == "direct"``, named after the line, possibly
        empty) and, when it folds back somewhere, one dashed trace for its aliased
        stretches (``meta.part == "alias"``). Fold points, alias crossings, the band of
        interest and fs/2 are marked. ``layout.meta`` gives lines drawn and in total.

    Raises
    ------
    ValueError
        When the payload has no run-up.
    """
    ru = plan.get("runup")
    if not ru:
        raise ValueError("the plan has no run-up; ask for one with 'runup'")
    use_rpm = ru["rpm"] is not None
    xs = ru["rpm"] if use_rpm else ru["speed_factor"]
    x_unit = "rpm" if use_rpm else "× nominal"
    x_fmt = "%{x:,.0f} rpm" if use_rpm else "%{x:.3f} × nominal"
    fs = float(ru["final_rate_hz"])
    half = fs / 2.0
    lines = ru["lines"]
    drawn = _pick_lines(lines, max_lines)

    data: list[dict[str, Any]] = []
    fold_x: list[float] = []
    fold_y: list[float] = []
    fold_text: list[str] = []
    for j in drawn:
        line = lines[j]
        name = f"{_esc(line['label'])} · {_esc(line['source'])}"
        pts = _points(xs, line, use_rpm, half)
        dx, dy, ax, ay = _split(pts)
        interest = bool(line["interest"])
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "x": dx,
                "y": dy,
                "name": name,
                "showlegend": False,
                "line": {
                    "color": COLOURS["direct"] if interest else _GREY_LINE,
                    "width": 2.0 if interest else 1.2,
                },
                "hovertemplate": f"<b>%{{fullData.name}}</b><br>{x_fmt} · shows at "
                "%{y:,.1f} Hz<br>direct"
                + (", line of interest" if interest else "")
                + "<extra></extra>",
                "meta": {"part": "direct", "line": j, "interest": interest},
            }
        )
        if ax:
            data.append(
                {
                    "type": "scatter",
                    "mode": "lines",
                    "x": ax,
                    "y": ay,
                    "name": name,
                    "showlegend": False,
                    "line": {"color": COLOURS["alias"], "width": 1.6, "dash": "dash"},
                    "hovertemplate": f"<b>%{{fullData.name}}</b><br>{x_fmt} · shows at "
                    "%{y:,.1f} Hz<br>alias: folded back from above fs/2<extra></extra>",
                    "meta": {"part": "alias", "line": j},
                }
            )
        for f in line["fold_lines"]:
            x = f["rpm"] if use_rpm else f["speed_factor"]
            if x is None:
                continue
            k = int(f["multiple"])
            fold_x.append(float(x))
            fold_y.append(_corner_hz(k, half))
            at = f"{x:,.0f} rpm" if use_rpm else f"{x:.3f} × nominal"
            fold_text.append(
                f"<b>{name}</b><br>true frequency crosses {k}·fs/2 = {_fmt_hz(f['true_hz'])}"
                f"<br>at {at}: it folds here"
            )

    if fold_x:
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "x": fold_x,
                "y": fold_y,
                "text": fold_text,
                "name": "fold point (k·fs/2)",
                "marker": {
                    "symbol": "diamond-open",
                    "size": 9,
                    "color": COLOURS["fold"],
                    "line": {"width": 1.8},
                },
                "hovertemplate": "%{text}<extra></extra>",
                "cliponaxis": False,
                "meta": {"part": "fold"},
            }
        )

    cx: list[float] = []
    cy: list[float] = []
    ctext: list[str] = []
    csym: list[str] = []
    for c in ru["crossings"]:
        x = c["rpm"] if use_rpm else c["speed_factor"]
        if x is None:
            continue
        cx.append(float(x))
        cy.append(float(c["apparent_hz"]))
        csym.append("circle-open" if c["touching"] else "x")
        how = "comes within the tolerance of" if c["touching"] else "crosses"
        at = f"{x:,.0f} rpm" if use_rpm else f"{x:.3f} × nominal"
        ctext.append(
            f"<b>alias {_esc(c['alias_label'])}</b> · {_esc(c['alias_source'])}<br>{how} "
            f"<b>{_esc(c['crossed_label'])}</b> · {_esc(c['crossed_source'])}<br>at {at}, "
            f"{_fmt_hz(c['apparent_hz'])}"
        )
    if cx:
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "x": cx,
                "y": cy,
                "text": ctext,
                "name": "alias meets a line of interest",
                "marker": {
                    "symbol": csym,
                    "size": 10,
                    "color": COLOURS["ink"],
                    "line": {"width": 2, "color": COLOURS["ink"]},
                },
                "hovertemplate": "%{text}<extra></extra>",
                "meta": {"part": "crossing"},
            }
        )

    data += [
        _legend_key(
            "direct line of interest",
            1,
            mode="lines",
            line={"color": COLOURS["direct"], "width": 2},
        ),
        _legend_key("other direct line", 2, mode="lines", line={"color": _GREY_LINE, "width": 1.2}),
        _legend_key(
            "alias (folded back)",
            3,
            mode="lines",
            line={"color": COLOURS["alias"], "width": 1.6, "dash": "dash"},
        ),
        _legend_key(
            "band of interest",
            4,
            mode="markers",
            marker={"symbol": "square", "size": 12, "color": "rgba(217, 160, 20, 0.35)"},
        ),
    ]

    band_lo, band_hi = (float(v) for v in ru["band_hz"])
    x0, x1 = float(xs[0]), float(xs[-1])
    shapes: list[dict[str, Any]] = [
        {
            "type": "rect",
            "xref": "paper",
            "x0": 0,
            "x1": 1,
            "yref": "y",
            "y0": band_lo,
            "y1": min(band_hi, half),
            "fillcolor": COLOURS["band"],
            "line": {"width": 0},
            "layer": "below",
        },
        {
            "type": "line",
            "xref": "paper",
            "x0": 0,
            "x1": 1,
            "yref": "y",
            "y0": half,
            "y1": half,
            "line": {"color": COLOURS["fold"], "width": 1.2, "dash": "dot"},
        },
    ]
    annotations = [
        {
            "xref": "paper",
            "x": 0.0,
            "xanchor": "left",
            "yref": "y",
            "y": half,
            "yanchor": "bottom",
            "text": f"fs/2 = {_fmt_hz(half)}",
            "showarrow": False,
            "font": {"size": 11, "color": COLOURS["fold"]},
        }
    ]
    rate = f"{fs / 1000:,.4g} kS/s" if fs >= 1000 else f"{fs:,.4g} S/s"
    layout: dict[str, Any] = {
        "title": {
            "text": f"Run-up through the recommended chain at {rate}",
            "x": 0.0,
            "xanchor": "left",
            "font": {"size": 16},
        },
        "font": {"family": FONT, "size": 13, "color": COLOURS["ink"]},
        "paper_bgcolor": "#ffffff",
        "plot_bgcolor": "#ffffff",
        "margin": {"l": 70, "r": 30, "t": 50, "b": 130},
        "hovermode": "closest",
        "hoverlabel": {"font": {"family": FONT}, "namelength": -1},
        # Below the plot: six keys do not fit in one row above it on a narrow page.
        "legend": {"orientation": "h", "x": 0.0, "y": -0.22, "yanchor": "top"},
        "showlegend": True,
        "xaxis": {
            "title": {"text": f"speed, {x_unit}"},
            "range": [x0, x1],
            "gridcolor": COLOURS["grid"],
            "zeroline": False,
            "linecolor": COLOURS["muted"],
            "ticks": "outside",
            "showline": True,
        },
        "yaxis": {
            "title": {"text": "apparent frequency, Hz"},
            "range": [0, half * 1.04],
            "gridcolor": COLOURS["grid"],
            "zeroline": False,
            "linecolor": COLOURS["muted"],
            "ticks": "outside",
            "showline": True,
        },
        "shapes": shapes,
        "annotations": annotations,
        "meta": {"lines_drawn": len(drawn), "lines_total": len(lines)},
    }
    return {"data": data, "layout": layout}
