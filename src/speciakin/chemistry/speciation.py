"""Molecule-level speciation: populations, site fractions, mean charge and
macroscopic pKa of a :class:`~speciakin.chemistry.model.Molecule` over pH.

A thin wrapper of :mod:`speciakin.chemistry.microstates` (the science) and
:func:`speciakin.chemistry.water.vant_hoff_pka` (temperature).

References
----------
.. [1] Borkovec, M.; Koper, G. J. M. J. Phys. Chem. 1992, 96, 6038 (site-binding model).
.. [2] Ullmann, G. M. J. Phys. Chem. B 2003, 107, 1263 (macroscopic constants).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from speciakin.chemistry import microstates as ms
from speciakin.chemistry.model import SITE_KINDS, Molecule
from speciakin.chemistry.water import vant_hoff_pka
from speciakin.errors import InputError, Location

__all__ = ["molecule_site_arrays", "SpeciationResult", "speciate"]


def molecule_site_arrays(molecule: Molecule, temperature: float | None = None,
                         reference_temperature: float = 298.15):
    """Arrays of a molecule's sites.

    Parameters
    ----------
    molecule
        The molecule.
    temperature
        [K]; when given, each pKa is moved by van 't Hoff with the site's
        ionization enthalpy; None = pKa at the reference temperature.
    reference_temperature
        [K] at which the pKa values hold.

    Returns
    -------
    (pka, interaction, charge_protonated, charge_deprotonated)
        Shapes ``(n,)``, ``(n, n)``, ``(n,)``, ``(n,)``.

    Raises
    ------
    InputError
        Unknown site kind, duplicate site names, an interaction naming an
        unknown site or a site with itself.
    """
    names = [s.name for s in molecule.sites]
    where = f"molecule.{molecule.name}"
    seen = set()
    for s in molecule.sites:
        if s.name in seen:
            raise InputError("duplicate site name", Location(key=f"{where}.site"), s.name,
                             "unique site names within a molecule")
        seen.add(s.name)
        if s.kind not in SITE_KINDS:
            raise InputError("unknown site kind", Location(key=f"{where}.site.{s.name}.kind"), s.kind,
                             ", ".join(SITE_KINDS))
    n = len(names)
    pka = np.array([float(s.pka.value) for s in molecule.sites], dtype=float)
    if temperature is not None and n:
        dh = np.array([float(s.enthalpy.value) for s in molecule.sites], dtype=float)
        pka = np.asarray(vant_hoff_pka(pka, dh, temperature, reference_temperature), dtype=float)
    w = np.zeros((n, n))
    for inter in molecule.interactions:
        for site in (inter.site_a, inter.site_b):
            if site not in seen:
                raise InputError("interaction names an unknown site",
                                 Location(key=f"{where}.interaction"), site, ", ".join(names))
        if inter.site_a == inter.site_b:
            raise InputError("interaction of a site with itself", Location(key=f"{where}.interaction"),
                             inter.site_a, "two different sites")
        i, j = molecule.site_index(inter.site_a), molecule.site_index(inter.site_b)
        w[i, j] = w[j, i] = float(inter.w.value)
    zp = np.array([SITE_KINDS[s.kind].charge_protonated for s in molecule.sites], dtype=float)
    zd = np.array([SITE_KINDS[s.kind].charge_deprotonated for s in molecule.sites], dtype=float)
    return pka, w, zp, zd


#: Fields of :class:`SpeciationResult` that its dictionary writes under another key (with the unit).
_KEYS_WITH_UNIT = {"temperature": "temperature_K", "reference_temperature": "reference_temperature_K"}


@dataclass
class SpeciationResult:
    """Speciation of one molecule over a pH grid.

    Attributes
    ----------
    molecule
        Molecule name.
    ph
        pH grid, shape ``(p,)`` [-].
    site_names, site_kinds
        One per site.
    site_pka
        Site pKa at ``temperature`` [-].
    interaction
        W matrix [pK units].
    labels
        Microstate labels in index order (bit i of the index = site i protonated).
    populations
        Microstate fractions, shape ``(p, 2**n)`` [-].
    site_protonated
        Fraction of each site protonated, shape ``(p, n)`` [-].
    site_reactive
        Fraction of each site deprotonated (free base / anion), shape ``(p, n)`` [-].
    mean_charge
        Mean charge, shape ``(p,)`` [e].
    macroscopic_pka
        Macroscopic pKa values, ascending, shape ``(n,)`` [-].
    temperature
        [K] or None (pKa values at the reference temperature).
    """

    molecule: str
    ph: np.ndarray
    site_names: list[str]
    site_kinds: list[str]
    site_pka: np.ndarray
    interaction: np.ndarray
    labels: list[str]
    populations: np.ndarray
    site_protonated: np.ndarray
    site_reactive: np.ndarray
    mean_charge: np.ndarray
    macroscopic_pka: np.ndarray
    temperature: float | None = None
    reference_temperature: float = 298.15
    notes: list[str] = field(default_factory=list)

    def to_frame(self):
        """pandas DataFrame: one row per pH; columns pH, mean charge, each
        microstate fraction (``x[label]``), each site's protonated fraction
        (``protonated[site]``)."""
        import pandas as pd

        data = {"pH": self.ph, "mean charge": self.mean_charge}
        for k, label in enumerate(self.labels):
            data[f"x[{label}]"] = self.populations[:, k]
        for i, name in enumerate(self.site_names):
            data[f"protonated[{name}]"] = self.site_protonated[:, i]
        return pd.DataFrame(data)

    def to_dict(self) -> dict:
        """JSON-ready dictionary: every field, arrays and sequences as lists,
        the temperatures under keys with their unit (:data:`_KEYS_WITH_UNIT`)."""
        out = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                value = value.tolist()
            elif isinstance(value, (list, tuple)):
                value = list(value)
            out[_KEYS_WITH_UNIT.get(f.name, f.name)] = value
        return out

    @classmethod
    def from_dict(cls, data) -> "SpeciationResult":
        """Rebuild from :meth:`to_dict` output (round trip)."""
        n = len(data["site_names"])
        return cls(
            molecule=str(data["molecule"]), ph=np.asarray(data["ph"], dtype=float),
            site_names=list(data["site_names"]), site_kinds=list(data["site_kinds"]),
            site_pka=np.asarray(data["site_pka"], dtype=float),
            interaction=np.asarray(data["interaction"], dtype=float).reshape(n, n),
            labels=list(data["labels"]), populations=np.asarray(data["populations"], dtype=float),
            site_protonated=np.asarray(data["site_protonated"], dtype=float),
            site_reactive=np.asarray(data["site_reactive"], dtype=float),
            mean_charge=np.asarray(data["mean_charge"], dtype=float),
            macroscopic_pka=np.asarray(data["macroscopic_pka"], dtype=float),
            temperature=None if data["temperature_K"] is None else float(data["temperature_K"]),
            reference_temperature=float(data["reference_temperature_K"]), notes=list(data["notes"]))

    def report(self) -> str:
        t = "reference" if self.temperature is None else f"{self.temperature:.2f} K"
        lines = [f"Speciation of {self.molecule}", "=" * (15 + len(self.molecule)),
                 f"temperature         {t}", f"pH grid             {self.ph[0]:g} to {self.ph[-1]:g} "
                 f"({self.ph.size} points)", "", "Sites", "-----"]
        for name, kind, p in zip(self.site_names, self.site_kinds, self.site_pka):
            lines.append(f"{name:<12}{kind:<6}pKa {p:.3f}")
        lines += ["", "Macroscopic pKa", "---------------"]
        lines += [f"pKa{j + 1:<17}{v:.3f}" for j, v in enumerate(self.macroscopic_pka)]
        lines += ["", "Largest share of each microstate", "--------------------------------"]
        for k, label in enumerate(self.labels):
            j = int(np.argmax(self.populations[:, k]))
            lines.append(f"{label:<30}{self.populations[j, k]:.4f} at pH {self.ph[j]:.2f}")
        return "\n".join(lines + ([""] + self.notes if self.notes else []))


def speciate(molecule: Molecule, ph, temperature: float | None = None,
             reference_temperature: float = 298.15) -> SpeciationResult:
    """Speciate a molecule over a pH grid.

    Parameters
    ----------
    molecule
        The molecule (1 to 12 sites).
    ph
        pH values [-], 1-D.
    temperature
        [K]; None = pKa values as given (reference temperature).
    reference_temperature
        [K] of the given pKa values.

    Returns
    -------
    SpeciationResult

    References
    ----------
    Borkovec and Koper 1992; Ullmann 2003 (module references).
    """
    if not molecule.sites:
        raise InputError("molecule has no ionizable site", Location(key=f"molecule.{molecule.name}"),
                         molecule.name, "at least one site")
    x = np.atleast_1d(np.asarray(ph, dtype=float))
    if x.ndim != 1:
        raise InputError("pH grid must be one-dimensional", Location(key="ph"), x.shape, "a list of pH values")
    pka, w, zp, zd = molecule_site_arrays(molecule, temperature, reference_temperature)
    names = [s.name for s in molecule.sites]
    kinds = [s.kind for s in molecule.sites]
    protonated = ms.site_protonated_fraction(pka, w, x)
    reactive = np.stack([ms.site_reactive_fraction(pka, w, x, i) for i in range(pka.size)], axis=-1)
    return SpeciationResult(
        molecule=molecule.name, ph=x, site_names=names, site_kinds=kinds, site_pka=pka,
        interaction=w, labels=ms.microstate_labels(names, kinds),
        populations=ms.microstate_populations(pka, w, x), site_protonated=protonated,
        site_reactive=reactive, mean_charge=ms.mean_charge(pka, w, zp, zd, x, molecule.fixed_charge),
        macroscopic_pka=ms.macroscopic_pkas(pka, w), temperature=temperature,
        reference_temperature=reference_temperature)
