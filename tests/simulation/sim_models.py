"""Small invented models and runs for the simulation tests (invented numbers)."""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import solve_ivp

from speciakin.chemistry.model import (
    Dose,
    Interaction,
    Ion,
    Model,
    Molecule,
    PhControl,
    Quantity,
    Reactant,
    Requirement,
    Run,
    Site,
    Step,
    TemperatureProfile,
    Withdrawal,
)

T25 = 298.15


def q(value: float, unit: str = "") -> Quantity:
    return Quantity(float(value), unit)


def constant_temperature(t: float = T25) -> TemperatureProfile:
    return TemperatureProfile((0.0,), (t,))


def held(ph: float, titrant: str = "Na", conc: float = 1.0) -> PhControl:
    return PhControl("held", setpoint=ph, titrant=titrant, titrant_concentration=conc)


def logged_constant(ph: float, end: float) -> PhControl:
    return PhControl("logged", log_times=(0.0, end), log_ph=(ph, ph))


def two_site_model(pka_alkyl=9.3, pka_aryl=4.6, w=0.8, log10k_alkyl=math.log10(0.3),
                   log10k_aryl=math.log10(0.01), double=False, hydrolysis=None) -> Model:
    """Invented diamine 'Zorvamine' (alkyl amine + aryl amine) acylated by an
    invented anhydride; the acylations release one carboxylic acid each."""
    sub = Molecule("S", sites=(Site("N_alkyl", "base", q(pka_alkyl), q(50.0)),
                               Site("N_aryl", "base", q(pka_aryl), q(30.0))),
                   interactions=(Interaction("N_alkyl", "N_aryl", q(w)),),
                   moieties={"core": 1}, role="substrate")
    reagent = Molecule("E", moieties={"acyl": 2}, role="reagent")
    p_alkyl = Molecule("P_alkyl", sites=(Site("N_aryl", "base", q(pka_aryl - 0.5)),),
                       moieties={"core": 1, "acyl": 1}, role="product")
    p_aryl = Molecule("P_aryl", sites=(Site("N_alkyl", "base", q(pka_alkyl - 0.3)),),
                      moieties={"core": 1, "acyl": 1}, role="byproduct")
    p_both = Molecule("P_both", moieties={"core": 1, "acyl": 2}, role="byproduct")
    acid = Molecule("HA", sites=(Site("O", "acid", q(4.76)),), moieties={"acyl": 1}, role="acid")
    steps = [
        Step("acyl_alkyl", (Reactant("S", (Requirement("N_alkyl"),)), Reactant("E")),
             (("P_alkyl", 1.0), ("HA", 1.0)), q(log10k_alkyl), q(45.0)),
        Step("acyl_aryl", (Reactant("S", (Requirement("N_aryl"),)), Reactant("E")),
             (("P_aryl", 1.0), ("HA", 1.0)), q(log10k_aryl), q(40.0)),
    ]
    if double:
        steps += [
            Step("acyl_alkyl_2", (Reactant("P_aryl", (Requirement("N_alkyl"),)), Reactant("E")),
                 (("P_both", 1.0), ("HA", 1.0)), q(log10k_alkyl - 0.3)),
            Step("acyl_aryl_2", (Reactant("P_alkyl", (Requirement("N_aryl"),)), Reactant("E")),
                 (("P_both", 1.0), ("HA", 1.0)), q(log10k_aryl - 0.3)),
        ]
    if hydrolysis is not None:
        log10k_w, log10k_oh = hydrolysis
        steps += [
            Step("hydrolysis_water", (Reactant("E"), Reactant("water")), (("HA", 2.0),), q(log10k_w)),
            Step("hydrolysis_hydroxide", (Reactant("E"), Reactant("hydroxide")), (("HA", 2.0),), q(log10k_oh)),
        ]
    return Model("zorvamine acylation (invented)", (sub, reagent, p_alkyl, p_aryl, p_both, acid),
                 tuple(steps), ions=(Ion("Na", 1), Ion("Cl", -1)))


def two_site_run(ph_control: PhControl, end=3 * 3600.0, substrate=0.10, reagent_eq=1.05,
                 dose_minutes=30.0, name="r", withdrawals=(), temperature=None, chloride=0.0,
                 sodium=0.0) -> Run:
    doses = (Dose("E", reagent_eq * substrate, 0.0, dose_minutes * 60.0, 0.05),) if dose_minutes > 0 else ()
    charges = {"S": substrate, "Cl": chloride, "Na": sodium}
    if dose_minutes == 0:
        charges["E"] = reagent_eq * substrate
    return Run(name, charges, 1.0, temperature or constant_temperature(), ph_control, end, doses=doses,
               withdrawals=tuple(Withdrawal(t, v) for t, v in withdrawals))


def radau_piecewise(rhs, y0, cuts, times):
    """Integrate ``rhs`` with scipy's Radau (rtol 1e-10) from one cut to the next,
    restarting at every cut; returns the states at ``times`` (one row each, the
    start row at t = 0 included)."""
    y = np.asarray(y0, float)
    rows = {0.0: y.copy()}
    for a, b in zip(cuts[:-1], cuts[1:]):
        inside = times[(times > a) & (times <= b)]
        sol = solve_ivp(rhs, (a, b), y, method="Radau", t_eval=np.union1d(inside, [b]), rtol=1e-10, atol=1e-16)
        assert sol.success
        for t, row in zip(sol.t, sol.y.T):
            rows[float(t)] = row
        y = sol.y[:, -1]
    return np.array([rows[float(t)] for t in times])


def two_site_scipy_reference(pka_alk, pka_ar, w, lk_alk, lk_ar, lk_w, lk_oh, ph, pkw, times, method="Radau",
                             rtol=1e-10, atol=1e-16, substrate=0.1):
    """The held-constant-pH chemistry of :func:`two_site_model` as a numpy right-hand side written
    here from the site-binding speciation and the site-specific rate law r_i = k_i [S] f_i(pH) [E]
    (f_i: free fraction of site i), integrated with scipy.integrate.solve_ivp (``method``), the
    general-purpose reference; volume 1 L, all reagent (0.105 mol) present at t = 0.

    Returns the (len(times), 6) amounts of S, E, the two monoamides, the diamide and the acid.
    """
    lw = np.array([0.0, pka_alk - ph, pka_ar - ph, pka_alk + pka_ar - 2 * ph - w])
    pop = 10.0 ** (lw - lw.max())
    pop /= pop.sum()
    f_alk, f_ar = pop[0] + pop[2], pop[0] + pop[1]
    free = lambda pka: 1.0 / (1.0 + 10.0 ** (pka - ph))  # noqa: E731
    k = 10.0 ** np.array([lk_alk, lk_ar, lk_alk - 0.3, lk_ar - 0.3, lk_w, lk_oh])
    oh = 10.0 ** (ph - pkw)

    def rhs(t, c):
        s, e, pa, pb, pab, ha = c
        r = [k[0] * s * f_alk * e, k[1] * s * f_ar * e, k[2] * pb * free(pka_alk - 0.3) * e,
             k[3] * pa * free(pka_ar - 0.5) * e, k[4] * e, k[5] * oh * e]
        return [-r[0] - r[1], -sum(r), r[0] - r[3], r[1] - r[2], r[2] + r[3],
                r[0] + r[1] + r[2] + r[3] + 2 * r[4] + 2 * r[5]]

    sol = solve_ivp(rhs, (0.0, times[-1]), [substrate, 0.105, 0, 0, 0, 0], method=method, t_eval=times,
                    rtol=rtol, atol=atol)
    assert sol.success
    return sol.y.T
