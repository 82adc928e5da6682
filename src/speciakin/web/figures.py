"""Plotly figures of the page: raw data per run, fitted curves over data, the window, correlation, 2-D map.

Colours are the report's (:mod:`speciakin.palette`: one colour per compound
from the model's molecule order, the same shading of windows and the same
colour scales), and legends name compounds by their labels as the report does.

Long logs are thinned for display only (every k-th reading, the last kept);
the figure says so.  The fit always uses every reading: the figures read the
campaign, they never change it.
"""

from __future__ import annotations

from typing import Any

import html

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from speciakin.palette import NEUTRAL, OKABE_ITO, SpeciesColors, model_species_colors

__all__ = ["label", "compound_colors", "MAX_POINTS", "X_TITLE_MARGIN", "thin", "raw_run_figure", "fit_run_figure", "window_figure", "empty_figure",
           "correlation_figure", "map_figure"]

#: Most points of one trace drawn on the page; longer logs are thinned.
MAX_POINTS = 1500
#: The bottom margin an x-axis title at the bottom pushes a figure's to [px] (Plotly's automargin: 12 px tick
#: labels and a 14 px title of the white template, in the browser's fallback font DejaVu Sans); the raw data's
#: figure takes it from the start (one drawing, not two), and the first view's still copy lays it out so
#: (``web.first_svg``).
X_TITLE_MARGIN = 53
#: Trace kinds the page draws.
_TRACE_KINDS = ("scatter", "heatmap", "contour")


def _page_template() -> go.layout.Template:
    """Plotly's white template (white background, like the report's figures) with the trace defaults
    of the kinds the page draws only: the same look, and a third of the copying Plotly does for every
    figure that takes a template (measured: benchmarks/bench_web.py)."""
    import plotly.io as pio

    full = pio.templates["plotly_white"]
    return go.layout.Template(layout=full.layout, data={k: full.data[k] for k in _TRACE_KINDS})


#: Plotly template of every figure.
TEMPLATE = _page_template()
#: Colour of the logs (pH, temperature, titrant; each in its own panel): black, which the palette gives no
#: compound before the eighth, so that every other colour of the figure stands for one compound.
_LOG_COLOR = OKABE_ITO["black"]
_S_PER_MIN = 60.0
_KELVIN = 273.15


def thin(x: np.ndarray, y: np.ndarray, limit: int = MAX_POINTS) -> tuple[np.ndarray, np.ndarray, int]:
    """Every k-th point (first and last kept) so at most about ``limit`` remain; returns (x, y, k)."""
    n = len(x)
    if n <= limit:
        return np.asarray(x), np.asarray(y), 1
    k = int(np.ceil(n / limit))
    idx = np.unique(np.r_[np.arange(0, n, k), n - 1])
    return np.asarray(x)[idx], np.asarray(y)[idx], k


def compound_colors(model=None, molecules=()) -> SpeciesColors:
    """The colours of every figure of the page: the report's (:func:`speciakin.palette.model_species_colors`:
    one colour per compound in the model's molecule order, compound labels and short names alike), so a
    compound has the same colour in the raw data, the fitted curves and the report; without a model
    (``None``), the ``molecules`` (short names) in the order given."""
    if model is not None:
        return model_species_colors(model)
    return SpeciesColors(list(dict.fromkeys(molecules)))


def label(text) -> str:
    """User text (run, compound names) for a Plotly label: its few markup tags are escaped so that
    a name is shown as written, never read as markup."""
    return html.escape(str(text), quote=False)


def empty_figure(text: str) -> go.Figure:
    """A blank figure with one line of text (plain text: Plotly escapes it)."""
    fig = go.Figure()
    fig.add_annotation(text=text, showarrow=False, x=0.5, y=0.5, xref="paper", yref="paper")
    fig.update_xaxes(visible=False)
    fig.update_yaxes(visible=False)
    fig.update_layout(height=240, margin=dict(l=20, r=20, t=20, b=20), template=TEMPLATE)
    return fig


def _log_trace(fig: go.Figure, series, scale, name: str, row: int, col: int, notes: list[str],
               color: str) -> None:
    t, v, k = thin(series.time / _S_PER_MIN, scale(series.value))
    fig.add_trace(go.Scatter(x=t, y=v, mode="lines", name=name, line=dict(color=color)), row=row, col=col)
    if k > 1:
        notes.append(f"{name}: 1 in {k} of {len(series)} readings shown (display only; the fit uses all)")


def raw_run_figure(run, colors: SpeciesColors) -> go.Figure:
    """HPLC values, pH, temperature and titrant of one run, as imported (before any fit)."""
    fig = make_subplots(rows=2, cols=2, subplot_titles=("HPLC", "pH", "temperature [C]", "titrant [mmol]"),
                        horizontal_spacing=0.1, vertical_spacing=0.16)
    notes: list[str] = []
    h = run.hplc
    for name in dict.fromkeys(h.compound.tolist()):
        pick = h.compound == name
        shown = np.where(h.censored[pick], np.nan, h.value[pick])
        fig.add_trace(go.Scatter(x=h.time[pick] / _S_PER_MIN, y=shown, mode="markers", name=label(name),
                                 marker=dict(color=colors.color(str(h.molecule[pick][0])))), row=1, col=1)
        low = h.censored[pick]
        if low.any():
            marker = dict(symbol="triangle-down-open", color=colors.color(str(h.molecule[pick][0])))
            fig.add_trace(go.Scatter(x=h.time[pick][low] / _S_PER_MIN, y=np.nan_to_num(h.loq[pick][low]),
                                     mode="markers", name=label(f"{name} below LOQ"), marker=marker), row=1, col=1)
    other = h.other
    for name in dict.fromkeys(other.compound.tolist() if other is not None else []):
        pick = (other.compound == name) & ~other.censored
        fig.add_trace(go.Scatter(x=other.time[pick] / _S_PER_MIN, y=other.value[pick], mode="markers",
                                 name=label(f"{name} (not modelled)"), marker=dict(symbol="x", color=NEUTRAL)),
                      row=1, col=1)
    ph = run.recipe.ph
    if run.ph_log is not None and len(run.ph_log):
        _log_trace(fig, run.ph_log, lambda v: v, "pH log", 1, 2, notes, _LOG_COLOR)
    elif ph.mode == "held" and ph.setpoint is not None:
        fig.add_trace(go.Scatter(x=[0, run.recipe.end_time / _S_PER_MIN], y=[ph.setpoint] * 2, mode="lines",
                                 name="pH set point", line=dict(dash="dash", color=_LOG_COLOR)), row=1, col=2)
    if run.temperature_log is not None and len(run.temperature_log):
        _log_trace(fig, run.temperature_log, lambda v: v - _KELVIN, "temperature log", 2, 1, notes, _LOG_COLOR)
    else:
        temp = run.recipe.temperature
        times = list(temp.times) if len(temp.times) == len(temp.temperatures) else [0.0]
        fig.add_trace(go.Scatter(x=np.asarray(times) / _S_PER_MIN, y=np.asarray(temp.temperatures) - _KELVIN,
                                 mode="lines+markers", name="temperature (recipe)", line=dict(color=_LOG_COLOR)),
                      row=2, col=1)
    if run.titrant is not None and len(run.titrant.time):
        t, v, k = thin(run.titrant.time / _S_PER_MIN, run.titrant.amount * 1e3)
        fig.add_trace(go.Scatter(x=t, y=v, mode="lines", name="titrant", line=dict(color=_LOG_COLOR)), row=2, col=2)
        if k > 1:
            notes.append(f"titrant: 1 in {k} of {len(run.titrant.time)} readings shown "
                         "(display only; the fit uses all)")
    for r, c in ((1, 1), (1, 2), (2, 1), (2, 2)):
        fig.update_xaxes(title_text="time [min]", row=r, col=c)
    # drawn in one pass (docs/web.md, Speed): numeric tick labels, which the axes' automargin keeps inside the
    # figure, are not measured again for every label placed ("hide past div" does that), and the bottom margin
    # is the one the x-axis titles push it to, so that Plotly need not draw the figure a second time to widen it
    fig.update_xaxes(ticklabeloverflow="allow")
    fig.update_yaxes(ticklabeloverflow="allow")
    fig.update_layout(template=TEMPLATE, height=560, margin=dict(l=50, r=20, t=60, b=X_TITLE_MARGIN),
                      title=dict(text=f"run {label(run.name)}: data as imported", font=dict(size=15)))
    note = "; ".join(notes) if notes else "every reading shown"
    fig.add_annotation(text=note, showarrow=False, x=1, y=1.1, xref="paper", yref="paper", xanchor="right",
                       font=dict(size=11, color="#555555"))
    return fig


def fit_run_figure(prediction, observations: list, colors: SpeciesColors,
                   names: dict[str, str] | None = None) -> go.Figure:
    """Observations of one run with the fitted curve (and the posterior band when there is one).

    ``names`` maps figure keys (model short names) to compound labels for the legend.
    """
    names = names or {}
    fig = go.Figure()
    unit = prediction.value_unit
    if prediction.time is not None and prediction.values:
        for key, y in prediction.values.items():
            color, shown = colors.color(key), names.get(key, key)
            if prediction.low and key in prediction.low:
                fig.add_trace(go.Scatter(x=np.r_[prediction.time, prediction.time[::-1]],
                                         y=np.r_[prediction.high[key], prediction.low[key][::-1]], fill="toself",
                                         line=dict(width=0), fillcolor=color, opacity=0.2,
                                         name=label(f"{shown} 5-95 % band"), hoverinfo="skip"))
            fig.add_trace(go.Scatter(x=prediction.time, y=y, mode="lines", name=label(f"{shown} fitted"),
                                     line=dict(color=color)))
    for key in dict.fromkeys(o.key for o in observations if not o.titrant):
        rows = [o for o in observations if o.key == key and not o.titrant]
        fig.add_trace(go.Scatter(x=[o.time for o in rows],
                                 y=[o.observed if o.observed is not None else o.loq for o in rows],
                                 mode="markers", name=label(f"{names.get(key, key)} observed"),
                                 marker=dict(color=colors.color(key),
                                             symbol=["triangle-down-open" if o.censored else "circle" for o in rows])))
    title = f"run {label(prediction.name)}: fitted curves over data"
    if prediction.failed:
        title += " (the simulation at the fitted parameters failed)"
    elif prediction.n_band:
        title += f" (band: {prediction.n_band} posterior draws)"
    fig.update_layout(template=TEMPLATE, title=dict(text=title, font=dict(size=15)), height=460,
                      xaxis_title="time [min]",
                      yaxis_title=f"{prediction.value_label} [{unit}]" if unit else prediction.value_label,
                      margin=dict(l=60, r=20, t=60, b=40))
    return fig


def window_figure(window: Any) -> go.Figure:
    """Probability of meeting every specification against pH, with the window, the robust set points
    and the trust status (the report's shading: window sky blue, robust set points bluish green)."""
    fig = go.Figure()
    grid, p = np.asarray(window.ph, float), np.asarray(window.probability, float)
    se = np.asarray(window.probability_standard_error, float)
    for lo, hi in window.windows:
        fig.add_vrect(x0=lo, x1=hi, fillcolor=OKABE_ITO["sky blue"], opacity=0.25, line_width=0)
    for lo, hi in window.robust_windows:
        fig.add_vrect(x0=lo, x1=hi, fillcolor=OKABE_ITO["bluish green"], opacity=0.35, line_width=0)
    fig.add_trace(go.Scatter(x=np.r_[grid, grid[::-1]], y=np.r_[np.clip(p + 2 * se, 0, 1),
                                                                 np.clip(p - 2 * se, 0, 1)[::-1]],
                             fill="toself", fillcolor=OKABE_ITO["blue"], opacity=0.2, line=dict(width=0),
                             name="share of draws +/- 2 standard errors", hoverinfo="skip"))
    ph = window.curve_ph if window.curve_ph is not None else grid
    prob = window.curve_probability if window.curve_probability is not None else p
    guard = getattr(window, "mc_confidence", None)
    name = ("P(all specifications met)" if guard is None or window.curve_probability is None
            else f"lower {guard:g} confidence bound of P (window read from it)")
    fig.add_trace(go.Scatter(x=ph, y=prob, mode="lines", name=name, line=dict(color=OKABE_ITO["blue"], width=2)))
    robust = window.curve_robust_probability
    if robust is not None:
        fig.add_trace(go.Scatter(x=ph, y=robust, mode="lines", name=f"robust to +/- {window.tolerance:g} pH",
                                 line=dict(color=OKABE_ITO["vermillion"], dash="dash")))
    fig.add_hline(y=window.level, line=dict(color=NEUTRAL, dash="dash"))
    fig.add_trace(go.Scatter(x=[None], y=[None], mode="lines", line=dict(color=NEUTRAL, dash="dash"),
                             name=f"required level {window.level:.2f}"))
    for text, color, found in ((_windows_text("window", window.windows), OKABE_ITO["sky blue"], window.windows),
                               (_windows_text("robust set points", window.robust_windows),
                                OKABE_ITO["bluish green"], window.robust_windows)):
        fig.add_trace(go.Scatter(x=[None], y=[None], mode="markers", name=text,
                                 marker=dict(symbol="square", size=12, color=color,
                                             opacity=0.6 if found else 0.15)))
    status = window.status or "not assessed"
    fig.update_layout(template=TEMPLATE, title=dict(text=f"probability of meeting spec against pH: {status}",
                                                    font=dict(size=15)),
                      xaxis_title="pH [-]", yaxis_title="probability [-]", yaxis_range=[-0.02, 1.05], height=480,
                      legend=dict(orientation="h", y=-0.18), margin=dict(l=60, r=20, t=60, b=40))
    return fig


def _windows_text(what: str, intervals) -> str:
    if not intervals:
        return f"{what}: none"
    return f"{what}: " + ", ".join(f"pH {lo:.2f}-{hi:.2f}" for lo, hi in intervals)


def correlation_figure(names: list[str], matrix, source: str) -> go.Figure:
    """Heat map of a parameter correlation matrix (-1 to 1, the report's purple-orange scale)."""
    corr = np.asarray(matrix, float)
    shown = [label(n) for n in names]
    n = len(names)
    fig = go.Figure(go.Heatmap(z=corr, x=shown, y=shown, zmin=-1, zmax=1, colorscale="PuOr_r",
                               colorbar=dict(title="correlation [-]"),
                               texttemplate="%{z:.2f}" if n <= 12 else None,
                               hovertemplate="%{y} / %{x}: %{z:.3f}<extra></extra>"))
    size = max(360, min(760, 46 * n + 220))
    fig.update_layout(template=TEMPLATE, title=dict(text=f"parameter correlation ({source})", font=dict(size=15)),
                      height=size, width=size + 160, margin=dict(l=60, r=20, t=60, b=40),
                      yaxis=dict(autorange="reversed"))
    return fig


def map_figure(window: Any) -> go.Figure:
    """The design space: probability over pH and the second factor, with the level's contour and the
    window found at each factor value (as the decision layer computed them; nothing recomputed)."""
    ph = np.asarray(window.ph, float)
    factor = np.asarray(window.factor_values, float)
    p = np.asarray(window.map_probability, float).T                     # (n_factor, n_ph)
    axis = f"{window.factor_name} [{window.factor_unit}]"
    fig = go.Figure(go.Heatmap(x=ph, y=factor, z=p, zmin=0, zmax=1, colorscale="cividis",
                               colorbar=dict(title="P(all specs met) [-]"),
                               hovertemplate="pH %{x:.2f}, " + label(window.factor_name)
                                             + " %{y:g}: %{z:.2f}<extra></extra>"))
    if len(factor) > 1 and np.nanmin(p) < window.level < np.nanmax(p):
        fig.add_trace(go.Contour(x=ph, y=factor, z=p, showscale=False, hoverinfo="skip",
                                 contours=dict(start=window.level, end=window.level, size=1, coloring="none"),
                                 line=dict(color="white", width=2), name=f"level {window.level:g}",
                                 showlegend=True))
    for value, intervals in zip(factor, window.map_windows or []):
        for lo, hi in intervals:
            fig.add_trace(go.Scatter(x=[lo, hi], y=[value, value], mode="lines+markers", showlegend=False,
                                     line=dict(color=OKABE_ITO["sky blue"], width=4),
                                     hovertemplate=f"window pH {lo:.2f}-{hi:.2f}<extra></extra>"))
    fig.add_trace(go.Scatter(x=[None], y=[None], mode="lines", line=dict(color=OKABE_ITO["sky blue"], width=4),
                             name=f"window at each {label(window.factor_name)} value"))
    if window.nominal_factor is not None:
        fig.add_hline(y=window.nominal_factor, line=dict(color=NEUTRAL, dash="dot"),
                      annotation_text=f"planned {window.nominal_factor:g}", annotation_position="top left")
    fig.update_layout(template=TEMPLATE, title=dict(text=f"design space: probability over pH and {label(axis)}",
                                                    font=dict(size=15)),
                      xaxis_title="pH [-]", yaxis_title=label(axis), height=460,
                      legend=dict(orientation="h", y=-0.2), margin=dict(l=60, r=20, t=60, b=40))
    return fig
