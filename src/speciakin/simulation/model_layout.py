"""Model -> flat arrays for the compiled kernel (:func:`compile_model`).

Validates a :class:`~speciakin.chemistry.model.Model` and lays it out as
integer and float arrays (sites, microstates, steps, reactants with their site
requirements as bit masks) in a ``layout.KernelModel``; also the two
containers :class:`CompiledModel` and :class:`CompiledRuns`.  The order of
the parameter vector q is described in ``compile``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from speciakin.chemistry.model import PSEUDO_REACTANTS, SITE_KINDS, SITE_STATES, Model, Run
from speciakin.errors import Location, ModelFileError, ProblemCollector
from speciakin.simulation.layout import KernelModel

__all__ = ["CompiledModel", "CompiledRuns", "compile_model", "finite_value", "MAX_SITES"]

#: Largest number of sites per molecule (2**12 microstates).
MAX_SITES = 12
_REACTANT_KIND = {"species": 0, "water": 1, "hydroxide": 2}


@dataclass
class CompiledModel:
    """A model laid out for the kernel.

    Attributes
    ----------
    model
        The source model.
    species_names
        Molecules then ions: the order of amount columns in every output.
    n_molecules, n_species
        Counts.
    quantity_names
        Names of the entries of the parameter vector q (order of ``Model.quantities()``).
    nominal
        q0, the nominal values [internal units; rate constants as log10].
    output_names
        Names of the output columns: ``amount:<species>`` [mol], ``volume`` [L],
        ``pH``, ``titrant`` [mol], ``temperature`` [K], ``opposite_titrant`` [mol].
    microstate_names
        ``molecule[protonated sites]`` for every microstate, in kernel order.
    microstate_molecule
        Index of the molecule of each microstate.
    moiety_names, moiety_matrix
        Conserved moieties and their count per molecule (n_molecules, n_moieties).
    arrays
        The tuple handed to the kernel (see docs/simulation.md).
    """

    model: Model
    species_names: list[str]
    n_molecules: int
    n_species: int
    quantity_names: list[str]
    nominal: np.ndarray
    output_names: list[str]
    microstate_names: list[str]
    microstate_molecule: np.ndarray
    moiety_names: list[str]
    moiety_matrix: np.ndarray
    arrays: tuple = field(repr=False)

    @property
    def n_outputs(self) -> int:
        return self.n_species + 5

    def species_index(self, name: str) -> int:
        return self.species_names.index(name)


@dataclass
class CompiledRuns:
    """Runs laid out for the kernel (padded arrays).

    Attributes
    ----------
    runs
        The source runs.
    names
        Run names.
    output_times
        Output times of each run [s].
    n_times_max
        Longest output-time list (the third axis of batch outputs).
    ph_offset, amount_factor
        Each run's own nuisance values (n_runs,), used when a batch gives none.
    arrays
        The tuple handed to the kernel (see docs/simulation.md).
    """

    runs: tuple[Run, ...]
    names: list[str]
    output_times: list[np.ndarray]
    n_times_max: int
    ph_offset: np.ndarray
    amount_factor: np.ndarray
    arrays: tuple = field(repr=False)


def _default_name(q_name: str, fallback: str) -> str:
    return q_name or fallback


def finite_value(value) -> bool:
    """True when ``value`` converts to a finite float."""
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def compile_model(model: Model) -> CompiledModel:
    """Validate ``model`` and lay it out as flat arrays.

    Raises
    ------
    ModelFileError
        Listing every problem found (unknown species or site in a step,
        unknown site kind, too many sites, non-finite numbers, duplicate names).
    """
    c = ProblemCollector()
    src = model.source or None
    mol_names = [m.name for m in model.molecules]
    ion_names = [i.name for i in model.ions]
    species = mol_names + ion_names
    seen: set[str] = set()
    for name in species:
        if name in seen:
            c.error("duplicate species name", Location(file=src, key=name), name, "unique names")
        seen.add(name)
    if not model.molecules:
        c.error("the model has no molecules", Location(file=src, key="molecules"))
    if not (finite_value(model.reference_temperature) and model.reference_temperature > 0):
        c.error("reference temperature must be a positive number of kelvin",
                Location(file=src, key="reference_temperature"), model.reference_temperature, "> 0 K")

    site_zp, site_zd, site_pka_q, site_dh_q = [], [], [], []
    mol_site_start, mol_micro_start, mol_inter_start = [0], [0], [0]
    inter_a, inter_b, inter_q = [], [], []
    micro_charge, micro_protons, micro_names, micro_mol = [], [], [], []
    names: list[str] = []
    nominal: list[float] = []
    shared: dict[int, tuple[str, str]] = {}     # index -> (target name, key) of quantities declared same_as

    def add_quantity(quantity, fallback, key):
        if getattr(quantity, "same_as", None) is not None:
            shared[len(names)] = (quantity.same_as, key)
        if not finite_value(quantity.value):
            c.error("value is not a finite number", Location(file=src, key=key), quantity.value, "a finite number")
        names.append(_default_name(quantity.name, fallback))
        nominal.append(float(quantity.value) if finite_value(quantity.value) else 0.0)
        return len(names) - 1

    for mi, m in enumerate(model.molecules):
        if len(m.sites) > MAX_SITES:
            c.error(f"molecule has {len(m.sites)} sites", Location(file=src, key=f"molecule.{m.name}.sites"),
                    len(m.sites), f"at most {MAX_SITES}")
        site_names = [s.name for s in m.sites]
        for s in m.sites:
            key = f"molecule.{m.name}.site.{s.name}"
            kind = SITE_KINDS.get(s.kind)
            if kind is None:
                c.error("unknown site kind", Location(file=src, key=key + ".kind"), s.kind,
                        "one of " + ", ".join(SITE_KINDS))
                zp, zd = 0, 0
            else:
                zp, zd = kind.charge_protonated, kind.charge_deprotonated
            site_zp.append(zp)
            site_zd.append(zd)
            site_pka_q.append(add_quantity(s.pka, f"pKa.{m.name}.{s.name}", key + ".pka"))
            site_dh_q.append(add_quantity(s.enthalpy, f"enthalpy.{m.name}.{s.name}", key + ".enthalpy"))
        for it in m.interactions:
            key = f"molecule.{m.name}.interaction.{it.site_a}.{it.site_b}"
            ok = True
            for sn in (it.site_a, it.site_b):
                if sn not in site_names:
                    c.error("interaction names an unknown site", Location(file=src, key=key), sn,
                            "one of " + (", ".join(site_names) or "(no sites)"))
                    ok = False
            if ok and it.site_a == it.site_b:
                c.error("interaction joins a site with itself", Location(file=src, key=key), it.site_a,
                        "two different sites")
            inter_a.append(site_names.index(it.site_a) if ok else 0)
            inter_b.append(site_names.index(it.site_b) if ok else 0)
            inter_q.append(add_quantity(it.w, f"W.{m.name}.{it.site_a}.{it.site_b}", key + ".w"))
        n = len(m.sites)
        mol_site_start.append(mol_site_start[-1] + n)
        mol_inter_start.append(len(inter_a))
        base = mol_site_start[mi]
        if n <= MAX_SITES:
            for s_idx in range(1 << n):
                z = float(m.fixed_charge)
                protons = 0
                on = []
                for i in range(n):
                    if (s_idx >> i) & 1:
                        z += site_zp[base + i]
                        protons += 1
                        on.append(site_names[i])
                    else:
                        z += site_zd[base + i]
                micro_charge.append(z)
                micro_protons.append(float(protons))
                micro_names.append(f"{m.name}[{','.join(on)}]")
                micro_mol.append(mi)
        mol_micro_start.append(len(micro_charge))

    step_logk_q, step_ea_q = [], []
    react_start, react_kind, react_species, react_coef, react_mask, react_value = [0], [], [], [], [], []
    prod_start, prod_species, prod_coef = [0], [], []
    for st in model.steps:
        key = f"step.{st.name}"
        if not st.reactants:
            c.error("step has no reactants", Location(file=src, key=key + ".reactants"))
        for r in st.reactants:
            rkey = f"{key}.reactant.{r.species}"
            mask = value = 0
            if r.species in PSEUDO_REACTANTS:
                kind, sp = _REACTANT_KIND[r.species], -1
                if r.requires:
                    c.error(f"'{r.species}' has no sites to require", Location(file=src, key=rkey), r.species)
            elif r.species in species:
                kind, sp = 0, species.index(r.species)
                if r.requires and sp >= len(mol_names):
                    c.error("an ion has no sites to require", Location(file=src, key=rkey), r.species)
                elif r.requires:
                    mol = model.molecules[sp]
                    snames = [s.name for s in mol.sites]
                    for req in r.requires:
                        if req.site not in snames:
                            c.error("step requires an unknown site", Location(file=src, key=rkey + ".requires"),
                                    req.site, f"a site of {mol.name}: " + (", ".join(snames) or "(none)"))
                            continue
                        if req.state not in SITE_STATES:
                            c.error("unknown site state", Location(file=src, key=rkey + ".requires"),
                                    req.state, "one of " + ", ".join(SITE_STATES))
                            continue
                        bit = 1 << snames.index(req.site)
                        if mask & bit and bool(value & bit) != (req.state == "protonated"):
                            c.error("contradictory requirements on one site",
                                    Location(file=src, key=rkey + ".requires"), req.site)
                        mask |= bit
                        if req.state == "protonated":
                            value |= bit
            else:
                kind, sp = 0, 0
                c.error("step names an unknown reactant", Location(file=src, key=rkey), r.species,
                        "a molecule, an ion, or one of " + ", ".join(PSEUDO_REACTANTS))
            if not (finite_value(r.coefficient) and r.coefficient > 0):
                c.error("reactant coefficient must be positive", Location(file=src, key=rkey + ".coefficient"),
                        r.coefficient, "> 0")
            react_kind.append(kind)
            react_species.append(max(sp, 0))
            react_coef.append(float(r.coefficient) if finite_value(r.coefficient) else 0.0)
            react_mask.append(mask)
            react_value.append(value)
        react_start.append(len(react_kind))
        for pname, coef in st.products:
            pkey = f"{key}.product.{pname}"
            if pname not in species:
                c.error("step forms an unknown product", Location(file=src, key=pkey), pname,
                        "a molecule or ion of the model")
            if not (finite_value(coef) and coef > 0):
                c.error("product stoichiometry must be positive", Location(file=src, key=pkey), coef, "> 0")
            prod_species.append(species.index(pname) if pname in species else 0)
            prod_coef.append(float(coef) if finite_value(coef) else 0.0)
        prod_start.append(len(prod_species))
        step_logk_q.append(add_quantity(st.log10_k, f"log10k.{st.name}", key + ".log10_k"))
        step_ea_q.append(add_quantity(st.activation_energy, f"Ea.{st.name}", key + ".activation_energy"))
    medium_q = -1
    if model.pkw is not None:
        medium_q = add_quantity(model.pkw, "pKw.medium", "medium.pkw")
    # shared quantities: the kernel reads the target's entry of q (fitted or not)
    target_of = {}
    for index, (target, key) in shared.items():
        if target not in names or shared.get(names.index(target)) is not None:
            c.error("shared quantity names no quantity with its own value", Location(file=src, key=key), target,
                    "the name of another quantity of the model")
        else:
            target_of[index] = names.index(target)
    for index_list in (site_pka_q, site_dh_q, inter_q, step_logk_q, step_ea_q):
        for k, index in enumerate(index_list):
            index_list[k] = target_of.get(index, index)
    for ion in model.ions:
        if not isinstance(ion.charge, (int, np.integer)):
            c.error("ion charge must be an integer", Location(file=src, key=f"ion.{ion.name}.charge"), ion.charge)
    c.raise_if_errors(ModelFileError)

    species_charge = [float(m.fixed_charge) for m in model.molecules] + [float(i.charge) for i in model.ions]
    substrate_mask = [1.0 if m.role == "substrate" else 0.0 for m in model.molecules] + [0.0] * len(ion_names)
    moiety_names = sorted({k for m in model.molecules for k in m.moieties})
    moiety_matrix = np.array([[float(m.moieties.get(k, 0.0)) for k in moiety_names] for m in model.molecules],
                             dtype=float).reshape(len(mol_names), len(moiety_names))
    i8 = lambda v: np.asarray(v, dtype=np.int64)  # noqa: E731
    f8 = lambda v: np.asarray(v, dtype=np.float64)  # noqa: E731
    arrays = KernelModel(
        int(len(mol_names)), int(len(species)), f8(species_charge), i8(mol_site_start), i8(mol_micro_start),
        i8(site_pka_q), i8(site_dh_q), i8(inter_a), i8(inter_b), i8(inter_q), i8(mol_inter_start),
        f8(micro_charge), f8(micro_protons), i8(step_logk_q), i8(step_ea_q), i8(react_start), i8(react_kind),
        i8(react_species), f8(react_coef), i8(react_mask), i8(react_value), i8(prod_start), i8(prod_species),
        f8(prod_coef), float(model.reference_temperature), f8(substrate_mask), int(medium_q),
    )
    outputs = [f"amount:{s}" for s in species] + ["volume", "pH", "titrant", "temperature", "opposite_titrant"]
    return CompiledModel(model, species, len(mol_names), len(species), names, f8(nominal), outputs,
                         micro_names, i8(micro_mol), moiety_names, moiety_matrix, arrays)
