"""Plotly figures of the page: raw data per run, fitted curves over data, the window.

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

from speciakin.palette import SpeciesColors

__all__ = ["label", "MAX_POINTS", "thin", "raw_run_figure", "fit_run_figure", "window_figure", "empty_figure"]

#: Most points of one trace drawn on the page; longer logs are thinned.
MAX_POINTS = 1500
#: Plotly template of every figure (white background, like the report's figures).
TEMPLATE = "plotly_white"
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
    ph = run.recipe.ph
    if run.ph_log is not None and len(run.ph_log):
        _log_trace(fig, run.ph_log, lambda v: v, "pH log", 1, 2, notes, "#000000")
    elif ph.mode == "held" and ph.setpoint is not None:
        fig.add_trace(go.Scatter(x=[0, run.recipe.end_time / _S_PER_MIN], y=[ph.setpoint] * 2, mode="lines",
                                 name="pH set point", line=dict(dash="dash", color="#000000")), row=1, col=2)
    if run.temperature_log is not None and len(run.temperature_log):
        _log_trace(fig, run.temperature_log, lambda v: v - _KELVIN, "temperature log", 2, 1, notes, "#D55E00")
    else:
        temp = run.recipe.temperature
        times = list(temp.times) if len(temp.times) == len(temp.temperatures) else [0.0]
        fig.add_trace(go.Scatter(x=np.asarray(times) / _S_PER_MIN, y=np.asarray(temp.temperatures) - _KELVIN,
                                 mode="lines+markers", name="temperature (recipe)", line=dict(color="#D55E00")),
                      row=2, col=1)
    if run.titrant is not None and len(run.titrant.time):
        t, v, k = thin(run.titrant.time / _S_PER_MIN, run.titrant.amount * 1e3)
        fig.add_trace(go.Scatter(x=t, y=v, mode="lines", name="titrant", line=dict(color="#0072B2")), row=2, col=2)
        if k > 1:
            notes.append(f"titrant: 1 in {k} of {len(run.titrant.time)} readings shown "
                         "(display only; the fit uses all)")
    for r, c in ((1, 1), (1, 2), (2, 1), (2, 2)):
        fig.update_xaxes(title_text="time [min]", row=r, col=c)
    fig.update_layout(template=TEMPLATE, height=560, margin=dict(l=50, r=20, t=60, b=40),
                      title=dict(text=f"run {label(run.name)}: data as imported", font=dict(size=15)))
    note = "; ".join(notes) if notes else "every reading shown"
    fig.add_annotation(text=note, showarrow=False, x=1, y=1.1, xref="paper", yref="paper", xanchor="right",
                       font=dict(size=11, color="#555555"))
    return fig


def fit_run_figure(prediction, observations: list, colors: SpeciesColors) -> go.Figure:
    """Observations of one run with the fitted curve (and the posterior band when there is one)."""
    fig = go.Figure()
    unit = prediction.value_unit
    if prediction.time is not None and prediction.values:
        for key, y in prediction.values.items():
            color = colors.color(key)
            if prediction.low and key in prediction.low:
                fig.add_trace(go.Scatter(x=np.r_[prediction.time, prediction.time[::-1]],
                                         y=np.r_[prediction.high[key], prediction.low[key][::-1]], fill="toself",
                                         line=dict(width=0), fillcolor=color, opacity=0.2,
                                         name=label(f"{key} band"), hoverinfo="skip"))
            fig.add_trace(go.Scatter(x=prediction.time, y=y, mode="lines", name=label(f"{key} fitted"),
                                     line=dict(color=color)))
    for key in dict.fromkeys(o.key for o in observations if not o.titrant):
        rows = [o for o in observations if o.key == key and not o.titrant]
        fig.add_trace(go.Scatter(x=[o.time for o in rows],
                                 y=[o.observed if o.observed is not None else o.loq for o in rows],
                                 mode="markers", name=label(f"{key} observed"),
                                 marker=dict(color=colors.color(key),
                                             symbol=["triangle-down-open" if o.censored else "circle" for o in rows])))
    title = f"run {label(prediction.name)}: fitted curves over data"
    if prediction.failed:
        title += " (the simulation at the fitted parameters failed)"
    fig.update_layout(template=TEMPLATE, title=dict(text=title, font=dict(size=15)), height=460,
                      xaxis_title="time [min]",
                      yaxis_title=f"{prediction.value_label} [{unit}]" if unit else prediction.value_label,
                      margin=dict(l=60, r=20, t=60, b=40))
    return fig


def window_figure(window: Any) -> go.Figure:
    """Probability of meeting every specification against pH, with the window and its status."""
    fig = go.Figure()
    ph = window.curve_ph if window.curve_ph is not None else window.ph
    prob = window.curve_probability if window.curve_probability is not None else window.probability
    fig.add_trace(go.Scatter(x=ph, y=prob, mode="lines", name="probability", line=dict(color="#0072B2")))
    robust = window.curve_robust_probability
    if robust is not None:
        fig.add_trace(go.Scatter(x=ph, y=robust, mode="lines", name=f"robust (+/- {window.tolerance:g} pH)",
                                 line=dict(color="#D55E00", dash="dash")))
    fig.add_hline(y=window.level, line=dict(color="#555555", dash="dot"),
                  annotation_text=f"required {window.level:g}")
    if window.primary_window:
        lo, hi = window.primary_window
        fig.add_vrect(x0=lo, x1=hi, fillcolor="#009E73", opacity=0.15, line_width=0,
                      annotation_text=f"window pH {lo:.2f}-{hi:.2f}", annotation_position="top left")
    status = window.status or "no trust status"
    fig.update_layout(template=TEMPLATE, title=dict(text=f"probability of meeting spec against pH: {status}",
                                                    font=dict(size=15)),
                      xaxis_title="pH", yaxis_title="probability [-]", yaxis_range=[-0.02, 1.05], height=440,
                      margin=dict(l=60, r=20, t=60, b=40))
    return fig
