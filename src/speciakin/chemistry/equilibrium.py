"""Solution equilibrium: solve the charge balance of a mixture for pH.

The unknown is ``p = pH = -log10 a(H+)`` (what an electrode reports).  With
concentrations in [mol/L], the charge balance is::

    f(p) = [H+] - [OH-] + Q + sum_m c_m * zbar_m(p) = 0

* ``[H+] = 10**-p / g1`` and ``[OH-] = Kw / (10**-p * g1)``, with ``g1`` the
  activity coefficient of a monovalent ion (1 when ideal) and ``Kw`` from
  :func:`speciakin.chemistry.water.ion_product`;
* ``Q`` the net charge concentration of spectator (strong) ions
  ``sum_i z_i c_i`` [mol/L] (Na+ from NaOH counts +, Cl- from HCl counts -);
* ``zbar_m`` the mean charge of molecule ``m`` over its microstates.  With
  activity corrections the thermodynamic microstate weight ``w(s)`` holds for
  activities, so concentration shares are ``w(s) / gamma(z(s))``: the
  log10 weight of microstate s gains ``-log10 gamma(z(s))`` (Davies).

Because every bound proton adds +1 charge, ``d zbar/dp = -ln10 Var(m)``
(variance of the number of bound protons), so::

    f'(p) = -ln10 ([H+] + [OH-] + sum_m c_m Var_m(p)) < 0

``f`` falls strictly from +inf to -inf: exactly one root.  It is found by
Newton steps in ``p`` kept inside a bracket [-3, 17] that shrinks at every
step (bisection when a Newton step leaves it), over the microstates of every
molecule: the one solve of
:func:`speciakin.chemistry.microstate_formulas.solve_charge_balance`, which
the simulation kernel compiles; here it runs as Python on the molecules laid
out as flat arrays, after the checks.  The residual and its scale are then
evaluated by :func:`charge_balance` (grouped by bound protons).  With Davies
activities the ionic strength is iterated to a fixed point around that
solve.

References
----------
.. [1] Butler, J. N. "Ionic Equilibrium: Solubility and pH Calculations."
   Wiley, 1998 (charge balance, proton condition).
.. [2] Press, W. H. et al. "Numerical Recipes", 3rd ed., 2007, section 9.4
   (Newton-Raphson safeguarded by bisection, rtsafe).
.. [3] Davies, C. W. "Ion Association", 1962 (activity coefficients).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from speciakin.chemistry import microstates as ms
from speciakin.chemistry import water
from speciakin.chemistry.flat_layout import flat_sites
from speciakin.chemistry.microstate_formulas import PH_HIGH, PH_LOW, solve_charge_balance
from speciakin.chemistry.model import ACTIVITY_MODELS, Model, Molecule
from speciakin.errors import InputError, Location, SolverError

__all__ = ["ACTIVITY_MODELS", "IonizableSpecies", "EquilibriumResult", "charge_balance", "solve_ph",
           "solve_model_ph"]

_MAX_IONIC_STRENGTH_ITERATIONS = 100


@dataclass(frozen=True, eq=False)
class IonizableSpecies:
    """Acid-base description of one molecule for the charge balance.

    Attributes
    ----------
    name
        Molecule name.
    pka
        Site pKa values at the working temperature, shape ``(n,)`` [-]
        (may be empty: a molecule without sites).
    interaction
        ``(n, n)`` W matrix [pK units].
    charge_protonated, charge_deprotonated
        Site charges in each state [e].
    fixed_charge
        pH-independent charge [e].
    """

    name: str
    pka: np.ndarray
    interaction: np.ndarray
    charge_protonated: np.ndarray
    charge_deprotonated: np.ndarray
    fixed_charge: float = 0.0

    def __post_init__(self) -> None:
        pka = np.atleast_1d(np.asarray(self.pka, dtype=float))
        zp = np.atleast_1d(np.asarray(self.charge_protonated, dtype=float))
        zd = np.atleast_1d(np.asarray(self.charge_deprotonated, dtype=float))
        if pka.size:
            pka, w = ms.check_site_arrays(pka, self.interaction)
        else:
            w = np.zeros((0, 0))
        if zp.shape != pka.shape or zd.shape != pka.shape:
            raise InputError("one protonated and one deprotonated charge per site is needed",
                             Location(key=f"{self.name}.charges"), (zp.size, zd.size), f"{pka.size} each")
        if np.any(zp - zd != 1.0):
            raise InputError("a site's protonated charge must exceed its deprotonated charge by 1",
                             Location(key=f"{self.name}.charges"), (zp.tolist(), zd.tolist()),
                             "charges of a kind in SITE_KINDS (base +1/0, acid 0/-1)")
        if not np.isfinite(self.fixed_charge):
            raise InputError("fixed charge is not finite", Location(key=f"{self.name}.fixed_charge"),
                             self.fixed_charge, "an integer")
        for key, value in (("pka", pka), ("interaction", w), ("charge_protonated", zp),
                           ("charge_deprotonated", zd)):
            object.__setattr__(self, key, value)

    @classmethod
    def from_molecule(cls, molecule: Molecule, temperature: float | None = None,
                      reference_temperature: float = 298.15) -> "IonizableSpecies":
        """Build from a :class:`~speciakin.chemistry.model.Molecule` (van 't
        Hoff shift of each pKa when ``temperature`` is given)."""
        from speciakin.chemistry.speciation import molecule_site_arrays

        pka, w, zp, zd = molecule_site_arrays(molecule, temperature, reference_temperature)
        return cls(molecule.name, pka, w, zp, zd, float(molecule.fixed_charge))

    @property
    def n_sites(self) -> int:
        return int(np.size(self.pka))

    def tables(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Charge-balance tables ``(c, m, z)``, grouped by bound protons j = 0..n.

        Every bound proton adds +1 charge, so all microstates with j bound
        protons share the charge ``z_j = fixed + sum_i z_deprot_i + j`` and
        the charge balance needs only the binding-polynomial coefficients:
        ``c_j = log10 B_j`` (see
        :func:`~speciakin.chemistry.microstates.binding_polynomial_log_coefficients`),
        ``m_j = j``, ``z_j``.  Per-microstate tables (``c(s), m(s), z(s)``)
        give the same charge balance; the grouped ones are shorter.
        Computed once per species and cached.
        """
        cached = self.__dict__.get("_tables")
        if cached is None:
            base = float(self.fixed_charge) + float(np.sum(self.charge_deprotonated))
            if self.n_sites == 0:
                cached = (np.zeros(1), np.zeros(1), np.array([base]))
            else:
                c = ms.binding_polynomial_log_coefficients(self.pka, self.interaction)
                j = np.arange(c.size, dtype=float)
                cached = (c, j, base + j)
            object.__setattr__(self, "_tables", cached)
        return cached


@dataclass
class EquilibriumResult:
    """Solved charge balance.

    Attributes
    ----------
    ph
        -log10 a(H+) [-].
    hydrogen
        [H+] [mol/L].
    hydroxide
        [OH-] [mol/L].
    ionic_strength
        [mol/L] (computed also when ``activity == "ideal"``).
    charge_residual
        f(pH) at the solution [mol/L].
    relative_residual
        ``|charge_residual|`` over the largest ionic term [-].
    iterations
        Newton/bisection steps in total (over all ionic-strength passes).
    activity
        Activity option used.
    temperature
        [K].
    pkw
        pKw used [-].
    activity_coefficient
        Monovalent activity coefficient at the solution [-].
    species_mean_charge
        Mean charge of each molecule by name [e].
    """

    ph: float
    hydrogen: float
    hydroxide: float
    ionic_strength: float
    charge_residual: float
    relative_residual: float
    iterations: int
    activity: str
    temperature: float
    pkw: float
    activity_coefficient: float = 1.0
    species_mean_charge: dict[str, float] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {
            "ph": self.ph, "hydrogen_mol_per_L": self.hydrogen, "hydroxide_mol_per_L": self.hydroxide,
            "ionic_strength_mol_per_L": self.ionic_strength, "charge_residual_mol_per_L": self.charge_residual,
            "relative_residual": self.relative_residual, "iterations": self.iterations,
            "activity": self.activity, "temperature_K": self.temperature, "pkw": self.pkw,
            "activity_coefficient": self.activity_coefficient,
            "species_mean_charge": dict(self.species_mean_charge),
        }

    @classmethod
    def from_dict(cls, data: Mapping) -> "EquilibriumResult":
        """Rebuild from :meth:`to_dict` output (round trip)."""
        return cls(
            ph=float(data["ph"]), hydrogen=float(data["hydrogen_mol_per_L"]),
            hydroxide=float(data["hydroxide_mol_per_L"]), ionic_strength=float(data["ionic_strength_mol_per_L"]),
            charge_residual=float(data["charge_residual_mol_per_L"]),
            relative_residual=float(data["relative_residual"]), iterations=int(data["iterations"]),
            activity=str(data["activity"]), temperature=float(data["temperature_K"]), pkw=float(data["pkw"]),
            activity_coefficient=float(data["activity_coefficient"]),
            species_mean_charge={str(k): float(v) for k, v in data["species_mean_charge"].items()})

    def report(self) -> str:
        lines = [
            "Solution equilibrium",
            "====================",
            f"pH                  {self.ph:.4f}",
            f"[H+]                {self.hydrogen:.4e} mol/L",
            f"[OH-]               {self.hydroxide:.4e} mol/L",
            f"ionic strength      {self.ionic_strength:.4e} mol/L",
            f"temperature         {self.temperature:.2f} K",
            f"pKw                 {self.pkw:.4f}",
            f"activity            {self.activity} (gamma(+-1) = {self.activity_coefficient:.4f})",
            "",
            "Mean charge",
            "-----------",
        ]
        lines += [f"{name:<20}{z:+.4f}" for name, z in self.species_mean_charge.items()]
        lines += ["", "Solver", "------",
                  f"iterations          {self.iterations}",
                  f"charge residual     {self.charge_residual:.3e} mol/L "
                  f"(relative {self.relative_residual:.1e})"]
        return "\n".join(lines)


def _molecule_moments(c, m, z, p, log_gamma_offset):
    """Mean charge, variance of bound protons and sum |z| share at pH p."""
    lw = c - p * m + log_gamma_offset
    lw = lw - lw.max()
    w = np.exp(ms.LN10 * lw)
    pop = w / w.sum()
    mean_m = pop @ m
    return pop @ z, pop @ (m - mean_m) ** 2, pop @ np.abs(z)


def charge_balance(ph, tables, concentrations, strong_ion_charge, pkw_value,
                   log10_gamma1=0.0, log_gamma_offsets=None):
    """Charge balance ``f(pH)``, its derivative and its scale.

    Parameters
    ----------
    ph
        -log10 a(H+) [-], scalar.
    tables
        Per molecule, the tuple ``(c, m, z)`` of :meth:`IonizableSpecies.tables`.
    concentrations
        Total concentration of each molecule [mol/L].
    strong_ion_charge
        Net spectator-ion charge ``Q`` [mol/L].
    pkw_value
        pKw [-].
    log10_gamma1
        log10 activity coefficient of a monovalent ion (0 = ideal).
    log_gamma_offsets
        Per molecule, per microstate ``-log10 gamma(z(s))`` (None = zeros).

    Returns
    -------
    (f, dfdph, scale)
        f [mol/L], df/dpH [mol/L], and the sum of absolute ionic terms
        [mol/L] against which the residual is judged.

    References
    ----------
    Butler 1998 (module references).
    """
    a_h = 10.0 ** (-ph)
    h = a_h / 10.0**log10_gamma1
    oh = 10.0 ** (-pkw_value) / (a_h * 10.0**log10_gamma1)
    f = h - oh + strong_ion_charge
    dfdp = -ms.LN10 * (h + oh)
    scale = h + oh + abs(strong_ion_charge)
    for j, (c, m, z) in enumerate(tables):
        off = 0.0 if log_gamma_offsets is None else log_gamma_offsets[j]
        zbar, var, zabs = _molecule_moments(c, m, z, ph, off)
        f += concentrations[j] * zbar
        dfdp -= ms.LN10 * concentrations[j] * var
        scale += concentrations[j] * zabs
    return f, dfdp, scale


def _solve_fixed_gamma(species, tables, conc, strong, pkw_value, lg1, offsets, start):
    """pH of the charge balance at fixed activity coefficients: the one solve of
    :func:`~speciakin.chemistry.microstate_formulas.solve_charge_balance` (run as
    Python), then the residual and its scale from :func:`charge_balance`.

    The solve works in p' = pH + log10 gamma1 with pKw' = pKw + 2 log10 gamma1
    (so that its 10^-p' and Kw'/10^-p' are the concentrations [H+] and [OH-])
    and with the Davies shifts folded into the site pKa and W
    (:func:`~speciakin.chemistry.flat_layout.flat_sites`).
    """
    sites = flat_sites(species, lg1)
    n_mol = len(species)
    n_micro = int(sites[2][-1])
    amounts = np.append(np.asarray(conc, dtype=float), strong)
    charges = np.append(np.zeros(n_mol), 1.0)
    pops, zbar, variance = np.empty(max(n_micro, 1)), np.empty(max(n_mol, 1)), np.empty(max(n_mol, 1))
    guess = math.nan if start is None else float(start) + lg1
    shifted, iterations = solve_charge_balance(amounts, charges, n_mol, n_mol + 1, *sites,
                                               pkw_value + 2.0 * lg1, guess, pops, zbar, variance)
    if not math.isfinite(shifted):
        f_lo, _, _ = charge_balance(PH_LOW, tables, conc, strong, pkw_value, lg1, offsets)
        f_hi, _, _ = charge_balance(PH_HIGH, tables, conc, strong, pkw_value, lg1, offsets)
        raise SolverError(f"charge balance has no root between pH {PH_LOW:g} and {PH_HIGH:g} "
                          f"(f = {f_lo:.3e}, {f_hi:.3e} mol/L)")
    p = shifted - lg1
    f, _, scale = charge_balance(p, tables, conc, strong, pkw_value, lg1, offsets)
    return p, f, scale, int(iterations)


def _check_amounts(names, conc, strong):
    problems = []
    for name, c in zip(names, conc):
        if not np.isfinite(c) or c < 0:
            problems.append((name, c))
    if problems:
        name, c = problems[0]
        raise InputError("concentration must be a non-negative finite number",
                         Location(key=str(name)), c, ">= 0 [mol/L]")
    if not np.isfinite(strong):
        raise InputError("strong-ion charge is not finite", Location(key="strong_ion_charge"), strong,
                         "a finite number [mol/L]")


def solve_ph(species: Sequence[IonizableSpecies], concentrations, strong_ion_charge: float = 0.0,
             temperature: float = 298.15, activity: str = "ideal",
             spectator_ionic_strength: float | None = None,
             initial_ph: float | None = None, pkw_value: float | None = None) -> EquilibriumResult:
    """Solve the charge balance of a mixture for pH.

    Parameters
    ----------
    species
        The ionizable molecules.
    concentrations
        Total concentration of each molecule [mol/L], >= 0.
    strong_ion_charge
        Net charge of spectator ions ``sum z_i c_i`` [mol/L].
    temperature
        [K] (sets Kw and the Davies slope; pKa values in ``species`` are
        taken as given).
    activity
        A key of :data:`ACTIVITY_MODELS`.
    spectator_ionic_strength
        ``1/2 sum z_i^2 c_i`` of the spectator ions [mol/L]; None = assume
        monovalent ions, ``|strong_ion_charge| / 2``.
    pkw_value
        pKw of the medium at ``temperature`` (None = water, IAPWS R11-07).
    initial_ph
        Optional starting guess (speeds up a sequence of solves).

    Returns
    -------
    EquilibriumResult

    Raises
    ------
    InputError
        Negative or non-finite amounts, unknown activity option.
    SolverError
        If the solver does not converge (not expected for valid input).

    References
    ----------
    Butler 1998; Press et al. 2007; Davies 1962 (module references).
    """
    if activity not in ACTIVITY_MODELS:
        raise InputError("unknown activity option", Location(key="activity"), activity,
                         ", ".join(ACTIVITY_MODELS))
    conc = np.atleast_1d(np.asarray(concentrations, dtype=float))
    if conc.size != len(species):
        raise InputError("one concentration per molecule is needed", Location(key="concentrations"),
                         conc.size, f"{len(species)} values")
    strong = float(strong_ion_charge)
    _check_amounts([s.name for s in species], conc, strong)
    if spectator_ionic_strength is None:
        spectator_ionic_strength = 0.5 * abs(strong)
    if not np.isfinite(spectator_ionic_strength) or spectator_ionic_strength < 0:
        raise InputError("spectator ionic strength must be >= 0", Location(key="spectator_ionic_strength"),
                         spectator_ionic_strength, ">= 0 [mol/L]")
    pkw_value = float(water.pkw(temperature) if pkw_value is None else pkw_value)
    tables = [s.tables() for s in species]

    def ionic(p, lg1, offsets):
        a_h = 10.0 ** (-p)
        h = a_h / 10.0**lg1
        oh = 10.0 ** (-pkw_value) / (a_h * 10.0**lg1)
        total = 0.5 * (h + oh) + spectator_ionic_strength
        for j, (c, m, z) in enumerate(tables):
            lw = c - p * m + (0.0 if offsets is None else offsets[j])
            w = np.exp(ms.LN10 * (lw - lw.max()))
            total += 0.5 * conc[j] * (w / w.sum()) @ z**2
        return float(total)

    lg1, offsets = 0.0, None
    p, f, scale, iterations = _solve_fixed_gamma(species, tables, conc, strong, pkw_value, lg1, offsets,
                                                      initial_ph)
    strength = ionic(p, lg1, offsets)
    if activity == "davies":
        previous = None
        # plain substitution first; where it oscillates (the pH's pull on I near -1 per pass, at ionic
        # strengths beyond the Davies range) the second pass halves each step of I, which converges
        for damping in [1.0] * _MAX_IONIC_STRENGTH_ITERATIONS + [0.5] * _MAX_IONIC_STRENGTH_ITERATIONS:
            lg1 = float(water.davies_log10_gamma(1.0, strength, temperature))
            offsets = [-water.davies_log10_gamma(z, strength, temperature) for (_, _, z) in tables]
            p_new, f, scale, it = _solve_fixed_gamma(species, tables, conc, strong, pkw_value, lg1, offsets, p)
            iterations += it
            new_strength = ionic(p_new, lg1, offsets)
            # converged when the pH stops moving, or when the activity coefficients repeat to the
            # last bit: the pH problem is then the one already solved, and a pH whose charge balance
            # is nearly flat moves between starting points only within the pH solver's tolerance
            same_problem = previous is not None and lg1 == previous[0] and all(
                np.array_equal(a, b) for a, b in zip(offsets, previous[1]))
            converged = abs(new_strength - strength) <= 1e-12 * max(new_strength, 1e-30) \
                and (abs(p_new - p) < 1e-12 or same_problem)
            previous = (lg1, [np.array(a, float) for a in offsets])
            p, strength = p_new, (new_strength if damping == 1.0
                                  else strength + damping * (new_strength - strength))
            if converged:
                break
        else:
            raise SolverError("ionic strength iteration did not converge "
                              f"(I = {strength:.4e} mol/L, pH {p:.6f})")
        lg1 = float(water.davies_log10_gamma(1.0, strength, temperature))
        offsets = [-water.davies_log10_gamma(z, strength, temperature) for (_, _, z) in tables]
        f, _, scale = charge_balance(p, tables, conc, strong, pkw_value, lg1, offsets)
    if not np.isfinite(p):
        raise SolverError(f"charge balance gave a non-finite pH ({p})")
    a_h = 10.0 ** (-p)
    mean_charges = {}
    for j, s in enumerate(species):
        c, m, z = tables[j]
        mean_charges[s.name] = float(_molecule_moments(c, m, z, p, 0.0 if offsets is None else offsets[j])[0])
    return EquilibriumResult(
        ph=float(p), hydrogen=float(a_h / 10.0**lg1),
        hydroxide=float(10.0 ** (-pkw_value) / (a_h * 10.0**lg1)),
        ionic_strength=strength, charge_residual=float(f),
        relative_residual=float(abs(f) / scale) if scale > 0 else 0.0,
        iterations=int(iterations), activity=activity, temperature=float(temperature),
        pkw=pkw_value, activity_coefficient=float(10.0**lg1), species_mean_charge=mean_charges)


def solve_model_ph(model: Model, concentrations: Mapping[str, float], temperature: float | None = None,
                   activity: str | None = None) -> EquilibriumResult:
    """Solve the pH of a mixture described by a :class:`~speciakin.chemistry.model.Model`.

    Parameters
    ----------
    model
        The model (molecules, spectator ions, reference temperature, activity).
    concentrations
        Concentration [mol/L] by molecule or ion name; missing names are 0.
    temperature
        [K]; None = the model's reference temperature.
    activity
        None = the model's activity option.

    Returns
    -------
    EquilibriumResult
    """
    t = model.reference_temperature if temperature is None else float(temperature)
    known_molecules = {m.name for m in model.molecules}
    ions = {ion.name: ion.charge for ion in model.ions}
    for name in concentrations:
        if name not in known_molecules and name not in ions:
            raise InputError("unknown molecule or ion", Location(key=str(name)), name,
                             ", ".join(sorted(known_molecules | set(ions))))
    species = [IonizableSpecies.from_molecule(m, t, model.reference_temperature) for m in model.molecules]
    conc = [float(concentrations.get(m.name, 0.0)) for m in model.molecules]
    ion_conc = {n: float(concentrations.get(n, 0.0)) for n in ions}
    _check_amounts(list(ion_conc), list(ion_conc.values()), 0.0)
    strong = sum(ions[n] * c for n, c in ion_conc.items())
    spectator = 0.5 * sum(ions[n] ** 2 * c for n, c in ion_conc.items())
    return solve_ph(species, conc, strong, t, activity or model.activity, spectator,
                    pkw_value=float(water.medium_pkw(model, t)))
