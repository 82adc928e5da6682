"""Prior distributions for Bayesian sampling, built from the one registry of families.

Each family in :data:`~speciakin.chemistry.prior_families.PRIOR_FAMILIES`
declares its parameter names, how they are validated, its vectorised
log-density, how to draw from it and how to describe it in a report (the
registry lives in the chemistry layer so that the model-file parser reads the
same table).  The model file stores a prior as
``speciakin.chemistry.model.Prior(family, parameters)``; :func:`build_prior`
turns that into a :class:`PriorDistribution` that the sampler uses.

Defaults used by the project (documented in docs/sampling.md):

* pKa shift: ``normal(mean=0, sd=0.5)`` unless the chemist states the sd;
* log10 of a rate constant: ``uniform(lower, upper)`` within its bounds;
* error scales: weakly informative ``halfnormal(scale=...)``.

Bounds: a fitted quantity's model-file bounds truncate its prior
(:meth:`PriorDistribution.truncated`): the log-density is -inf outside the
bounds and is renormalised inside them (divided by the prior mass between
the bounds, from the family's cumulative distribution function), so a
walker can never leave the bounds and the density integrates to one.

References
----------
Gelman, A. et al., Bayesian Data Analysis, 3rd ed., CRC Press 2013,
appendix A (densities of the normal, lognormal, uniform and Student-t
distributions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from speciakin.chemistry.model import Prior
from speciakin.chemistry.prior_families import (  # noqa: F401  (the registry, re-exported)
    PRIOR_FAMILIES,
    PriorFamily,
    halfnormal_log_density,
    lognormal_log_density,
    normal_log_density,
    register_prior_family,
    student_t_log_density,
    uniform_log_density,
)
from speciakin.errors import InputError, Location, Problem

__all__ = [
    "PriorFamily",
    "PriorDistribution",
    "PRIOR_FAMILIES",
    "register_prior_family",
    "build_prior",
    "default_pka_shift_prior",
    "default_log10_rate_prior",
    "default_error_scale_prior",
    "joint_log_prior",
]

# --------------------------------------------------------------------------
# a validated prior
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class PriorDistribution:
    """A validated prior: a registered family with its parameter values,
    optionally truncated to bounds.

    Build it with :func:`build_prior`; truncate it with :meth:`truncated`.
    All methods are vectorised.

    Attributes
    ----------
    family, parameters
        Registry key and parameter values.
    lower, upper
        Truncation bounds on the parameter's scale (infinite = none): the
        density is -inf outside and divided by the prior mass between them.
    """

    family: str
    parameters: Mapping[str, float] = field(default_factory=dict)
    lower: float = -math.inf
    upper: float = math.inf

    @property
    def _family(self) -> PriorFamily:
        return PRIOR_FAMILIES[self.family]

    @property
    def _values(self) -> tuple[float, ...]:
        return tuple(self.parameters[n] for n in self._family.parameter_names)

    @property
    def is_truncated(self) -> bool:
        """True when finite bounds cut into the family's own support."""
        lo, hi = self._family.support(*self._values)
        return bool(self.lower > lo or self.upper < hi)

    def _mass_bounds(self) -> tuple[float, float]:
        """Cumulative probability of the family at the two bounds."""
        cdf = self._family.cdf
        lo = 0.0 if math.isinf(self.lower) else float(cdf(self.lower, *self._values))
        hi = 1.0 if math.isinf(self.upper) else float(cdf(self.upper, *self._values))
        return lo, hi

    def log_mass(self) -> float:
        """log of the family's probability between the bounds (0 when not truncated)."""
        if not self.is_truncated:
            return 0.0
        lo, hi = self._mass_bounds()
        return math.log(hi - lo) if hi > lo else -math.inf

    def log_density(self, x) -> np.ndarray:
        """Log prior density at ``x`` (array); -inf outside the support and the bounds.

        Inside the bounds the family's density is divided by its mass
        between them, so the truncated density integrates to one.
        """
        x = np.asarray(x, dtype=float)
        value = np.asarray(self._family.log_density(x, *self._values), dtype=float)
        if math.isinf(self.lower) and math.isinf(self.upper):
            return value
        inside = (x >= self.lower) & (x <= self.upper)
        return np.where(inside, value - self.log_mass(), -np.inf)

    def draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """``size`` independent draws, from a numpy Generator (inverse CDF when truncated)."""
        if not self.is_truncated:
            return np.asarray(self._family.draw(rng, size, *self._values), dtype=float)
        lo, hi = self._mass_bounds()
        u = lo + (hi - lo) * rng.uniform(size=size)
        x = np.asarray(self._family.ppf(u, *self._values), dtype=float)
        return np.clip(x, *self.support())

    def support(self) -> tuple[float, float]:
        """(lower, upper) of the support within the bounds; may be infinite."""
        lo, hi = self._family.support(*self._values)
        return max(float(lo), self.lower), min(float(hi), self.upper)

    def truncated(self, lower: float | None, upper: float | None,
                  location: Location | None = None) -> "PriorDistribution":
        """The same prior cut to [lower, upper] (None or infinite = no bound), renormalised.

        Raises
        ------
        InputError
            When the prior puts no probability between the bounds.
        """
        lo = max(self.lower, -math.inf if lower is None else float(lower))
        hi = min(self.upper, math.inf if upper is None else float(upper))
        out = PriorDistribution(self.family, dict(self.parameters), lo, hi)
        s_lo, s_hi = out.support()
        if not s_lo < s_hi or not math.isfinite(out.log_mass()):
            raise InputError(f"the prior {self.describe()} puts no probability between the bounds",
                             location or Location(), [lower, upper],
                             "bounds that overlap the prior's support and mass")
        return out

    def describe(self) -> str:
        """Text for reports, e.g. ``normal(mean=0, sd=0.5) within [-1, 1]``."""
        text = self._family.describe(*self._values)
        if self.is_truncated:
            text += f" within [{self.lower:g}, {self.upper:g}]"
        return text

    def to_dict(self) -> dict:
        return {"family": self.family, "parameters": dict(self.parameters),
                "lower": None if math.isinf(self.lower) else self.lower,
                "upper": None if math.isinf(self.upper) else self.upper,
                "text": self.describe()}


def _check(prior: Prior, location: Location) -> PriorDistribution:
    family_name = str(prior.family).strip().lower()
    if family_name not in PRIOR_FAMILIES:
        raise InputError("unknown prior family", location, prior.family,
                         "one of " + ", ".join(sorted(PRIOR_FAMILIES)))
    family = PRIOR_FAMILIES[family_name]
    given = dict(prior.parameters or {})
    problems: list[Problem] = []
    allowed = ", ".join(family.parameter_names)
    for key in given:
        if key not in family.parameter_names:
            problems.append(Problem(f"unknown parameter '{key}' of prior family '{family_name}'",
                                    location, given[key], f"parameters {allowed}"))
    values: dict[str, float] = {}
    for key in family.parameter_names:
        if key not in given:
            problems.append(Problem(f"prior family '{family_name}' needs parameter '{key}'",
                                    location, None, f"parameters {allowed}"))
            continue
        test, text = family.constraints[key]
        try:
            value = float(given[key])
        except (TypeError, ValueError):
            problems.append(Problem(f"prior parameter '{key}' is not a number", location,
                                    given[key], text))
            continue
        if not test(value):
            problems.append(Problem(f"prior parameter '{key}' of '{family_name}' is not allowed",
                                    location, given[key], text))
            continue
        values[key] = value
    if not problems and family.cross_check is not None:
        message = family.cross_check(values)
        if message:
            problems.append(Problem(f"prior '{family_name}': {message}", location,
                                    dict(given), None))
    if problems:
        raise InputError(problems=problems)
    return PriorDistribution(family_name, values)


def build_prior(prior: Prior | PriorDistribution | None, default: Prior | PriorDistribution | None = None,
                location: Location | None = None) -> PriorDistribution:
    """Validate a model-file prior (or use ``default`` when it is None).

    Parameters
    ----------
    prior
        ``Prior(family, parameters)`` from the model file, an already built
        :class:`PriorDistribution`, or None.
    default
        Used when ``prior`` is None (e.g. :func:`default_pka_shift_prior`).
    location
        Where the prior came from (model-file key), named in error messages.

    Returns
    -------
    PriorDistribution

    Raises
    ------
    InputError
        Unknown family, missing or unknown parameter, or a value not allowed;
        all problems of one prior are listed in one message.
    """
    location = location or Location()
    chosen = prior if prior is not None else default
    if chosen is None:
        raise InputError("no prior given and no default", location, None,
                         "a prior with a family from " + ", ".join(sorted(PRIOR_FAMILIES)))
    if isinstance(chosen, PriorDistribution):
        return _check(Prior(chosen.family, dict(chosen.parameters)), location).truncated(
            chosen.lower, chosen.upper, location)
    return _check(chosen, location)


def default_pka_shift_prior(sd: float = 0.5) -> PriorDistribution:
    """Default prior of a pKa shift [pK units]: normal(0, sd), sd stated by the chemist.

    The 0.5 default is common practice for the shift of an aqueous handbook
    pKa into a partly organic medium (see docs/sampling.md).
    """
    return build_prior(Prior("normal", {"mean": 0.0, "sd": sd}))


def default_log10_rate_prior(lower: float, upper: float) -> PriorDistribution:
    """Default prior of log10 of a rate constant: uniform within its bounds."""
    return build_prior(Prior("uniform", {"lower": lower, "upper": upper}))


def default_error_scale_prior(scale: float) -> PriorDistribution:
    """Default prior of an error scale (e.g. an area% noise sd): halfnormal(scale).

    Weakly informative in the sense of Gelman, Bayesian Analysis 2006, 1, 515:
    choose ``scale`` a few times the expected noise level.
    """
    return build_prior(Prior("halfnormal", {"scale": scale}))


def joint_log_prior(priors, theta) -> np.ndarray:
    """Sum of independent log-priors for each row of ``theta``.

    Parameters
    ----------
    priors
        Sequence of :class:`PriorDistribution`, one per column.
    theta
        Array (n_sets, n_params).

    Returns
    -------
    numpy.ndarray
        (n_sets,) log prior density; -inf outside the support.
    """
    theta = np.atleast_2d(np.asarray(theta, dtype=float))
    total = np.zeros(theta.shape[0])
    for j, prior in enumerate(priors):
        total += prior.log_density(theta[:, j])
    return total
