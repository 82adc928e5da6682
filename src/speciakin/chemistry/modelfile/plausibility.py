"""Plausibility of a model: values that parse and are consistent, yet are
unlikely to be what the chemist meant.

Findings (codes, thresholds in module constants; documented in docs/data.md
and docs/model-file.md):

* ``pka_range`` (warning): a pKa outside :data:`PKA_RANGE` (about -2..16,
  the range measurable in water: outside it the site is fully (de)protonated
  at every pH from 0 to 14; common practice).
* ``prior_outside_bounds`` (warning): a prior centred outside the
  quantity's bounds; ``prior_disjoint`` (error): a uniform prior that does
  not overlap the bounds at all.
* ``self_loop`` (error): a step whose products are its reactants (it
  changes nothing); ``reaction_cycle`` (warning): steps that lead from a
  molecule back to itself (fine for a reversible reaction written as two
  steps; otherwise a direction is wrong).
* ``implausible`` (error): temperatures outside :data:`TEMPERATURE_LIMITS`,
  volumes outside :data:`VOLUME_RANGE` in the model's runs; an ionization
  enthalpy or activation energy beyond :data:`ENERGY_LIMIT` (such a value
  moves a pKa or a rate constant by orders of magnitude per degree);
  ``implausible_concentration`` (warning): an initial concentration above
  :data:`CONCENTRATION_LIMIT` in a model-file run (the workbook check of
  the data layer makes it an error).

The thresholds are shared with the data layer's workbook checks.
"""

from __future__ import annotations

import math
from collections import Counter

from speciakin.chemistry.model import Model, Quantity
from speciakin.chemistry.modelfile.paths import format_path, sub_path
from speciakin.errors import Location, Problem, ProblemCollector

__all__ = ["PKA_RANGE", "ENERGY_LIMIT", "TEMPERATURE_LIMITS", "VOLUME_RANGE", "CONCENTRATION_LIMIT", "prior_centre",
           "temperature_problem", "plausibility_problems"]

#: [pK units] pKa values outside draw a warning (common practice: the pH scale in water
#: with a margin of two units).
PKA_RANGE = (-2.0, 16.0)
#: [kJ/mol] largest plausible magnitude of an ionization enthalpy or an activation energy in
#: solution: ionization enthalpies of acids and bases in water lie within about -60 to +60 kJ/mol
#: (Goldberg, Kishore and Lennen, J. Phys. Chem. Ref. Data 31 (2002) 231; from memory), activation
#: energies of solution reactions mostly 20-150 kJ/mol (common practice); 400 kJ/mol is about the
#: energy of a C-C bond (from memory).
ENERGY_LIMIT = 400.0
#: [K] -100 C to 300 C: outside any liquid-phase solution chemistry with a pH probe (common practice).
TEMPERATURE_LIMITS = (173.15, 573.15)
#: [L] 1 uL to 100 m3 (common practice).
VOLUME_RANGE = (1e-6, 1e5)
#: [mol/L] no solute exceeds this; pure water is about 55.5 mol/L (from memory).
CONCENTRATION_LIMIT = 30.0


def prior_centre(q: Quantity) -> float | None:
    """Centre of a quantity's prior on the fitted scale, or None when unknown."""
    if q.prior is None:
        return None
    p = q.prior.parameters
    family = q.prior.family
    try:
        if family in ("normal", "student_t"):
            return float(p["mean"])
        if family == "lognormal":
            return math.exp(float(p["log_mean"]))
        if family == "uniform":
            return 0.5 * (float(p["lower"]) + float(p["upper"]))
        if family == "halfnormal":
            return 0.0
    except (KeyError, TypeError, ValueError, OverflowError):
        return None
    return None


def temperature_problem(kelvin: float, location: Location, c: ProblemCollector, what: str = "temperature") -> None:
    """Record an error when ``kelvin`` [K] is outside :data:`TEMPERATURE_LIMITS`."""
    lo, hi = TEMPERATURE_LIMITS
    if math.isfinite(kelvin) and not lo <= kelvin <= hi:
        c.error(f"{what} is not plausible for a solution with a pH probe", location,
                f"{kelvin:g} K = {kelvin - 273.15:g} C", f"{lo - 273.15:g} to {hi - 273.15:g} C; check the unit "
                "(a bare number in a model file is read in its default unit)", code="implausible")


def _quantity(q: Quantity, path: str, c: ProblemCollector) -> None:
    centre = prior_centre(q)
    if centre is None or not math.isfinite(centre):
        return
    lo = -math.inf if q.lower is None else q.lower
    hi = math.inf if q.upper is None else q.upper
    if q.prior is not None and q.prior.family == "uniform":
        try:
            a, b = float(q.prior.parameters["lower"]), float(q.prior.parameters["upper"])
        except (KeyError, TypeError, ValueError):
            return
        if b < lo or a > hi:
            c.error(f"{q.name}: the uniform prior does not overlap the bounds", Location(key=sub_path(path, "prior")),
                    f"prior {a:g} to {b:g}, bounds {lo:g} to {hi:g}", "a prior range that overlaps the bounds",
                    code="prior_disjoint")
        return
    if not lo <= centre <= hi:
        c.warning(f"{q.name}: the prior is centred outside the bounds", Location(key=sub_path(path, "prior")),
                  f"centre {centre:g}, bounds {lo:g} to {hi:g}",
                  "a prior centred within the bounds (the posterior would pile up at a bound)",
                  code="prior_outside_bounds")


def _find_cycle(edges: dict[str, set[str]]) -> list[str] | None:
    """One cycle of the directed graph ``edges`` as a list of nodes, or None."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(edges.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(edges):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def _steps(model: Model, c: ProblemCollector) -> None:
    molecules = {m.name for m in model.molecules}
    edges: dict[str, set[str]] = {}
    for step in model.steps:
        path = format_path("step", step.name)
        before = Counter()
        for r in step.reactants:
            before[r.species] += r.coefficient
        after = Counter()
        for name, n in step.products:
            after[name] += n
        if before and before == after:
            c.error("the step's products are its reactants: it changes nothing", Location(key=path),
                    step.name, "products that differ from the reactants", code="self_loop")
            continue
        for r in step.reactants:
            if r.species not in molecules or r.species in after:
                continue  # a molecule on both sides (a catalyst) is not consumed
            for name, _ in step.products:
                if name in molecules and name not in before:
                    edges.setdefault(r.species, set()).add(name)
    cycle = _find_cycle(edges)
    if cycle:
        c.warning("the steps form a cycle: " + " -> ".join(cycle), Location(key="step"), None,
                  "steps that do not lead back to a reactant, unless a reversible reaction is meant",
                  code="reaction_cycle")


def _runs(model: Model, c: ProblemCollector) -> None:
    lo, hi = VOLUME_RANGE
    for run in model.runs:
        path = format_path("run", run.name)
        if math.isfinite(run.volume) and run.volume > 0:
            if not lo <= run.volume <= hi:
                c.error("run volume is not physically plausible", Location(key=sub_path(path, "volume")),
                        f"{run.volume:g} L", f"{lo:g} to {hi:g} L", code="implausible")
            for name, amount in run.charges.items():
                if math.isfinite(amount) and amount / run.volume > CONCENTRATION_LIMIT:
                    c.warning(f"initial amount of {name} gives {amount / run.volume:.3g} mol/L, which no "
                              "solution can hold", Location(key=sub_path(path, "charges", name)), f"{amount:g} mol",
                              f"at most {CONCENTRATION_LIMIT:g} mol/L x the volume", code="implausible_concentration")
        for t in run.temperature.temperatures:
            if math.isfinite(t) and t > 0:
                temperature_problem(t, Location(key=sub_path(path, "temperature")), c, f"temperature of run {run.name}")
                break


def _energy(q: Quantity, path: str, c: ProblemCollector, what: str) -> None:
    """An error when the value of an enthalpy or activation energy [kJ/mol] exceeds :data:`ENERGY_LIMIT`."""
    value = float(q.value)
    if math.isfinite(value) and abs(value) > ENERGY_LIMIT:
        c.error(f"{what} is not plausible", Location(key=path), f"{value:g} kJ/mol",
                f"within +-{ENERGY_LIMIT:g} kJ/mol; check the unit (a bare number in a model file is read "
                "in its default unit, kJ/mol)", code="implausible")


def plausibility_problems(model: Model) -> list[Problem]:
    """Warnings and errors for implausible values of ``model`` (see the module notes)."""
    c = ProblemCollector()
    t = model.reference_temperature
    if math.isfinite(t) and t > 0:
        temperature_problem(t, Location(key="model.reference_temperature"), c, "reference temperature")
    for m in model.molecules:
        for i, site in enumerate(m.sites):
            path = sub_path(format_path("molecule", m.name), "site", i)
            pka = site.pka.value
            if math.isfinite(pka) and not PKA_RANGE[0] <= pka <= PKA_RANGE[1]:
                c.warning(f"pKa of {m.name}.{site.name} lies outside the range that matters in water",
                          Location(key=sub_path(path, "pka")), pka,
                          f"about {PKA_RANGE[0]:g} to {PKA_RANGE[1]:g}", code="pka_range")
            _quantity(site.pka, sub_path(path, "pka"), c)
            _quantity(site.enthalpy, sub_path(path, "enthalpy"), c)
            _energy(site.enthalpy, sub_path(path, "enthalpy"), c, f"ionization enthalpy of {m.name}.{site.name}")
        for i, inter in enumerate(m.interactions):
            _quantity(inter.w, sub_path(format_path("molecule", m.name), "interaction", i), c)
    for step in model.steps:
        path = format_path("step", step.name)
        _quantity(step.log10_k, sub_path(path, "log10_k"), c)
        _quantity(step.activation_energy, sub_path(path, "activation_energy"), c)
        _energy(step.activation_energy, sub_path(path, "activation_energy"), c, f"activation energy of {step.name}")
    _steps(model, c)
    _runs(model, c)
    return c.problems
