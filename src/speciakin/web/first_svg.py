"""A page figure drawn as a still SVG on the server, in the place and size the browser's Plotly gives it.

The page's first view (the check and the raw data of a run) is sent with the
HTML, before the browser has evaluated a line of script (:mod:`speciakin.web.first_view`);
its figure is this still copy of the Plotly figure the page then draws:
the same traces, colours, titles, panels and legend, laid out as Plotly
lays out a figure of that width (margins, the legend's push on the right
margin, the panels' domains, the axes' ranges padded by 5 % and ticks at
1, 2 or 5 times a power of ten, about one per 80 px across and 40 px up), in
Plotly's white template.  Only what the page's raw-data figures use is
drawn: scatter traces (markers, lines, both), subplot axes in paper domains,
paper annotations, the title and the legend; a figure with anything else
gets no still copy (:class:`Unsupported`).

Every text is XML-escaped; the names in the figure were escaped for Plotly's
label markup (:func:`speciakin.web.figures.label`) and are unescaped first,
so they read as in the browser.
"""

from __future__ import annotations

import html
import math
from functools import lru_cache

import numpy as np

from speciakin.web.figures import X_TITLE_MARGIN

__all__ = ["figure_svg", "layout", "check", "Unsupported", "FONT"]

#: Plotly's font stack and text colour (the white template).
FONT = '"Open Sans", verdana, arial, sans-serif'
_TEXT = "#2a3f5f"
_GRID = "#EBF0F8"
_MARKER = 6  # Plotly's default marker size [px]
_LINE = 2  # Plotly's default line width [px]
_LEGEND_ROW = 19  # height of a legend entry [px] (12 px font)
_LEGEND_TEXT_X = 40  # the legend's symbol column [px]


class Unsupported(ValueError):
    """The figure holds something the still copy does not draw."""


@lru_cache(maxsize=1)
def _face():
    """DejaVu Sans (matplotlib's bundled font), for text widths; ``None`` without matplotlib."""
    try:
        from matplotlib import font_manager, ft2font
    except ImportError:
        return None
    return ft2font.FT2Font(font_manager.findfont("DejaVu Sans"))


def text_width(text: str, size: float) -> float:
    """Width of ``text`` at ``size`` px in DejaVu Sans (what the browser uses when none of Plotly's fonts is
    installed; about 0.6 em a character without matplotlib)."""
    face = _face()
    if face is None:
        return 0.6 * size * len(text)
    from matplotlib.ft2font import LoadFlags

    face.set_size(size, 72)
    face.set_text(text, 0.0, flags=LoadFlags.NO_HINTING)  # advances as the browser places them
    return face.get_width_height()[0] / 64.0


def _esc(text) -> str:
    return html.escape(html.unescape(str(text)), quote=True)


def _nice_ticks(low: float, high: float, length: float, per_px: float) -> tuple[list[float], float]:
    """Plotly's automatic ticks: the range over ``length / per_px`` (4 to 9) plus one, rounded up to 2, 5 or 10
    times a power of ten (the next one above)."""
    n = min(max(length / per_px, 4.0), 9.0) + 1.0
    rough = abs(high - low) / n
    if not rough or not math.isfinite(rough):
        return [low], 1.0
    base = 10.0 ** math.floor(math.log10(rough))
    step = base * next((m for m in (2.0, 5.0) if m > rough / base), 10.0)
    first = math.ceil(low / step - 1e-9) * step
    ticks = [first + i * step for i in range(int((high - first) / step + 1e-9) + 1)]
    return ticks, step


def _tick_text(value: float, step: float) -> str:
    digits = max(0, -int(math.floor(math.log10(step) + 1e-9)))
    text = f"{0.0 if abs(value) < step * 1e-6 else value:.{digits}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")  # as Plotly writes them: 4, 4.02
    return text.replace("-", "\u2212")


def _padded(values: list[np.ndarray], pad: bool, length: float, markers: bool) -> tuple[float, float]:
    """The axis range of Plotly's autorange: the data's, padded (x: with markers; y: always) by 5 % of the
    axis' length and the markers' radius [px]."""
    data = np.concatenate([np.asarray(v, dtype=float).ravel() for v in values]) if values else np.array([])
    data = data[np.isfinite(data)]
    if not data.size:
        return -1.0, 6.0  # Plotly's range of an empty axis
    low, high = float(data.min()), float(data.max())
    if high == low:
        return low - 1.0, high + 1.0
    if not pad:
        return low, high
    edge = 0.05 * length + (_MARKER / 2 if markers else 0.0)
    per_px = (high - low) / max(length - 2 * edge, 1.0)
    return low - edge * per_px, high + edge * per_px


def check(fig) -> None:
    """Raise :class:`Unsupported` when ``fig`` holds something the still copy does not draw (cheap: no data
    is read)."""
    for t in fig.data:
        if t.type != "scatter" or (t.fill not in (None, "none")):
            raise Unsupported(f"trace type {t.type}")
        symbol = (t.marker.symbol if t.marker else None) or "circle"
        if symbol not in ("circle", "triangle-down-open"):
            raise Unsupported(f"marker {symbol}")
    for a in fig.layout.annotations or ():
        if (a.xref or "x") != "paper" or (a.yref or "y") != "paper" or a.showarrow is not False:
            raise Unsupported("annotation outside paper coordinates")
    for name in fig.layout:
        if name.startswith(("xaxis", "yaxis")) and fig.layout[name].type not in (None, "-", "linear"):
            raise Unsupported("axis type")


def _traces(fig) -> list[dict]:
    check(fig)
    out = []
    for t in fig.data:
        mode = t.mode or "lines+markers"
        symbol = (t.marker.symbol if t.marker else None) or "circle"
        color = (t.marker.color if "markers" in mode else None) or (t.line.color if t.line else None) or _TEXT
        out.append({"x": np.asarray(t.x if t.x is not None else [], dtype=float),
                    "y": np.asarray(t.y if t.y is not None else [], dtype=float),
                    "mode": mode, "symbol": symbol, "color": color,
                    "line": (t.line.color if t.line and t.line.color else color),
                    "dash": (t.line.dash if t.line else None), "name": t.name or "",
                    "axes": (t.xaxis or "x", t.yaxis or "y"), "legend": t.showlegend is not False})
    return out


def _bottom_title(fig, xaxis: str) -> bool:
    xa = fig.layout[xaxis.replace("x", "xaxis", 1)]
    ya = fig.layout[xa.anchor.replace("y", "yaxis", 1)] if xa.anchor and xa.anchor != "free" else None
    return bool(xa.title and xa.title.text) and (ya is None or not ya.domain or ya.domain[0] == 0)


def _legend_width(entries: list[dict]) -> float:
    return float(round(max(text_width(html.unescape(e["name"]), 12) for e in entries) + _LEGEND_TEXT_X + 6))


def layout(fig, width: int) -> dict:
    """How Plotly lays out ``fig`` ``width`` px wide: ``size`` (margins ``l``, ``r``, ``t``, ``b`` and the
    plot's ``w``, ``h`` [px], as Plotly's ``_fullLayout._size``), ``height``, the traces, the legend's entries
    and ``axes``: per (x axis, y axis) of the traces, the pixel mappings, ranges, tick values and texts.

    Raises
    ------
    Unsupported
        The figure holds something this copy does not draw.
    """
    lay = fig.layout
    height = float(lay.height or 450)
    m = lay.margin
    traces = _traces(fig)
    shown = [t for t in traces if t["legend"]] if len(traces) > 1 and lay.showlegend is not False else []
    l, r, t, b = (float(v if v is not None else d) for v, d in ((m.l, 80), (m.r, 80), (m.t, 100), (m.b, 80)))
    if shown:  # the legend, at 1.02 of the plot's width, pushes the right margin
        r = max(r, (0.02 * (width - l) + _legend_width(shown) + 12) / 1.02)
    if any(_bottom_title(fig, tr["axes"][0]) for tr in traces):
        b = max(b, float(X_TITLE_MARGIN))  # an x-axis title at the bottom pushes the bottom margin
    l, r, t, b = (float(round(v)) for v in (l, r, t, b))  # Plotly rounds the margins to whole pixels
    pw, ph = max(width - l - r, 10.0), max(height - t - b, 10.0)
    return {"size": {"l": l, "r": r, "t": t, "b": b, "w": pw, "h": ph}, "height": height, "traces": traces,
            "legend": shown, "axes": _axes(fig, traces, l, t, pw, ph)}


def figure_svg(fig, width: int) -> str:
    """The still SVG of Plotly figure ``fig`` (``plotly.graph_objects.Figure``) drawn ``width`` px wide.

    Raises
    ------
    Unsupported
        The figure holds something this copy does not draw.
    """
    lay = fig.layout
    geo = layout(fig, width)
    height, traces, shown, axes = geo["height"], geo["traces"], geo["legend"], geo["axes"]
    l, t, pw, ph = (geo["size"][k] for k in "ltwh")
    svg = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height:g}" '
           f'viewBox="0 0 {width} {height:g}" font-family=\'{FONT}\' fill="{_TEXT}">',
           f'<rect width="{width}" height="{height:g}" fill="#ffffff"/>']
    for ax in axes.values():
        svg += ax["grid"]
    for tr in traces:
        svg += _draw_trace(tr, axes)
    for ax in axes.values():
        svg += ax["labels"]
    for a in lay.annotations or ():
        svg.append(_annotation(a, l, t, pw, ph))
    if lay.title and lay.title.text:
        size = (lay.title.font.size if lay.title.font and lay.title.font.size else 17)
        svg.append(f'<text x="{0.05 * width:.1f}" y="{t / 2:.1f}" font-size="{size}">'
                   f"{_esc(lay.title.text)}</text>")
    if shown:
        svg += _legend(shown, l + 1.02 * pw, t)
    svg.append("</svg>")
    return "\n".join(svg)


def _axes(fig, traces, l, t, pw, ph) -> dict:
    """Per axis pair of the traces: pixel mapping, grid lines and tick labels."""
    lay = fig.layout
    out = {}
    for pair in dict.fromkeys(tr["axes"] for tr in traces):
        xa, ya = lay[pair[0].replace("x", "xaxis", 1)], lay[pair[1].replace("y", "yaxis", 1)]
        if xa.type not in (None, "-", "linear") or ya.type not in (None, "-", "linear"):
            raise Unsupported("axis type")
        xd, yd = (xa.domain or (0, 1)), (ya.domain or (0, 1))
        x0, x1 = l + xd[0] * pw, l + xd[1] * pw
        y0, y1 = t + (1 - yd[0]) * ph, t + (1 - yd[1]) * ph  # bottom, top [px]
        mine = [tr for tr in traces if tr["axes"] == pair]
        markers = any("markers" in tr["mode"] for tr in mine)
        xr = _padded([tr["x"] for tr in mine], markers, x1 - x0, markers)
        yr = _padded([tr["y"] for tr in mine], True, y0 - y1, markers)
        fx = (lambda v, a=x0, s=(x1 - x0) / (xr[1] - xr[0]), o=xr[0]: a + (v - o) * s)
        fy = (lambda v, a=y0, s=(y0 - y1) / (yr[1] - yr[0]), o=yr[0]: a - (v - o) * s)
        grid, labels = [], []
        xt, xs = _nice_ticks(*xr, x1 - x0, 80)
        yt, ys = _nice_ticks(*yr, y0 - y1, 40)
        for v in xt:  # tick labels where Plotly puts them (12 px text below the axis, left of it)
            _tick(grid, labels, (fx(v), fx(v), y1, y0), (fx(v), y0 + 13.4, "middle"), v, xs)
        for v in yt:
            _tick(grid, labels, (x0, x1, fy(v), fy(v)), (x0 - 2, fy(v) + 4.1, "end"), v, ys)
        if xa.title and xa.title.text:
            labels.append(f'<text x="{(x0 + x1) / 2:.1f}" y="{y0 + 40:.1f}" font-size="14" text-anchor="middle">'
                          f"{_esc(xa.title.text)}</text>")
        if ya.title and ya.title.text:
            labels.append(f'<text transform="translate({x0 - 35:.1f},{(y0 + y1) / 2:.1f}) rotate(-90)" '
                          f'font-size="14" text-anchor="middle">{_esc(ya.title.text)}</text>')
        out[pair] = {"fx": fx, "fy": fy, "grid": grid, "labels": labels, "range": (xr, yr),
                     "ticks": ([_tick_text(v, xs) for v in xt], [_tick_text(v, ys) for v in yt])}
    return out


def _tick(grid: list, labels: list, line: tuple, place: tuple, value: float, step: float) -> None:
    """A grid line (the zero line twice as wide) and its tick label."""
    x1, x2, y1, y2 = line
    grid.append(f'<line x1="{x1:.1f}" x2="{x2:.1f}" y1="{y1:.1f}" y2="{y2:.1f}" stroke="{_GRID}" '
                f'stroke-width="{2 if abs(value) < step * 1e-6 else 1}"/>')
    x, y, anchor = place
    labels.append(f'<text x="{x:.1f}" y="{y:.1f}" font-size="12" text-anchor="{anchor}">'
                  f"{_tick_text(value, step)}</text>")


def _draw_trace(tr, axes) -> list[str]:
    ax = axes[tr["axes"]]
    x, y = ax["fx"](tr["x"]), ax["fy"](tr["y"])
    ok = np.isfinite(x) & np.isfinite(y)
    out = []
    if "lines" in tr["mode"] and ok.sum() > 1:
        # a gap (a missing value) breaks the line, as in Plotly
        parts, pen = [], "M"
        for xi, yi, good in zip(x, y, ok):
            if good:
                parts.append(f"{pen}{xi:.1f} {yi:.1f}")
                pen = "L"
            else:
                pen = "M"
        dash = ' stroke-dasharray="9 9"' if tr["dash"] == "dash" else ""
        out.append(f'<path d="{" ".join(parts)}" fill="none" stroke="{_esc(tr["line"])}" '
                   f'stroke-width="{_LINE}" stroke-linejoin="round"{dash}/>')
    if "markers" in tr["mode"]:
        color = _esc(tr["color"])
        for xi, yi in zip(x[ok], y[ok]):
            out.append(_marker(tr["symbol"], xi, yi, color))
    return out


def _marker(symbol: str, x: float, y: float, color: str) -> str:
    if symbol == "triangle-down-open":
        h = _MARKER / 2
        return (f'<path d="M{x - h:.1f} {y - h * 0.6:.1f}L{x + h:.1f} {y - h * 0.6:.1f}L{x:.1f} {y + h:.1f}Z" '
                f'fill="none" stroke="{color}" stroke-width="1"/>')
    return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{_MARKER / 2:g}" fill="{color}"/>'


def _annotation(a, l, t, pw, ph) -> str:
    if (a.xref or "x") != "paper" or (a.yref or "y") != "paper" or a.showarrow is not False:
        raise Unsupported("annotation outside paper coordinates")
    x, y = l + float(a.x) * pw, t + (1 - float(a.y)) * ph
    size = a.font.size if a.font and a.font.size else 12
    color = a.font.color if a.font and a.font.color else _TEXT
    xanchor = a.xanchor if a.xanchor not in (None, "auto") else (
        "left" if a.x <= 1 / 3 else "right" if a.x >= 2 / 3 else "center")
    yanchor = a.yanchor if a.yanchor not in (None, "auto") else (
        "bottom" if a.y <= 1 / 3 else "top" if a.y >= 2 / 3 else "middle")
    anchor = {"left": "start", "right": "end", "center": "middle"}[xanchor]
    x += {"left": 1, "right": -1, "center": 0}[xanchor]  # Plotly's 1 px border padding
    base = {"bottom": y - size * 0.3 - 1, "top": y + size * 0.95 + 1, "middle": y + size * 0.35}[yanchor]
    return (f'<text x="{x:.1f}" y="{base:.1f}" font-size="{size}" fill="{_esc(color)}" '
            f'text-anchor="{anchor}">{_esc(a.text)}</text>')


def _legend(entries, x: float, top: float) -> list[str]:
    out = []
    for i, e in enumerate(entries):
        y = top + 5 + _LEGEND_ROW * i + _LEGEND_ROW / 2
        color = _esc(e["color"])
        if "lines" in e["mode"]:
            dash = ' stroke-dasharray="6 6"' if e["dash"] == "dash" else ""
            out.append(f'<line x1="{x + 5:.1f}" x2="{x + 35:.1f}" y1="{y:.1f}" y2="{y:.1f}" '
                       f'stroke="{_esc(e["line"])}" stroke-width="{_LINE}"{dash}/>')
        if "markers" in e["mode"]:
            out.append(_marker(e["symbol"], x + 20, y, color))
        out.append(f'<text x="{x + _LEGEND_TEXT_X:.1f}" y="{y + 4.5:.1f}" font-size="12">{_esc(e["name"])}</text>')
    return out
