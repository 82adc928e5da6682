"""Result of simulating one run."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SimulationResult"]


@dataclass
class SimulationResult:
    """Time course of one run.

    Attributes
    ----------
    run_name
        Name of the run.
    times
        Output times (n_t,) [s].
    species_names
        Molecules then strong ions (columns of ``amounts``).
    molecule_names
        The molecules (first ``len(molecule_names)`` columns).
    amounts
        (n_t, n_species) [mol].
    concentrations
        (n_t, n_species) [mol/L].
    volume
        (n_t,) [L].
    ph
        (n_t,) true pH (setpoint or log plus the run's pH offset, or the charge-balance pH).
    titrant
        (n_t,) titrant consumed since t = 0 [mol] (zero unless the run is
        controlled: held pH, or logged pH with a titrant).
    initial_titrant
        Titrant that brought the start mixture to the pH of t = 0 [mol]
        (start adjustment ``titrant``; already in the ion amounts and volume
        at t = 0); None unless the run is controlled.
    opposite_titrant
        (n_t,) opposite titrant consumed since t = 0 [mol] (two-sided pH-stat;
        zero otherwise).
    initial_opposite_titrant
        Opposite titrant added at t = 0 [mol]; None unless controlled.
    start_adjustment
        Acid or base added inside the start volume before t = 0 (start
        adjustment ``computed``) [equivalents of base, mol; negative = acid];
        None unless controlled.
    temperature
        (n_t,) [K].
    ph_mode
        ``held``, ``logged`` or ``free``.
    microstate_names, microstate_amounts
        ``molecule[protonated sites]`` and (n_t, n_microstates) [mol]; None unless asked for.
    moiety_names, moiety_matrix
        Conserved moieties and their count per molecule.
    steps
        Accepted integration steps.
    """

    run_name: str
    times: np.ndarray
    species_names: list[str]
    molecule_names: list[str]
    amounts: np.ndarray
    concentrations: np.ndarray
    volume: np.ndarray
    ph: np.ndarray
    titrant: np.ndarray
    initial_titrant: float | None
    temperature: np.ndarray
    ph_mode: str
    microstate_names: list[str] | None
    microstate_amounts: np.ndarray | None
    moiety_names: list[str]
    moiety_matrix: np.ndarray
    steps: int
    opposite_titrant: np.ndarray | None = None
    initial_opposite_titrant: float | None = None
    start_adjustment: float | None = None

    def amount(self, species: str) -> np.ndarray:
        """Amount of one species against time [mol]."""
        return self.amounts[:, self.species_names.index(species)]

    def concentration(self, species: str) -> np.ndarray:
        """Concentration of one species against time [mol/L]."""
        return self.concentrations[:, self.species_names.index(species)]

    def moiety_amount(self, moiety: str) -> np.ndarray:
        """Total amount of a moiety over all molecules [mol] (n_t,)."""
        k = self.moiety_names.index(moiety)
        n_mol = len(self.molecule_names)
        return self.amounts[:, :n_mol] @ self.moiety_matrix[:, k]

    def moiety_fraction(self, moiety: str) -> np.ndarray:
        """Fraction of a moiety carried by each molecule (n_t, n_molecules) [-].

        E.g. the fraction of the substrate's ``core`` in each molecule: the
        yield of a product is its column.
        """
        k = self.moiety_names.index(moiety)
        n_mol = len(self.molecule_names)
        per = self.amounts[:, :n_mol] * self.moiety_matrix[:, k]
        total = per.sum(axis=1, keepdims=True)
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(total > 0, per / np.where(total > 0, total, 1.0), np.nan)

    def yield_of(self, product: str, moiety: str = "core") -> np.ndarray:
        """Fraction of the moiety that sits in ``product`` [-] (n_t,)."""
        return self.moiety_fraction(moiety)[:, self.molecule_names.index(product)]

    def conversion(self, substrate: str, moiety: str = "core") -> np.ndarray:
        """1 - fraction of the moiety still in ``substrate`` [-] (n_t,)."""
        return 1.0 - self.yield_of(substrate, moiety)

    def selectivity(self, product: str, other: str) -> np.ndarray:
        """Amount ratio product / other [-] (n_t,); NaN where ``other`` is zero."""
        a, b = self.amount(product), self.amount(other)
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(b != 0, a / np.where(b != 0, b, 1.0), np.nan)

    def to_frame(self):
        """pandas DataFrame with units in the column names, time in [min]."""
        import pandas as pd

        cols = {"run": [self.run_name] * len(self.times), "time [min]": self.times / 60.0}
        for j, name in enumerate(self.species_names):
            cols[f"{name} [mol/L]"] = self.concentrations[:, j]
        for j, name in enumerate(self.species_names):
            cols[f"{name} [mol]"] = self.amounts[:, j]
        cols["volume [L]"] = self.volume
        cols["pH"] = self.ph
        cols["titrant [mol]"] = self.titrant
        if self.opposite_titrant is not None and np.any(self.opposite_titrant != 0):
            cols["opposite titrant [mol]"] = self.opposite_titrant
        cols["temperature [K]"] = self.temperature
        if self.microstate_amounts is not None:
            for j, name in enumerate(self.microstate_names):
                cols[f"{name} [mol]"] = self.microstate_amounts[:, j]
        return pd.DataFrame(cols)

    def report(self) -> str:
        """Plain-text summary with stable headings."""
        lines = [f"Simulation of run {self.run_name}", "", "Conditions",
                 f"  pH mode: {self.ph_mode}",
                 f"  pH: {np.nanmin(self.ph):.3f} to {np.nanmax(self.ph):.3f}",
                 f"  temperature: {self.temperature.min() - 273.15:.2f} to {self.temperature.max() - 273.15:.2f} C",
                 f"  time: {self.times[0] / 60:.2f} to {self.times[-1] / 60:.2f} min ({len(self.times)} outputs,"
                 f" {self.steps} integration steps)", "", "Final amounts"]
        for j, name in enumerate(self.species_names):
            lines.append(f"  {name}: {self.amounts[-1, j]:.6g} mol ({self.concentrations[-1, j]:.6g} mol/L)")
        lines += ["", "Titrant", f"  consumed: {self.titrant[-1]:.6g} mol"]
        used_opposite = self.opposite_titrant is not None and np.any(self.opposite_titrant != 0)
        side = "base" if (self.start_adjustment or 0.0) > 0 else "acid"
        optional = (("opposite titrant consumed", self.opposite_titrant[-1] if used_opposite else None),
                    ("titrant to reach the pH at the start", self.initial_titrant),
                    ("opposite titrant to reach the pH at the start", self.initial_opposite_titrant or None),
                    (f"{side} inside the start volume", abs(self.start_adjustment) if self.start_adjustment else None))
        lines += [f"  {label}: {value:.6g} mol" for label, value in optional if value is not None]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        """JSON-ready dictionary."""
        return {
            "run_name": self.run_name,
            "times_s": self.times.tolist(),
            "species_names": list(self.species_names),
            "molecule_names": list(self.molecule_names),
            "amounts_mol": self.amounts.tolist(),
            "concentrations_mol_per_L": self.concentrations.tolist(),
            "volume_L": self.volume.tolist(),
            "ph": self.ph.tolist(),
            "titrant_mol": self.titrant.tolist(),
            "initial_titrant_mol": self.initial_titrant,
            "opposite_titrant_mol": None if self.opposite_titrant is None else self.opposite_titrant.tolist(),
            "initial_opposite_titrant_mol": self.initial_opposite_titrant,
            "start_adjustment_equivalents_mol": self.start_adjustment,
            "temperature_K": self.temperature.tolist(),
            "ph_mode": self.ph_mode,
            "microstate_names": self.microstate_names,
            "microstate_amounts_mol": None if self.microstate_amounts is None else self.microstate_amounts.tolist(),
            "moiety_names": list(self.moiety_names),
            "moiety_matrix": self.moiety_matrix.tolist(),
            "steps": int(self.steps),
        }
