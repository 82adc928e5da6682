"""Plain data describing a reaction model and a lab run.

These dataclasses are the contract between the model-file parser (this
layer), the simulator (``speciakin.simulation``), the campaign import
(``speciakin.data``) and the estimation layer.  They hold no behaviour beyond
look-ups; the science lives in pure functions elsewhere.

Internal units (everything is converted to these on the way in):

=====================  =========================================
amount                 [mol]
volume                 [L]
concentration          [mol/L]
time                   [s]
temperature            [K]
energy                 [kJ/mol]
pKa, W, pH             [-] (log10 units)
rate constant          stored as log10 of [1/s] (one reactant
                       concentration) or [L/(mol*s)] (two)
=====================  =========================================
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

__all__ = [
    "SITE_KINDS",
    "SiteKind",
    "SITE_STATES",
    "PSEUDO_REACTANTS",
    "Prior",
    "Quantity",
    "Site",
    "Interaction",
    "Molecule",
    "Ion",
    "Requirement",
    "Reactant",
    "Step",
    "Model",
    "Dose",
    "Withdrawal",
    "PhControl",
    "TemperatureProfile",
    "Run",
    "PH_MODES",
    "START_ADJUSTMENTS",
    "ACTIVITY_MODELS",
    "MODEL_ACTIVITY_MODELS",
    "MOLECULE_ROLES",
]


@dataclass(frozen=True)
class SiteKind:
    """Charges of one kind of ionizable site in its two states."""

    name: str
    charge_protonated: int
    charge_deprotonated: int
    description: str


#: Registry of site kinds.  Parsing, validation, the speciation engine and the
#: docs read this one table; add a kind here and nowhere else.
SITE_KINDS: Mapping[str, SiteKind] = MappingProxyType({
    "base": SiteKind("base", +1, 0, "basic group B + H+ <=> BH+ (amine, pyridine, ...)"),
    "acid": SiteKind("acid", 0, -1, "acidic group HA <=> A- + H+ (phenol, carboxylic acid, ...)"),
})

#: States a reaction step may require of a site.
SITE_STATES = ("deprotonated", "protonated")

#: Reactants that are not molecules of the model: ``water`` (rate law factor 1,
#: the solvent) and ``hydroxide`` (factor [OH-] = Kw / [H+] at the current pH).
PSEUDO_REACTANTS = ("water", "hydroxide")

#: pH modes of a run.
PH_MODES = ("held", "logged", "free")

#: How the start solution of a controlled run (held pH, or logged pH with a
#: titrant) reaches the pH of t = 0: name -> description (one registry for
#: the model file, the process file, the kernel and the docs).
START_ADJUSTMENTS: Mapping[str, str] = MappingProxyType({
    "computed": "acid or base added before t = 0 inside the start volume, amount from the charge "
                "balance at the pH of t = 0",
    "given": "the start amounts already hold the adjusting acid or base (written with the initial "
             "amounts); nothing is added",
    "titrant": "the titrant (or the opposite titrant) brings the start solution to the pH at t = 0; "
               "its volume is added",
})

#: Activity options: name -> description (one registry for parsing, solvers and docs).
#: The stand-alone speciation and titration tools (``chemistry.equilibrium``,
#: ``chemistry.titration``) apply both; a model (and so the kinetics kernel)
#: accepts only :data:`MODEL_ACTIVITY_MODELS`.
ACTIVITY_MODELS: Mapping[str, str] = MappingProxyType({
    "ideal": "activity coefficients equal to 1",
    "davies": "Davies (1962) equation, ionic strength iterated to self-consistency",
})

#: Activity options a model file may choose: those every path, the kinetics
#: kernel included, applies.
MODEL_ACTIVITY_MODELS = ("ideal",)

#: Roles a molecule may have (free-text tags checked by the model-file validator).
MOLECULE_ROLES = ("substrate", "reagent", "product", "byproduct", "acid", "buffer")


@dataclass(frozen=True)
class Prior:
    """A prior distribution for a fitted quantity.

    ``family`` is a key of the estimation layer's prior registry (for example
    ``"normal"``, ``"lognormal"``, ``"uniform"``, ``"halfnormal"``);
    ``parameters`` are that family's named parameters, on the fitted scale.
    """

    family: str
    parameters: Mapping[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class Quantity:
    """A number of the model that the estimation layer may fit.

    Attributes
    ----------
    value
        Nominal value in internal units (for rate constants: log10 of k).
    unit
        Unit text of ``value`` for reports, e.g. ``"log10(L/(mol*s))"``.
    name
        Unique parameter name, e.g. ``"pKa[S.N_alkyl]"`` or ``"log10k[acylation_N1]"``
        (the model file's naming rule, docs/model-file.md).
    fit
        True when the estimation layer fits it; the simulator ignores this.
    lower, upper
        Bounds on the fitted scale (for pKa values: of the shift from ``value``).
    prior
        Prior for Bayesian sampling; None = the estimation layer's default.
    shift
        True when the fitted parameter is a shift added to ``value`` (pKa),
        False when it replaces ``value``.
    same_as
        Name of another quantity of the same kind that this one equals (the
        same ester group hydrolysed in two molecules, say): the simulator
        uses that quantity's value, fitted or not; this one is never fitted
        itself and carries the other's nominal value.  None = its own value.
    """

    value: float
    unit: str = ""
    name: str = ""
    fit: bool = False
    lower: float | None = None
    upper: float | None = None
    prior: Prior | None = None
    shift: bool = False
    same_as: str | None = None

    def __float__(self) -> float:
        return float(self.value)


def fixed(value: float, unit: str = "", name: str = "") -> Quantity:
    """A quantity that is not fitted."""
    return Quantity(float(value), unit, name)


@dataclass(frozen=True)
class Site:
    """One ionizable site.

    ``pka`` at the model's reference temperature; ``enthalpy`` is the
    ionization enthalpy [kJ/mol] used by van 't Hoff (0 = pKa independent of T).
    """

    name: str
    kind: str
    pka: Quantity
    enthalpy: Quantity = field(default_factory=lambda: Quantity(0.0, "kJ/mol"))

    @property
    def site_kind(self) -> SiteKind:
        return SITE_KINDS[self.kind]


@dataclass(frozen=True)
class Interaction:
    """Pairwise penalty W [pK units] for protonating both sites i and j."""

    site_a: str
    site_b: str
    w: Quantity


@dataclass(frozen=True)
class Molecule:
    """A molecule (substrate, reagent, product, released acid, buffer).

    Attributes
    ----------
    sites
        Ionizable sites (0 to about 12).  Microstate index bit i is 1 when
        site i is protonated.
    fixed_charge
        Charge that does not depend on pH (quaternary ammonium: +1).
    moieties
        How many of each conserved moiety the molecule carries, for mass
        balances (e.g. ``{"core": 1, "acyl": 2}``).
    role
        Free text tag: ``substrate``, ``reagent``, ``product``, ``byproduct``,
        ``acid``, ``buffer``.
    molar_mass
        [g/mol] or None.
    label
        Display name for reports; defaults to ``name``.
    """

    name: str
    sites: tuple[Site, ...] = ()
    interactions: tuple[Interaction, ...] = ()
    fixed_charge: int = 0
    moieties: Mapping[str, float] = field(default_factory=dict)
    role: str = ""
    molar_mass: float | None = None
    label: str = ""

    def site_index(self, site_name: str) -> int:
        for i, s in enumerate(self.sites):
            if s.name == site_name:
                return i
        raise KeyError(site_name)

    @property
    def display(self) -> str:
        return self.label or self.name


@dataclass(frozen=True)
class Ion:
    """A strong (spectator) ion, fully dissociated at every pH: Na+, Cl-, K+."""

    name: str
    charge: int


@dataclass(frozen=True)
class Requirement:
    """A reactant molecule must have ``site`` in ``state`` (see SITE_STATES)."""

    site: str
    state: str = "deprotonated"


@dataclass(frozen=True)
class Reactant:
    """One reactant of a step: a molecule name or a pseudo reactant.

    The rate law factor is the concentration of the molecule times the
    fraction of it whose microstate satisfies every requirement.
    """

    species: str
    requires: tuple[Requirement, ...] = ()
    coefficient: float = 1.0


@dataclass(frozen=True)
class Step:
    """An irreversible elementary step with a mass-action rate law.

    rate = k(T) * prod_r factor_r, with k(T) = 10**log10_k *
    exp(-Ea/R (1/T - 1/T_ref)) (Arrhenius at the model reference temperature).
    """

    name: str
    reactants: tuple[Reactant, ...]
    products: tuple[tuple[str, float], ...]
    log10_k: Quantity
    activation_energy: Quantity = field(default_factory=lambda: Quantity(0.0, "kJ/mol"))
    label: str = ""


@dataclass(frozen=True)
class Dose:
    """Addition of a molecule or a strong ion.

    ``amount`` [mol] is added at a constant rate between ``start`` and ``end``
    [s]; ``start == end`` is an instant event.  ``volume`` [L] is the liquid
    volume that comes with it (added at the same rate).
    """

    species: str
    amount: float
    start: float
    end: float
    volume: float = 0.0


@dataclass(frozen=True)
class Withdrawal:
    """A sample of ``volume`` [L] taken at ``time`` [s]; it removes all species
    in proportion."""

    time: float
    volume: float


@dataclass(frozen=True)
class PhControl:
    """How pH is set in a run.

    mode ``held``: a controller keeps ``setpoint`` by dosing ``titrant`` (an
    Ion name; positive ion = base such as Na+ from NaOH, negative = acid) at
    ``titrant_concentration`` [mol/L]; the simulator reports titrant consumed.
    mode ``logged``: pH(t) interpolated from ``log_times`` [s] and ``log_ph``;
    with a ``titrant``, the acid and/or base that follows the log comes from
    the charge balance and its volume is added (without one the charge
    balance is not kept).
    mode ``free``: pH from the charge balance at every instant.

    ``opposite_titrant`` (an ion of the opposite sign) at
    ``opposite_titrant_concentration`` [mol/L] makes a two-sided pH-stat: it is
    dosed whenever the titrant would have to be withdrawn.  Titrant volumes
    only add.  ``start_adjustment`` (a key of :data:`START_ADJUSTMENTS`) says
    how the start solution reaches the pH of t = 0; ``start_acid`` and
    ``start_base`` name the ions of a computed adjustment (default: the titrant
    of that sign, else the model's only ion of that sign).
    """

    mode: str
    setpoint: float | None = None
    titrant: str | None = None
    titrant_concentration: float | None = None
    log_times: tuple[float, ...] = ()
    log_ph: tuple[float, ...] = ()
    opposite_titrant: str | None = None
    opposite_titrant_concentration: float | None = None
    start_adjustment: str = "computed"
    start_acid: str | None = None
    start_base: str | None = None

    @property
    def controlled(self) -> bool:
        """True when a titrant keeps the charge balance (held, or logged with a titrant)."""
        return self.mode == "held" or (self.mode == "logged" and self.titrant is not None)


@dataclass(frozen=True)
class TemperatureProfile:
    """Piecewise-linear temperature [K] against time [s]; one point = constant."""

    times: tuple[float, ...]
    temperatures: tuple[float, ...]


@dataclass(frozen=True)
class Run:
    """One lab run (or a planned process run).

    Attributes
    ----------
    charges
        Initial amounts [mol] of molecules and ions by name.
    volume
        Initial volume [L].
    end_time
        Horizon [s].
    ph_offset
        Probe offset [pH units]: true pH = reported pH + offset (nuisance).
    amount_factor
        Multiplies the initial amount of molecules with role ``substrate``
        (nuisance for weighing errors).
    """

    name: str
    charges: Mapping[str, float]
    volume: float
    temperature: TemperatureProfile
    ph: PhControl
    end_time: float
    doses: tuple[Dose, ...] = ()
    withdrawals: tuple[Withdrawal, ...] = ()
    ph_offset: float = 0.0
    amount_factor: float = 1.0
    note: str = ""


@dataclass(frozen=True)
class Model:
    """A complete reaction model.

    Attributes
    ----------
    molecules, ions, steps
        The chemistry.  Names are unique across molecules and ions.
    reference_temperature
        T_ref [K] of pKa values and rate constants.
    activity
        ``"ideal"`` (the only option a model accepts, :data:`MODEL_ACTIVITY_MODELS`).
    pkw
        pKw of the medium at the reference temperature (a Quantity named
        ``pKw[medium]``; fitted as a shift like a pKa), or None for water
        (IAPWS R11-07).  Its temperature dependence follows water's: pKw(T) =
        pKw_water(T) + (pkw - pKw_water(T_ref)).
    medium
        Free-text name of the medium (reports).
    runs
        Runs declared in the model file (for ``speciakin simulate``).
    source
        Path of the model file, or "" when built in code.
    warnings
        The model file's warnings (``errors.Problem``: key, line, value,
        expected), left by ``modelfile.parse_model`` for ``speciakin check``
        to report; not part of the model's identity (not compared).
    """

    name: str
    molecules: tuple[Molecule, ...]
    steps: tuple[Step, ...] = ()
    ions: tuple[Ion, ...] = ()
    reference_temperature: float = 298.15
    activity: str = "ideal"
    runs: tuple[Run, ...] = ()
    description: str = ""
    source: str = ""
    extra: Mapping[str, Any] = field(default_factory=dict)
    pkw: Quantity | None = None
    medium: str = ""
    warnings: tuple[Any, ...] = field(default=(), compare=False, repr=False)

    def molecule(self, name: str) -> Molecule:
        for m in self.molecules:
            if m.name == name:
                return m
        raise KeyError(name)

    def molecule_index(self, name: str) -> int:
        for i, m in enumerate(self.molecules):
            if m.name == name:
                return i
        raise KeyError(name)

    def ion_index(self, name: str) -> int:
        for i, ion in enumerate(self.ions):
            if ion.name == name:
                return i
        raise KeyError(name)

    def quantities(self) -> list[Quantity]:
        """Every Quantity of the model in a fixed, documented order:
        for each molecule, for each site: pKa, enthalpy; then its interactions'
        W; then for each step: log10 k, activation energy; then the medium's
        pKw when the model sets one."""
        out: list[Quantity] = []
        for m in self.molecules:
            for s in m.sites:
                out += [s.pka, s.enthalpy]
            out += [i.w for i in m.interactions]
        for st in self.steps:
            out += [st.log10_k, st.activation_energy]
        if self.pkw is not None:
            out.append(self.pkw)
        return out
