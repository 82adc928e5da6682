"""The one registry of prior families, read by the model-file parser and the sampler.

Each :class:`PriorFamily` declares its parameter names (as written in the
model file), how they are validated, its vectorised log-density, how to draw
from it and how to describe it in a report.  It lives in the chemistry layer
because the model-file parser (chemistry) checks a file's priors against it
and may not import the estimation layer; :mod:`speciakin.estimation.priors`
builds the sampler's distributions from it.  A new family:
:func:`register_prior_family`.

References
----------
Gelman, A. et al., Bayesian Data Analysis, 3rd ed., CRC Press 2013,
appendix A (densities of the normal, lognormal, uniform and Student-t
distributions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np
from scipy import special

__all__ = [
    "PriorFamily",
    "PRIOR_FAMILIES",
    "register_prior_family",
    "normal_log_density",
    "lognormal_log_density",
    "uniform_log_density",
    "halfnormal_log_density",
    "student_t_log_density",
]

_LOG_2PI = math.log(2.0 * math.pi)


# --------------------------------------------------------------------------
# pure array functions: log-densities [log of 1/unit of x]
# --------------------------------------------------------------------------

def normal_log_density(x, mean, sd):
    """Log-density of the normal distribution N(mean, sd^2).

    References
    ----------
    Gelman et al., Bayesian Data Analysis, 3rd ed., appendix A.
    """
    z = (np.asarray(x, dtype=float) - mean) / sd
    return -0.5 * z * z - math.log(sd) - 0.5 * _LOG_2PI


def lognormal_log_density(x, log_mean, log_sd):
    """Log-density of the lognormal: log(x) ~ N(log_mean, log_sd^2); -inf for x <= 0.

    References
    ----------
    Gelman et al., Bayesian Data Analysis, 3rd ed., appendix A.
    """
    x = np.asarray(x, dtype=float)
    out = np.full(x.shape, -np.inf)
    pos = x > 0
    lx = np.log(x[pos])
    z = (lx - log_mean) / log_sd
    out[pos] = -0.5 * z * z - math.log(log_sd) - 0.5 * _LOG_2PI - lx
    return out


def uniform_log_density(x, lower, upper):
    """Log-density of the uniform distribution on [lower, upper]; -inf outside."""
    x = np.asarray(x, dtype=float)
    inside = (x >= lower) & (x <= upper)
    return np.where(inside, -math.log(upper - lower), -np.inf)


def halfnormal_log_density(x, scale):
    """Log-density of the half-normal |N(0, scale^2)| on x >= 0; -inf below 0.

    References
    ----------
    Gelman, A., "Prior distributions for variance parameters in hierarchical
    models", Bayesian Analysis 2006, 1, 515 (weakly informative scale priors).
    """
    x = np.asarray(x, dtype=float)
    z = x / scale
    value = -0.5 * z * z - math.log(scale) + 0.5 * math.log(2.0 / math.pi)
    return np.where(x >= 0, value, -np.inf)


def student_t_log_density(x, degrees_of_freedom, mean, scale):
    """Log-density of the location-scale Student-t distribution.

    References
    ----------
    Gelman et al., Bayesian Data Analysis, 3rd ed., appendix A.
    """
    nu = degrees_of_freedom
    z = (np.asarray(x, dtype=float) - mean) / scale
    const = (special.gammaln(0.5 * (nu + 1)) - special.gammaln(0.5 * nu)
             - 0.5 * math.log(nu * math.pi) - math.log(scale))
    return const - 0.5 * (nu + 1) * np.log1p(z * z / nu)


def _lognormal_cdf(x, log_mean, log_sd):
    x = np.asarray(x, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(x > 0, special.ndtr((np.log(np.maximum(x, 0.0)) - log_mean) / log_sd), 0.0)


def _halfnormal_cdf(x, scale):
    x = np.asarray(x, dtype=float)
    return np.where(x > 0, special.erf(np.maximum(x, 0.0) / (scale * math.sqrt(2.0))), 0.0)


# --------------------------------------------------------------------------
# registry
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class PriorFamily:
    """One family of prior distributions.

    Attributes
    ----------
    name
        Registry key, as written in the model file.
    parameter_names
        Names of the family's parameters, in the order the functions take them.
    constraints
        For each parameter, a (test, text) pair: ``test(value)`` is True when
        the value is allowed; ``text`` says what is allowed.
    log_density
        ``log_density(x, *parameters)``, vectorised over ``x``.
    draw
        ``draw(rng, size, *parameters)`` -> array of draws.
    support
        ``support(*parameters)`` -> (lower, upper), possibly infinite.
    describe
        ``describe(*parameters)`` -> text for reports.
    cross_check
        Optional ``check(parameters) -> message | None`` for conditions that
        involve several parameters (e.g. lower < upper).
    cdf
        ``cdf(x, *parameters)`` -> cumulative probability (vectorised); used
        to renormalise a prior truncated to bounds and to draw from it.
    ppf
        ``ppf(u, *parameters)`` -> quantile (inverse of ``cdf``).
    """

    name: str
    parameter_names: tuple[str, ...]
    constraints: Mapping[str, tuple[Callable[[float], bool], str]]
    log_density: Callable
    draw: Callable
    support: Callable
    describe: Callable
    cross_check: Callable | None = None
    cdf: Callable | None = None
    ppf: Callable | None = None


PRIOR_FAMILIES: dict[str, PriorFamily] = {}


def register_prior_family(family: PriorFamily) -> PriorFamily:
    """Add a family to :data:`PRIOR_FAMILIES` (the one list of families)."""
    if family.name in PRIOR_FAMILIES:
        raise ValueError(f"prior family {family.name!r} is already registered")
    PRIOR_FAMILIES[family.name] = family
    return family


def _any_number(v: float) -> bool:
    return math.isfinite(v)


def _positive(v: float) -> bool:
    return math.isfinite(v) and v > 0


_FINITE = (_any_number, "a finite number")
_POSITIVE = (_positive, "a finite number > 0")


def _family(name: str, parameters: Mapping[str, tuple[Callable[[float], bool], str]], log_density: Callable, *,
            draw: Callable, support: Callable, cdf: Callable, ppf: Callable,
            note: Callable | None = None, cross_check: Callable | None = None) -> PriorFamily:
    """A built-in family: ``parameters`` maps each parameter name (in the order
    the functions take them) to its constraint; the report text lists the
    parameters as ``name(p1=v1, p2=v2)``, with ``note(*parameters)`` after a
    semicolon when given."""
    names = tuple(parameters)

    def describe(*values: float) -> str:
        text = ", ".join(f"{n}={v:g}" for n, v in zip(names, values))
        return f"{name}({text}; {note(*values)})" if note is not None else f"{name}({text})"

    return PriorFamily(name=name, parameter_names=names, constraints=dict(parameters), log_density=log_density,
                       draw=draw, support=support, describe=describe, cross_check=cross_check, cdf=cdf, ppf=ppf)


for _built_in in (
    _family("normal", {"mean": _FINITE, "sd": _POSITIVE}, normal_log_density,
            draw=lambda rng, size, mean, sd: rng.normal(mean, sd, size),
            support=lambda mean, sd: (-np.inf, np.inf),
            cdf=lambda x, mean, sd: special.ndtr((np.asarray(x, dtype=float) - mean) / sd),
            ppf=lambda u, mean, sd: mean + sd * special.ndtri(u)),
    _family("lognormal", {"log_mean": _FINITE, "log_sd": _POSITIVE}, lognormal_log_density,
            draw=lambda rng, size, log_mean, log_sd: rng.lognormal(log_mean, log_sd, size),
            support=lambda log_mean, log_sd: (0.0, np.inf),
            cdf=_lognormal_cdf,
            ppf=lambda u, log_mean, log_sd: np.exp(log_mean + log_sd * special.ndtri(u)),
            note=lambda log_mean, log_sd: f"median {math.exp(log_mean):.4g}"),
    _family("uniform", {"lower": _FINITE, "upper": _FINITE}, uniform_log_density,
            draw=lambda rng, size, lower, upper: rng.uniform(lower, upper, size),
            support=lambda lower, upper: (lower, upper),
            cdf=lambda x, lower, upper: np.clip((np.asarray(x, dtype=float) - lower) / (upper - lower), 0.0, 1.0),
            ppf=lambda u, lower, upper: lower + np.asarray(u, dtype=float) * (upper - lower),
            cross_check=lambda p: None if p["lower"] < p["upper"] else "'lower' must be less than 'upper'"),
    _family("halfnormal", {"scale": _POSITIVE}, halfnormal_log_density,
            draw=lambda rng, size, scale: np.abs(rng.normal(0.0, scale, size)),
            support=lambda scale: (0.0, np.inf),
            cdf=_halfnormal_cdf,
            ppf=lambda u, scale: scale * math.sqrt(2.0) * special.erfinv(u)),
    _family("student_t", {"degrees_of_freedom": _POSITIVE, "mean": _FINITE, "scale": _POSITIVE},
            student_t_log_density,
            draw=lambda rng, size, nu, mean, scale: mean + scale * rng.standard_t(nu, size),
            support=lambda nu, mean, scale: (-np.inf, np.inf),
            cdf=lambda x, nu, mean, scale: special.stdtr(nu, (np.asarray(x, dtype=float) - mean) / scale),
            ppf=lambda u, nu, mean, scale: mean + scale * special.stdtrit(nu, u)),
):
    register_prior_family(_built_in)
