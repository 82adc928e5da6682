"""Result dataclasses of the least-squares layer (fit, start table, profile, comparison).

Every field always exists (None when it does not apply).  ``to_dict()``
returns JSON-ready data through the project's one JSON codec
(:mod:`speciakin._json`: NaN and infinities become ``null``, numpy becomes
Python) and ``from_dict()`` restores the object: a ``null`` where the field
may be None stays None, any other ``null`` (a number, or an entry of a list,
array or table) reads back as NaN.  The strings ``"nan"``, ``"inf"`` and
``"-inf"`` of files written before the codec are still read as numbers.
"""

from __future__ import annotations

import math
from dataclasses import MISSING, Field, dataclass, field, fields, replace
from typing import Any

import numpy as np

from speciakin._json import json_ready
from speciakin.estimation.parameters import ParameterSpec

__all__ = ["ParameterEstimate", "StartRecord", "FitResult", "Profile", "ComparisonResult"]


def _numbers(value: Any) -> Any:
    """Inverse of the codec inside a field: null -> NaN in nested lists and tables;
    ``"nan"``, ``"inf"``, ``"-inf"`` (files written before the codec) -> float."""
    if value is None:
        return math.nan
    if isinstance(value, str) and value in ("nan", "inf", "-inf"):
        return float(value)
    if isinstance(value, list):
        return [_numbers(v) for v in value]
    if isinstance(value, dict):
        return {k: _numbers(v) for k, v in value.items()}
    return value


def _decode(spec: Field, value: Any) -> Any:
    """A value of field ``spec`` read back from its ``to_dict`` form: null stays None where
    the field may be None, otherwise it is NaN (:func:`_numbers`)."""
    return None if value is None and "None" in str(spec.type) else _numbers(value)


def _decoded(record_type: type, data: dict[str, Any]) -> dict[str, Any]:
    """Every field of ``record_type`` read back from its ``to_dict`` form (:func:`_decode`)."""
    return {f.name: _decode(f, data[f.name]) for f in fields(record_type)}


def _field_dict(record: Any) -> dict[str, Any]:
    """Every dataclass field of ``record``, JSON-ready (the codec's :func:`json_ready`)."""
    return {f.name: json_ready(getattr(record, f.name)) for f in fields(record)}


def _with_warnings(lines: list[str], warnings: list[str]) -> str:
    """Report text: ``lines`` and a "Warnings" heading with one line per warning (or "none")."""
    lines = lines + ["", "Warnings", "--------"] + ([f"- {w}" for w in warnings] or ["none"])
    return "\n".join(lines) + "\n"


def _fmt(value: float | None, digits: int = 6) -> str:
    if value is None:
        return "-"
    return f"{value:.{digits}g}"


@dataclass
class ParameterEstimate:
    """Estimate of one parameter.

    ``standard_error`` is None for a fixed parameter; ``covariance_interval``
    is ``value -+ t * se`` at the fit's level; the profile fields are None until
    a profile has been computed, and an end that the profile did not reach is
    None with ``profile_open_below`` / ``profile_open_above`` set.
    """

    name: str
    value: float
    standard_error: float | None
    unit: str
    vary: bool
    initial_value: float
    lower_bound: float
    upper_bound: float
    at_bound: str | None = None
    covariance_interval: tuple[float, float] | None = None
    profile_lower: float | None = None
    profile_upper: float | None = None
    profile_open_below: bool | None = None
    profile_open_above: bool | None = None

    def to_dict(self) -> dict[str, Any]:
        return _field_dict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "ParameterEstimate":
        data = _decoded(cls, data)
        if data.get("covariance_interval") is not None:
            data["covariance_interval"] = tuple(data["covariance_interval"])
        return cls(**data)


@dataclass
class StartRecord:
    """What one starting point of the multistart search found.

    ``distance_from_best`` is ``max_i |x_i - best_i| / max(|best_i|, 1e-300)``
    over the varying parameters (None for a failed start).
    """

    index: int
    start_values: list[float]
    final_values: list[float] | None
    chisqr: float | None
    success: bool
    status: str
    n_evaluations: int
    distance_from_best: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return _field_dict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "StartRecord":
        return cls(**_decoded(cls, data))


@dataclass
class FitResult:
    """Outcome of :func:`speciakin.estimation.fit_least_squares`.

    Attributes
    ----------
    parameters
        One :class:`ParameterEstimate` per parameter, in the given order.
    parameter_specs
        The specification the fit started from (bounds, vary flags, units).
    varying_names
        Names of the varying parameters, the order of ``covariance`` rows.
    chisqr, reduced_chisqr
        ``sum r^2`` and ``chi2 / degrees_of_freedom``.
    degrees_of_freedom, dof_reduction, n_inactive
        ``n - n_inactive - dof_reduction - p`` (not always whole); what the
        data's structure takes (a caller's ``dof_reduction``) and the residuals that
        are zero at the optimum and that no parameter moves (values below the
        LOQ that the model keeps below it, a titrant reading of 0 before
        dosing; :func:`~speciakin.estimation.leastsq.fit_least_squares`).  A fit saved
        before these existed loads with both 0 and its ``n - p``.
    aic, bic
        ``n ln(chi2/n) + 2p`` and ``n ln(chi2/n) + ln(n) p``.
    residual_standard_deviation
        ``s = sqrt(chi2 / degrees_of_freedom)``.
    group_residual_sd
        ``{label: {"rms": .., "count": ..}}`` per residual group (empty if no groups).
    covariance, correlation
        ``(p, p)`` arrays for the varying parameters.
    gradient_cosine
        ``||P r|| / ||r||``: length of the residual's projection onto the
        Jacobian's column space (free parameters only) relative to the residual;
        0 at an exact least-squares minimum.
    success
        True when the best start converged, gave finite residuals, a small
        gradient and a full-rank Jacobian (an isolated minimum).  False results
        are still returned (with ``message`` and ``warnings`` saying why) when
        at least one start converged; otherwise the fit raises SolverError.
    """

    parameters: list[ParameterEstimate]
    parameter_specs: list[ParameterSpec]
    varying_names: list[str]
    chisqr: float
    reduced_chisqr: float
    aic: float
    bic: float
    n_residuals: int
    n_varying: int
    degrees_of_freedom: float
    residual_standard_deviation: float
    group_residual_sd: dict[str, dict[str, float]]
    covariance: np.ndarray
    correlation: np.ndarray
    rank: int
    condition_number: float
    singular: bool
    gradient_cosine: float
    success: bool
    message: str
    method: str
    jacobian_method: str
    scale_by_residual_variance: bool
    level: float
    n_evaluations: int
    best_start: int
    starts: list[StartRecord]
    residuals: np.ndarray
    warnings: list[str] = field(default_factory=list)
    #: chi-square expectation the data's structure takes beyond the parameters (a caller's ``dof_reduction``;
    #: campaign fits saved before 2026-12-05 took it for closed area% samples)
    dof_reduction: float = 0.0
    #: residuals zero at the optimum that no parameter moves (they carry no degree of freedom)
    n_inactive: int = 0

    # -- convenience -------------------------------------------------------
    @property
    def values(self) -> dict[str, float]:
        """Best-fit value of every parameter by name."""
        return {p.name: p.value for p in self.parameters}

    @property
    def value_vector(self) -> np.ndarray:
        """Best-fit values of all parameters in their given order."""
        return np.array([p.value for p in self.parameters])

    @property
    def standard_errors(self) -> dict[str, float | None]:
        return {p.name: p.standard_error for p in self.parameters}

    def parameter(self, name: str) -> ParameterEstimate:
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    def with_profiles(self, profiles: dict[str, "Profile"]) -> "FitResult":
        """A copy with profile intervals filled in from ``profiles`` (name -> Profile)."""
        new_params = []
        for p in self.parameters:
            prof = profiles.get(p.name)
            if prof is None:
                new_params.append(p)
                continue
            new_params.append(replace(p, profile_lower=prof.lower, profile_upper=prof.upper,
                                      profile_open_below=prof.open_below, profile_open_above=prof.open_above))
        extra = [w for prof in profiles.values() for w in prof.warnings if w not in self.warnings]
        return replace(self, parameters=new_params, warnings=list(self.warnings) + extra)

    # -- output ------------------------------------------------------------
    def report(self) -> str:
        """Plain-text report with the sections Fit statistics, Parameters, Correlations, Starts, Warnings."""
        pct = f"{100 * self.level:g} %"
        lines = ["Fit statistics", "--------------",
                 f"success: {'yes' if self.success else 'NO'} ({self.message})",
                 f"method: {self.method}; Jacobian: {self.jacobian_method}; evaluations: {self.n_evaluations}",
                 f"residuals n = {self.n_residuals}; varying parameters p = {self.n_varying}; "
                 f"degrees of freedom = {self.degrees_of_freedom:.6g}",
                 f"chi-square = {_fmt(self.chisqr, 10)}; reduced chi-square = {_fmt(self.reduced_chisqr, 6)}",
                 f"residual standard deviation = {_fmt(self.residual_standard_deviation, 6)}",
                 f"AIC = n ln(chi2/n) + 2p = {_fmt(self.aic, 8)}; BIC = n ln(chi2/n) + ln(n) p = {_fmt(self.bic, 8)}",
                 f"Jacobian rank {self.rank} of {self.n_varying}; condition number {_fmt(self.condition_number, 3)}; "
                 f"gradient cosine {_fmt(self.gradient_cosine, 2)}"]
        for label, g in self.group_residual_sd.items():
            lines.append(f"  group {label}: rms residual {_fmt(g['rms'], 5)} over {g['count']} points")
        lines += ["", "Parameters", "----------",
                  f"{'name':<14}{'value':>15}{'std error':>13}  {pct + ' (covariance)':<30}"
                  f"{pct + ' (profile)':<30}unit"]
        for p in self.parameters:
            se = _fmt(p.standard_error, 4) if p.vary else "fixed"
            ci = "-" if p.covariance_interval is None else \
                f"[{_fmt(p.covariance_interval[0], 5)}, {_fmt(p.covariance_interval[1], 5)}]"
            if p.profile_open_below is None:
                pi = "not computed"
            else:
                lo = "open below" if p.profile_open_below else _fmt(p.profile_lower, 5)
                hi = "open above" if p.profile_open_above else _fmt(p.profile_upper, 5)
                pi = f"[{lo}, {hi}]"
            flag = f"  (at {p.at_bound} bound)" if p.at_bound else ""
            lines.append(f"{p.name:<14}{_fmt(p.value, 8):>15}{se:>13}  {ci:<30}{pi:<30}{p.unit}{flag}")
        lines += ["", "Correlations", "------------"]
        pairs = []
        k = len(self.varying_names)
        for i in range(k):
            for j in range(i + 1, k):
                c = self.correlation[i, j]
                if np.isfinite(c) and abs(c) >= 0.5:
                    pairs.append((abs(c), f"{self.varying_names[i]} / {self.varying_names[j]}: {c:+.3f}"))
        lines += [text for _, text in sorted(pairs, reverse=True)] or ["no pair with |correlation| >= 0.5"]
        lines += ["", "Starts", "------",
                  f"{'#':>3} {'status':<44}{'chi-square':>16}{'distance':>11}{'evals':>7}"]
        for s in self.starts:
            mark = "*" if s.index == self.best_start else " "
            lines.append(f"{s.index:>3}{mark}{s.status[:43]:<44}{_fmt(s.chisqr, 9):>16}"
                         f"{_fmt(s.distance_from_best, 3):>11}{s.n_evaluations:>7}")
        return _with_warnings(lines, self.warnings)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name in ("parameters", "starts", "parameter_specs"):
                out[f.name] = [item.to_dict() for item in v]
            else:
                out[f.name] = json_ready(v)
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "FitResult":
        kw: dict[str, Any] = {}
        for f in fields(cls):
            if f.name not in data and f.default is not MISSING:
                continue  # a field added later with a default (an older fit.json)
            v = data[f.name]
            if f.name == "parameters":
                kw[f.name] = [ParameterEstimate.from_dict(d) for d in v]
            elif f.name == "starts":
                kw[f.name] = [StartRecord.from_dict(d) for d in v]
            elif f.name == "parameter_specs":
                kw[f.name] = [ParameterSpec.from_dict(d) for d in v]
            elif f.name in ("covariance", "correlation", "residuals"):
                kw[f.name] = np.array(_decode(f, v), dtype=float)
            else:
                kw[f.name] = _decode(f, v)
        return cls(**kw)


@dataclass
class Profile:
    """Profile likelihood of one parameter.

    Attributes
    ----------
    values
        Grid of the profiled parameter, sorted ascending [unit].
    chisqr
        Minimum chi-square over the other parameters at each grid value
        (NaN where the re-optimisation failed).
    delta_chisqr
        ``chisqr - chisqr_best``.
    threshold
        ``Delta chi2`` bounding the interval (see :func:`profile_likelihood`).
    lower, upper
        Interval ends, None when ``open_below`` / ``open_above``.
    flat
        True when the profile stays below the threshold on both sides.
    others
        Optimised values of the other varying parameters along the grid.
    """

    name: str
    unit: str
    best_value: float
    best_chisqr: float
    values: np.ndarray
    chisqr: np.ndarray
    delta_chisqr: np.ndarray
    threshold: float
    level: float
    scale: str
    lower: float | None
    upper: float | None
    open_below: bool
    open_above: bool
    flat: bool
    n_failed: int
    others: dict[str, list[float]]
    warnings: list[str] = field(default_factory=list)

    def report(self) -> str:
        lo = "open below" if self.open_below else _fmt(self.lower, 6)
        hi = "open above" if self.open_above else _fmt(self.upper, 6)
        lines = [f"Profile of {self.name}", "-" * (11 + len(self.name)),
                 f"best value {_fmt(self.best_value, 8)} {self.unit}; chi-square {_fmt(self.best_chisqr, 8)}",
                 f"threshold delta chi-square {_fmt(self.threshold, 5)} ({self.scale} scale, level {self.level:g})",
                 f"interval: [{lo}, {hi}]", "", "Points", "------",
                 f"{'value':>16}{'delta chi-square':>20}"]
        lines += [f"{_fmt(v, 8):>16}{_fmt(d, 5):>20}" for v, d in zip(self.values, self.delta_chisqr)]
        return _with_warnings(lines, self.warnings)

    def to_dict(self) -> dict[str, Any]:
        return _field_dict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "Profile":
        kw = _decoded(cls, data)
        for key in ("values", "chisqr", "delta_chisqr"):
            kw[key] = np.array(kw[key], dtype=float)
        return cls(**kw)


@dataclass
class ComparisonResult:
    """Ranking of models fitted to the same data by AIC (and BIC).

    Lists are in ranking order (lowest AIC first).
    """

    names: list[str]
    n_residuals: int
    n_parameters: list[int]
    chisqr: list[float]
    aic: list[float]
    bic: list[float]
    delta_aic: list[float]
    delta_bic: list[float]
    akaike_weights: list[float]
    bic_weights: list[float]
    warnings: list[str] = field(default_factory=list)

    def report(self) -> str:
        lines = ["Model comparison", "----------------",
                 f"{'model':<20}{'p':>4}{'chi-square':>14}{'AIC':>12}{'dAIC':>9}{'weight':>9}"
                 f"{'BIC':>12}{'dBIC':>9}{'weight':>9}"]
        for k, name in enumerate(self.names):
            lines.append(f"{name:<20}{self.n_parameters[k]:>4}{_fmt(self.chisqr[k], 6):>14}"
                         f"{self.aic[k]:>12.3f}{self.delta_aic[k]:>9.3f}{self.akaike_weights[k]:>9.4f}"
                         f"{self.bic[k]:>12.3f}{self.delta_bic[k]:>9.3f}{self.bic_weights[k]:>9.4f}")
        return _with_warnings(lines, self.warnings)

    def to_dict(self) -> dict[str, Any]:
        return _field_dict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "ComparisonResult":
        return cls(**_decoded(cls, data))
