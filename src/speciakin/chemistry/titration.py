"""Titration of a mixture of molecules with a strong acid or a strong base.

At titrant volume ``v`` [L] added to a starting volume ``V0`` [L]:

* each molecule's concentration is ``n_m / (V0 + v)`` (dilution);
* the spectator-ion charge is ``(Q0 V0 + sign * C_t v) / (V0 + v)``, with
  ``sign = +1`` for a strong base (its cation, e.g. Na+, stays in solution)
  and ``-1`` for a strong acid (its anion, e.g. Cl-);
* pH then follows from the charge balance
  (:func:`speciakin.chemistry.equilibrium.solve_ph`), solved point by point
  starting from the previous point's pH.

References
----------
.. [1] Harris, D. C. "Quantitative Chemical Analysis", chapter on acid-base
   titrations (charge-balance treatment of titration curves).
.. [2] Butler, J. N. "Ionic Equilibrium", Wiley, 1998.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping, Sequence

import numpy as np

from speciakin.chemistry import microstates as ms
from speciakin.chemistry import water
from speciakin.chemistry.equilibrium import IonizableSpecies, solve_ph
from speciakin.errors import InputError, Location

__all__ = ["TITRANT_KINDS", "TitrationResult", "titrate"]

#: Titrant kinds -> sign of the spectator charge they add per mole.
TITRANT_KINDS: Mapping[str, int] = MappingProxyType({"base": +1, "acid": -1})


@dataclass
class TitrationResult:
    """A computed titration curve.

    Attributes
    ----------
    titrant
        ``"base"`` or ``"acid"``.
    titrant_concentration
        [mol/L].
    initial_volume
        [L].
    titrant_volume
        Added volume at each point, shape ``(p,)`` [L].
    ph
        pH at each point [-].
    ionic_strength
        [mol/L] at each point.
    molecules
        Molecule names.
    labels
        Per molecule, microstate labels (or None when not given).
    site_names
        Per molecule, site names (or None).
    populations
        Per molecule, microstate fractions, shape ``(p, 2**n)`` [-].
    site_protonated
        Per molecule, protonated fraction of each site, shape ``(p, n)`` [-].
    iterations
        Total solver steps.
    max_relative_residual
        Largest relative charge-balance residual over the curve [-].
    """

    titrant: str
    titrant_concentration: float
    initial_volume: float
    titrant_volume: np.ndarray
    ph: np.ndarray
    ionic_strength: np.ndarray
    molecules: list[str]
    labels: list[list[str] | None]
    site_names: list[list[str] | None]
    populations: list[np.ndarray]
    site_protonated: list[np.ndarray]
    iterations: int = 0
    max_relative_residual: float = 0.0
    notes: list[str] = field(default_factory=list)

    def steepest_points(self) -> np.ndarray:
        """Titrant volumes [L] at local maxima of |dpH/dv| (inflection
        points, i.e. estimated equivalence points), ascending."""
        # volumes repeated (to rounding) carry no slope: keep the first of each
        v_all = self.titrant_volume
        tol = 1e-9 * max(float(np.max(np.abs(v_all))), 1e-12)
        keep = np.concatenate([[True], np.diff(v_all) > tol])
        v, p = v_all[keep], self.ph[keep]
        if v.size < 3:
            return np.array([])
        slope = np.abs(np.gradient(p, v))
        idx = [i for i in range(1, v.size - 1) if slope[i] > slope[i - 1] and slope[i] >= slope[i + 1]
               and slope[i] > 2.0 * np.median(slope)]
        return v[idx]

    def to_frame(self):
        """pandas DataFrame, one row per point: titrant volume [mL], pH,
        ionic strength, then per molecule its microstate fractions
        (``molecule: x[label]``) and site protonated fractions
        (``molecule: protonated[site]``)."""
        import pandas as pd

        data = {"titrant volume [mL]": self.titrant_volume * 1e3, "pH": self.ph,
                "ionic strength [mol/L]": self.ionic_strength}
        for j, name in enumerate(self.molecules):
            labels = self.labels[j] or [str(k) for k in range(self.populations[j].shape[1])]
            for k, label in enumerate(labels):
                data[f"{name}: x[{label}]"] = self.populations[j][:, k]
            sites = self.site_names[j] or [str(i) for i in range(self.site_protonated[j].shape[1])]
            for i, site in enumerate(sites):
                data[f"{name}: protonated[{site}]"] = self.site_protonated[j][:, i]
        return pd.DataFrame(data)

    def to_dict(self) -> dict:
        return {
            "titrant": self.titrant, "titrant_concentration_mol_per_L": self.titrant_concentration,
            "initial_volume_L": self.initial_volume, "titrant_volume_L": self.titrant_volume.tolist(),
            "ph": self.ph.tolist(), "ionic_strength_mol_per_L": self.ionic_strength.tolist(),
            "molecules": list(self.molecules), "labels": [list(x) if x else None for x in self.labels],
            "site_names": [list(x) if x else None for x in self.site_names],
            "populations": [p.tolist() for p in self.populations],
            "site_protonated": [p.tolist() for p in self.site_protonated],
            "iterations": self.iterations, "max_relative_residual": self.max_relative_residual,
            "steepest_points_L": self.steepest_points().tolist(), "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, data: Mapping) -> "TitrationResult":
        """Rebuild from :meth:`to_dict` output (round trip)."""
        def arrays(key):
            return [np.asarray(x, dtype=float) for x in data[key]]

        return cls(
            titrant=str(data["titrant"]), titrant_concentration=float(data["titrant_concentration_mol_per_L"]),
            initial_volume=float(data["initial_volume_L"]),
            titrant_volume=np.asarray(data["titrant_volume_L"], dtype=float),
            ph=np.asarray(data["ph"], dtype=float),
            ionic_strength=np.asarray(data["ionic_strength_mol_per_L"], dtype=float),
            molecules=list(data["molecules"]),
            labels=[list(x) if x else None for x in data["labels"]],
            site_names=[list(x) if x else None for x in data["site_names"]],
            populations=arrays("populations"), site_protonated=arrays("site_protonated"),
            iterations=int(data["iterations"]), max_relative_residual=float(data["max_relative_residual"]),
            notes=list(data["notes"]))

    def report(self) -> str:
        lines = ["Titration", "=========",
                 f"titrant             {self.titrant}, {self.titrant_concentration:.4g} mol/L",
                 f"starting volume     {self.initial_volume * 1e3:.4g} mL",
                 f"points              {self.ph.size}, 0 to {self.titrant_volume[-1] * 1e3:.4g} mL",
                 f"pH                  {self.ph[0]:.3f} -> {self.ph[-1]:.3f}",
                 "", "Steepest points (estimated equivalence)", "---------------------------------------"]
        steep = self.steepest_points()
        if steep.size == 0:
            lines.append("none found")
        for v in steep:
            i = int(np.argmin(np.abs(self.titrant_volume - v)))
            lines.append(f"{v * 1e3:10.4f} mL   pH {self.ph[i]:.3f}")
        lines += ["", "Solver", "------", f"iterations          {self.iterations}",
                  f"max residual        {self.max_relative_residual:.1e} (relative)"]
        return "\n".join(lines + ([""] + self.notes if self.notes else []))


def titrate(species: Sequence[IonizableSpecies], amounts, initial_volume: float, titrant: str,
            titrant_concentration: float, titrant_volumes, initial_strong_ion_charge: float = 0.0,
            temperature: float = 298.15, activity: str = "ideal",
            labels: Sequence[Sequence[str] | None] | None = None,
            site_names: Sequence[Sequence[str] | None] | None = None) -> TitrationResult:
    """Compute a titration curve.

    Parameters
    ----------
    species
        Molecules in the vessel.
    amounts
        Amount of each molecule [mol], >= 0.
    initial_volume
        Starting volume [L], > 0.
    titrant
        A key of :data:`TITRANT_KINDS` (``"base"`` or ``"acid"``).
    titrant_concentration
        [mol/L], > 0.
    titrant_volumes
        Added volumes [L], >= 0, ascending.
    initial_strong_ion_charge
        Net spectator-ion charge in the starting solution [mol/L] (e.g.
        ``-2 c`` for a dihydrochloride salt of a dibasic compound).
    temperature
        [K].
    activity
        ``"ideal"`` or ``"davies"``.
    labels, site_names
        Optional display names for the result's table.

    Returns
    -------
    TitrationResult

    References
    ----------
    Harris, Quantitative Chemical Analysis; Butler 1998 (module references).
    """
    if titrant not in TITRANT_KINDS:
        raise InputError("unknown titrant kind", Location(key="titrant"), titrant, ", ".join(TITRANT_KINDS))
    n = np.atleast_1d(np.asarray(amounts, dtype=float))
    if n.size != len(species):
        raise InputError("one amount per molecule is needed", Location(key="amounts"), n.size,
                         f"{len(species)} values")
    for s, a in zip(species, n):
        if not np.isfinite(a) or a < 0:
            raise InputError("amount must be a non-negative finite number", Location(key=s.name), a, ">= 0 [mol]")
    for key, value in (("volume", initial_volume), ("titrant_concentration", titrant_concentration)):
        if not np.isfinite(value) or value <= 0:
            raise InputError(f"{key.replace('_', ' ')} must be positive", Location(key=key), value, "> 0")
    v = np.atleast_1d(np.asarray(titrant_volumes, dtype=float))
    if v.ndim != 1 or v.size == 0 or not np.all(np.isfinite(v)) or np.any(v < 0) or np.any(np.diff(v) < 0):
        raise InputError("titrant volumes must be non-negative and ascending", Location(key="titrant_volumes"),
                         v.tolist()[:5], "ascending values >= 0 [L]")
    if not np.isfinite(initial_strong_ion_charge):
        raise InputError("initial strong-ion charge is not finite", Location(key="strong_ion_charge"),
                         initial_strong_ion_charge, "a finite number [mol/L]")
    sign = TITRANT_KINDS[titrant]
    total = initial_volume + v
    q_amount = initial_strong_ion_charge * initial_volume + sign * titrant_concentration * v  # [mol]
    # spectator ionic strength: starting ions taken as monovalent; titrant ions monovalent
    spectator = 0.5 * (abs(initial_strong_ion_charge) * initial_volume + titrant_concentration * v) / total
    ph = np.empty(v.size)
    strength = np.empty(v.size)
    iterations, worst = 0, 0.0
    guess = None
    for i in range(v.size):
        res = solve_ph(species, n / total[i], q_amount[i] / total[i], temperature, activity,
                       spectator[i], initial_ph=guess)
        ph[i], strength[i], guess = res.ph, res.ionic_strength, res.ph
        iterations += res.iterations
        worst = max(worst, res.relative_residual)
    populations, site_fracs = [], []
    for s in species:
        if s.n_sites == 0:
            populations.append(np.ones((v.size, 1)))
            site_fracs.append(np.zeros((v.size, 0)))
            continue
        if activity == "ideal":
            pop = ms.microstate_populations(s.pka, s.interaction, ph)
        else:
            # concentration shares carry -log10 gamma(z(s)) in their log-weights
            # (same rule as the charge balance, see speciakin.chemistry.equilibrium)
            z = ms.microstate_charges(s.charge_protonated, s.charge_deprotonated, s.fixed_charge)
            lw = ms.microstate_log_weights(s.pka, s.interaction, ph) \
                - water.davies_log10_gamma(z[None, :], strength[:, None], temperature)
            w = np.exp(ms.LN10 * (lw - lw.max(axis=-1, keepdims=True)))
            pop = w / w.sum(axis=-1, keepdims=True)
        populations.append(pop)
        site_fracs.append(pop @ ms.microstate_bits(s.n_sites).astype(float))
    notes = []
    return TitrationResult(
        titrant=titrant, titrant_concentration=float(titrant_concentration),
        initial_volume=float(initial_volume), titrant_volume=v, ph=ph, ionic_strength=strength,
        molecules=[s.name for s in species],
        labels=list(labels) if labels is not None else [None] * len(species),
        site_names=list(site_names) if site_names is not None else [None] * len(species),
        populations=populations, site_protonated=site_fracs, iterations=iterations,
        max_relative_residual=worst, notes=notes)
