"""The audit page's figure: strongest in-band alias level of each recording, per setup.

Input is the saved audit summary (``usecases.audit.audit_result``). Output is a plain
JSON-ready dict of Python floats and strings; setup names come from a manifest and are
HTML-escaped, because Plotly reads a small subset of HTML in names and hover text.
"""

from __future__ import annotations

import html
from collections.abc import Mapping
from typing import Any

from .figures import COLOURS, FONT

__all__ = ["alias_levels_by_setup"]


def _esc(text: Any) -> str:
    return html.escape(str(text), quote=False)


def alias_levels_by_setup(result: Mapping[str, Any]) -> dict[str, Any]:
    """One box of points per acquisition setup (riskiest first): each point a recording's
    strongest in-band alias level (dB); recordings without one are counted in the name."""
    traces = []
    for s in result["setups"]:
        levels = [float(v) for v in s["levels_db"]]
        clean = s["recordings"] - s["errors"] - len(levels)
        name = f"{_esc(s['setup'])} ({len(levels)} with an in-band alias, {clean} clean)"
        traces.append(
            {
                "type": "box",
                "name": name,
                "y": levels,
                "x": [_esc(s["setup"])] * len(levels),
                "boxpoints": "all",
                "jitter": 0.35,
                "pointpos": 0,
                "marker": {"color": COLOURS["alias"], "size": 6},
                "line": {"color": COLOURS["fold"]},
                "hovertemplate": "%{y:.1f} dB<extra>%{x}</extra>",
            }
        )
    return {
        "data": traces,
        "layout": {
            "font": {"family": FONT, "color": COLOURS["ink"]},
            "title": {"text": "Strongest in-band alias level of each recording, by setup"},
            "yaxis": {"title": {"text": "alias level, dB"}, "gridcolor": COLOURS["grid"]},
            "xaxis": {"title": {"text": "acquisition setup"}},
            "showlegend": False,
            "margin": {"l": 60, "r": 20, "t": 50, "b": 80},
        },
    }
