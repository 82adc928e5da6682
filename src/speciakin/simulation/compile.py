"""Model and runs -> flat arrays for the compiled kernel.

:func:`compile_model` validates a :class:`~speciakin.chemistry.model.Model`
and lays it out as integer and float arrays (sites, microstates, steps,
reactants with their site requirements as bit masks).  :func:`compile_runs`
does the same for a list of runs (pH mode, temperature profile, dosing
segments, instant events, break points, output times), padded to common
shapes so that one compiled call can simulate any (parameter set, run) pair.

The parameter vector ``q`` has the order of ``Model.quantities()``: for each
molecule, for each site: pKa, enthalpy; then its interactions' W; then for
each step: log10 k, activation energy; then the medium's pKw, when the model
sets one (the last entry of the model tuple is its index, -1 for water).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from speciakin.chemistry.model import (
    PH_MODES,
    PSEUDO_REACTANTS,
    SITE_KINDS,
    SITE_STATES,
    START_ADJUSTMENTS,
    Model,
    Run,
)
from speciakin.errors import InputError, Location, ModelFileError, ProblemCollector

__all__ = ["CompiledModel", "CompiledRuns", "compile_model", "compile_runs", "MAX_SITES"]

#: Largest number of sites per molecule (2**12 microstates).
MAX_SITES = 12
_REACTANT_KIND = {"species": 0, "water": 1, "hydroxide": 2}
_MODE_CODE = {mode: i for i, mode in enumerate(PH_MODES)}  # held 0, logged 1, free 2
#: Start adjustment codes of the kernel (``integrator_kernel.adjust_start``).
START_CODES = {"computed": 0, "given": 1, "titrant": 2}


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


def _finite(value) -> bool:
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
    if not (_finite(model.reference_temperature) and model.reference_temperature > 0):
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
        if not _finite(quantity.value):
            c.error("value is not a finite number", Location(file=src, key=key), quantity.value, "a finite number")
        names.append(_default_name(quantity.name, fallback))
        nominal.append(float(quantity.value) if _finite(quantity.value) else 0.0)
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
            if not (_finite(r.coefficient) and r.coefficient > 0):
                c.error("reactant coefficient must be positive", Location(file=src, key=rkey + ".coefficient"),
                        r.coefficient, "> 0")
            react_kind.append(kind)
            react_species.append(max(sp, 0))
            react_coef.append(float(r.coefficient) if _finite(r.coefficient) else 0.0)
            react_mask.append(mask)
            react_value.append(value)
        react_start.append(len(react_kind))
        for pname, coef in st.products:
            pkey = f"{key}.product.{pname}"
            if pname not in species:
                c.error("step forms an unknown product", Location(file=src, key=pkey), pname,
                        "a molecule or ion of the model")
            if not (_finite(coef) and coef > 0):
                c.error("product stoichiometry must be positive", Location(file=src, key=pkey), coef, "> 0")
            prod_species.append(species.index(pname) if pname in species else 0)
            prod_coef.append(float(coef) if _finite(coef) else 0.0)
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
    arrays = (
        int(len(mol_names)), int(len(species)), f8(species_charge), i8(mol_site_start), i8(mol_micro_start),
        i8(site_pka_q), i8(site_dh_q), i8(inter_a), i8(inter_b), i8(inter_q), i8(mol_inter_start),
        f8(micro_charge), f8(micro_protons), i8(step_logk_q), i8(step_ea_q), i8(react_start), i8(react_kind),
        i8(react_species), f8(react_coef), i8(react_mask), i8(react_value), i8(prod_start), i8(prod_species),
        f8(prod_coef), float(model.reference_temperature), f8(substrate_mask), int(medium_q),
    )
    outputs = [f"amount:{s}" for s in species] + ["volume", "pH", "titrant", "temperature", "opposite_titrant"]
    return CompiledModel(model, species, len(mol_names), len(species), names, f8(nominal), outputs,
                         micro_names, i8(micro_mol), moiety_names, moiety_matrix, arrays)


def _ion_charge(compiled: CompiledModel, name: str | None) -> float | None:
    """Charge of ion ``name`` of the model (None when it is not an ion)."""
    ions = compiled.species_names[compiled.n_molecules:]
    if name not in ions:
        return None
    return float(compiled.arrays[2][compiled.species_index(name)])


def _titrant_problems(compiled: CompiledModel, ph, pkey: str, c: ProblemCollector) -> None:
    """Titrant, opposite titrant and start adjustment of a held or logged run."""
    src = compiled.model.source or None
    ions = compiled.species_names[compiled.n_molecules:]
    allowed = "one of " + (", ".join(ions) or "(the model has no ions)")
    signs = {}
    for key, name, conc in (("titrant", ph.titrant, ph.titrant_concentration),
                            ("opposite_titrant", ph.opposite_titrant, ph.opposite_titrant_concentration)):
        if name is None:
            if conc is not None:
                c.error(f"{key}_concentration given without {key}", Location(file=src, key=f"{pkey}.{key}"),
                        None, f"{key} = an ion name")
            continue
        charge = _ion_charge(compiled, name)
        if charge is None:
            c.error(f"the {key.replace('_', ' ')} ion is not declared in the model",
                    Location(file=src, key=f"{pkey}.{key}"), name, allowed)
        elif charge == 0:
            c.error(f"{key.replace('_', ' ')} ion has no charge", Location(file=src, key=f"{pkey}.{key}"), name,
                    "a charged ion")
        else:
            signs[key] = math.copysign(1.0, charge)
        if not (conc is not None and _finite(conc) and conc > 0):
            side = "acid" if charge is not None and charge < 0 else "base" if charge else "titrant"
            c.error(f"the {side} titrant '{name}' needs a positive concentration",
                    Location(file=src, key=f"{pkey}.{key}_concentration"), conc, "a concentration > 0 mol/L")
    if ph.opposite_titrant is not None and ph.titrant is None:
        c.error("an opposite titrant needs a titrant", Location(file=src, key=f"{pkey}.titrant"), None,
                "titrant = an ion name")
    if len(signs) == 2 and signs["titrant"] == signs["opposite_titrant"]:
        c.error("the opposite titrant must carry the opposite charge of the titrant",
                Location(file=src, key=f"{pkey}.opposite_titrant"), ph.opposite_titrant,
                "an ion whose charge has the other sign")
    if ph.start_adjustment not in START_ADJUSTMENTS:
        c.error("unknown start adjustment", Location(file=src, key=f"{pkey}.start_adjustment"),
                ph.start_adjustment, "one of " + ", ".join(START_ADJUSTMENTS))
    for key, name, sign in (("start_acid", ph.start_acid, -1.0), ("start_base", ph.start_base, 1.0)):
        if name is None:
            continue
        charge = _ion_charge(compiled, name)
        if charge is None or charge * sign <= 0:
            c.error(f"{key.replace('_', ' ')} must be an ion of the model with a "
                    f"{'negative' if sign < 0 else 'positive'} charge", Location(file=src, key=f"{pkey}.{key}"),
                    name, "one of " + (", ".join(i for i in ions if (_ion_charge(compiled, i) or 0) * sign > 0)
                                       or "(none in the model)"))


def _adjusting_ion(compiled: CompiledModel, ph, sign: float) -> int:
    """Index of the ion a computed start adjustment adds on side ``sign``
    (-1 acid, +1 base): the named one, else the titrant of that sign, else the
    model's only ion of that sign; -1 when there is none."""
    named = ph.start_acid if sign < 0 else ph.start_base
    if named is not None:
        return compiled.species_index(named)
    for name in (ph.titrant, ph.opposite_titrant):
        charge = _ion_charge(compiled, name)
        if charge is not None and charge * sign > 0:
            return compiled.species_index(name)
    ions = [i for i in compiled.species_names[compiled.n_molecules:] if (_ion_charge(compiled, i) or 0) * sign > 0]
    return compiled.species_index(ions[0]) if len(ions) == 1 else -1


def _run_problems(compiled: CompiledModel, run: Run, times: np.ndarray, c: ProblemCollector) -> None:
    src = compiled.model.source or None
    key = f"run.{run.name}"
    species = compiled.species_names
    if not (_finite(run.end_time) and run.end_time > 0):
        c.error("run end time must be positive", Location(file=src, key=key + ".end_time"), run.end_time, "> 0 s")
    if not (_finite(run.volume) and run.volume > 0):
        c.error("initial volume must be positive", Location(file=src, key=key + ".volume"), run.volume, "> 0 L")
    for name, amount in run.charges.items():
        if name not in species:
            c.error("charge names an unknown species", Location(file=src, key=f"{key}.charges.{name}"), name,
                    "one of " + ", ".join(species))
        if not (_finite(amount) and amount >= 0):
            c.error("initial amount must be a non-negative number",
                    Location(file=src, key=f"{key}.charges.{name}"), amount, ">= 0 mol")
    end = float(run.end_time) if _finite(run.end_time) else math.inf
    for i, d in enumerate(run.doses):
        dkey = f"{key}.doses[{i}]"
        if d.species not in species:
            c.error("dose names an unknown species", Location(file=src, key=dkey + ".species"), d.species,
                    "one of " + ", ".join(species))
        if not (_finite(d.amount) and d.amount >= 0):
            c.error("dosed amount must be non-negative", Location(file=src, key=dkey + ".amount"), d.amount, ">= 0 mol")
        if not (_finite(d.volume) and d.volume >= 0):
            c.error("dosed volume must be non-negative", Location(file=src, key=dkey + ".volume"), d.volume, ">= 0 L")
        if not (_finite(d.start) and _finite(d.end) and 0 <= d.start <= d.end <= end):
            c.error("dose lies outside the run", Location(file=src, key=dkey), f"{d.start} s to {d.end} s",
                    f"0 <= start <= end <= end time {run.end_time} s")
    for i, w in enumerate(run.withdrawals):
        wkey = f"{key}.withdrawals[{i}]"
        if not (_finite(w.time) and 0 <= w.time <= end):
            c.error("withdrawal lies outside the run", Location(file=src, key=wkey + ".time"), w.time,
                    f"0 to {run.end_time} s")
        if not (_finite(w.volume) and w.volume >= 0):
            c.error("withdrawn volume must be non-negative", Location(file=src, key=wkey + ".volume"), w.volume,
                    ">= 0 L")
    ph = run.ph
    pkey = f"{key}.ph"
    if ph.mode not in PH_MODES:
        c.error("unknown pH mode", Location(file=src, key=pkey + ".mode"), ph.mode, "one of " + ", ".join(PH_MODES))
    elif ph.mode == "held":
        if not (ph.setpoint is not None and _finite(ph.setpoint)):
            c.error("held pH needs a setpoint", Location(file=src, key=pkey + ".setpoint"), ph.setpoint, "a pH value")
        if ph.titrant is None:
            c.error("held pH needs a titrant ion of the model", Location(file=src, key=pkey + ".titrant"),
                    ph.titrant, "one of " + (", ".join(species[compiled.n_molecules:]) or "(the model has no ions)"))
    if ph.mode in ("held", "logged"):
        _titrant_problems(compiled, ph, pkey, c)
    if ph.mode == "logged":
        lt, lv = np.asarray(ph.log_times, float), np.asarray(ph.log_ph, float)
        if lt.size == 0 or lt.size != lv.size:
            c.error("logged pH needs equally many times and pH values", Location(file=src, key=pkey + ".log"),
                    f"{lt.size} times, {lv.size} values", "at least two points")
        elif not (np.all(np.isfinite(lt)) and np.all(np.isfinite(lv))):
            c.error("pH log contains a non-finite value", Location(file=src, key=pkey + ".log"))
        elif np.any(np.diff(lt) <= 0):
            c.error("pH log times must increase", Location(file=src, key=pkey + ".log_times"))
        elif lt[0] > 0 or lt[-1] < end:
            c.error("pH log does not cover the run", Location(file=src, key=pkey + ".log_times"),
                    f"{lt[0]} s to {lt[-1]} s", f"0 s to the end time {run.end_time} s")
    tp = run.temperature
    tt, tv = np.asarray(tp.times, float), np.asarray(tp.temperatures, float)
    if tt.size == 0 or tt.size != tv.size:
        c.error("temperature profile needs equally many times and temperatures",
                Location(file=src, key=key + ".temperature"), f"{tt.size} times, {tv.size} values", "at least one point")
    elif not (np.all(np.isfinite(tt)) and np.all(np.isfinite(tv)) and np.all(tv > 0)):
        c.error("temperature profile has a non-finite or non-positive value", Location(file=src, key=key + ".temperature"),
                list(tv), "temperatures > 0 K")
    elif np.any(np.diff(tt) <= 0):
        c.error("temperature profile times must increase", Location(file=src, key=key + ".temperature"))
    if not (_finite(run.ph_offset) and _finite(run.amount_factor) and run.amount_factor > 0):
        c.error("pH offset and amount factor must be finite (factor > 0)", Location(file=src, key=key),
                f"{run.ph_offset}, {run.amount_factor}")
    if times.size == 0 or not np.all(np.isfinite(times)) or np.any(np.diff(times) < 0) \
            or times[0] < 0 or times[-1] > end * (1 + 1e-12):
        c.error("output times must be finite, increasing and inside the run", Location(key=key + ".times"),
                f"{times[:1]}..{times[-1:]}" if times.size else "(none)", f"0 to {run.end_time} s")


def compile_runs(compiled: CompiledModel, runs: Sequence[Run],
                 output_times_per_run: Sequence[Sequence[float]]) -> CompiledRuns:
    """Lay out ``runs`` with their output times [s] for the kernel.

    Raises
    ------
    ModelFileError
        Listing every problem of every run (unknown species, negative amounts,
        dosing outside the run, pH log not covering the run, ...).
    """
    runs = tuple(runs)
    if len(output_times_per_run) != len(runs):
        raise InputError("need one list of output times per run", Location(key="times"),
                         len(output_times_per_run), f"{len(runs)} lists")
    times = [np.asarray(t, dtype=float).ravel() for t in output_times_per_run]
    c = ProblemCollector()
    names = [r.name for r in runs]
    for i, (run, t) in enumerate(zip(runs, times)):
        if names.count(run.name) > 1 and names.index(run.name) == i:
            c.error("duplicate run name", Location(key=f"run.{run.name}"), run.name, "unique names")
        _run_problems(compiled, run, t, c)
    c.raise_if_errors(ModelFileError)

    n_runs = len(runs)
    nsp = compiled.n_species
    n_state = nsp + 3
    sidx = {s: i for i, s in enumerate(compiled.species_names)}
    max_log = max([len(r.ph.log_times) for r in runs] + [1])
    max_temp = max([len(r.temperature.times) for r in runs] + [1])
    feeds = [[d for d in r.doses if d.end > d.start] for r in runs]
    events = []
    for r in runs:
        ev = [(d.start, 0, sidx[d.species], d.amount, d.volume) for d in r.doses if d.end == d.start]
        ev += [(w.time, 1, 0, 0.0, w.volume) for w in r.withdrawals]
        events.append(sorted(ev, key=lambda e: e[0]))
    bps = []
    for r, fl, ev in zip(runs, feeds, events):
        pts = {float(r.end_time)}
        pts.update(float(x) for d in fl for x in (d.start, d.end))
        pts.update(float(e[0]) for e in ev)
        pts.update(float(x) for x in r.temperature.times)
        if r.ph.mode == "logged":
            pts.update(float(x) for x in r.ph.log_times)
        bps.append(np.array(sorted(p for p in pts if 0 < p <= r.end_time)))
    max_feed = max([len(f) for f in feeds] + [1])
    max_ev = max([len(e) for e in events] + [1])
    max_bp = max([len(b) for b in bps] + [1])
    max_out = max([len(t) for t in times] + [1])

    mode = np.zeros(n_runs, np.int64)
    setpoint = np.zeros(n_runs)
    titrant = np.full(n_runs, -1, np.int64)
    titrant_conc = np.ones(n_runs)
    log_t = np.zeros((n_runs, max_log))
    log_v = np.zeros((n_runs, max_log))
    log_n = np.zeros(n_runs, np.int64)
    temp_t = np.zeros((n_runs, max_temp))
    temp_v = np.zeros((n_runs, max_temp))
    temp_n = np.zeros(n_runs, np.int64)
    y0 = np.zeros((n_runs, n_state))
    feed_t0 = np.zeros((n_runs, max_feed))
    feed_t1 = np.zeros((n_runs, max_feed))
    feed_species = np.zeros((n_runs, max_feed), np.int64)
    feed_amount = np.zeros((n_runs, max_feed))
    feed_volume = np.zeros((n_runs, max_feed))
    n_feed = np.zeros(n_runs, np.int64)
    ev_t = np.zeros((n_runs, max_ev))
    ev_kind = np.zeros((n_runs, max_ev), np.int64)
    ev_species = np.zeros((n_runs, max_ev), np.int64)
    ev_amount = np.zeros((n_runs, max_ev))
    ev_volume = np.zeros((n_runs, max_ev))
    n_ev = np.zeros(n_runs, np.int64)
    bp = np.zeros((n_runs, max_bp))
    n_bp = np.zeros(n_runs, np.int64)
    out_t = np.zeros((n_runs, max_out))
    n_out = np.zeros(n_runs, np.int64)
    scale = np.zeros((n_runs, n_state))
    second = np.full(n_runs, -1, np.int64)
    second_conc = np.ones(n_runs)
    controlled = np.zeros(n_runs, np.int64)
    start = np.zeros(n_runs, np.int64)
    acid = np.full(n_runs, -1, np.int64)
    base = np.full(n_runs, -1, np.int64)
    for i, r in enumerate(runs):
        mode[i] = _MODE_CODE[r.ph.mode]
        if r.ph.mode == "held":
            setpoint[i] = float(r.ph.setpoint)
        if r.ph.controlled:
            controlled[i] = 1
            titrant[i] = sidx[r.ph.titrant]
            titrant_conc[i] = float(r.ph.titrant_concentration)
            if r.ph.opposite_titrant is not None:
                second[i] = sidx[r.ph.opposite_titrant]
                second_conc[i] = float(r.ph.opposite_titrant_concentration)
            start[i] = START_CODES[r.ph.start_adjustment]
            acid[i] = _adjusting_ion(compiled, r.ph, -1.0)
            base[i] = _adjusting_ion(compiled, r.ph, 1.0)
        if r.ph.mode == "logged":
            log_n[i] = len(r.ph.log_times)
            log_t[i, :log_n[i]] = r.ph.log_times
            log_v[i, :log_n[i]] = r.ph.log_ph
        temp_n[i] = len(r.temperature.times)
        temp_t[i, :temp_n[i]] = r.temperature.times
        temp_v[i, :temp_n[i]] = r.temperature.temperatures
        for name, amount in r.charges.items():
            y0[i, sidx[name]] += float(amount)
        y0[i, nsp] = float(r.volume)
        n_feed[i] = len(feeds[i])
        for j, d in enumerate(feeds[i]):
            feed_t0[i, j], feed_t1[i, j] = d.start, d.end
            feed_species[i, j] = sidx[d.species]
            feed_amount[i, j], feed_volume[i, j] = d.amount, d.volume
        n_ev[i] = len(events[i])
        for j, e in enumerate(events[i]):
            ev_t[i, j], ev_kind[i, j], ev_species[i, j], ev_amount[i, j], ev_volume[i, j] = e
        n_bp[i] = len(bps[i])
        bp[i, :n_bp[i]] = bps[i]
        n_out[i] = len(times[i])
        out_t[i, :n_out[i]] = times[i]
        total = float(np.sum(y0[i, :nsp])) + sum(d.amount for d in r.doses)
        total_volume = float(r.volume) + sum(d.volume for d in r.doses)
        scale[i, :nsp] = max(total, 1e-12) * 1e-6
        scale[i, nsp] = total_volume * 1e-6
        scale[i, nsp + 1] = max(total, 1e-12) * 1e-6
        scale[i, nsp + 2] = max(total, 1e-12) * 1e-6
    arrays = (mode, setpoint, titrant, titrant_conc, log_t, log_v, log_n, temp_t, temp_v, temp_n, y0,
              feed_t0, feed_t1, feed_species, feed_amount, feed_volume, n_feed, ev_t, ev_kind, ev_species,
              ev_amount, ev_volume, n_ev, bp, n_bp, out_t, n_out, scale, second, second_conc, controlled, start,
              acid, base)
    return CompiledRuns(runs, names, times, max_out, np.array([float(r.ph_offset) for r in runs]),
                        np.array([float(r.amount_factor) for r in runs]), arrays)
