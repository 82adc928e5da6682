"""The campaign workbook layout: one registry of sheets and columns.

Everything that knows about the layout reads :data:`SHEETS`: the template
writer (headers, the guide sheet), the importer (header matching, units),
the writer used for round trips and the documentation.  Add a column here and
nowhere else.

A column with a ``dimension`` carries its unit in the header, e.g.
``time [min]``; the unit is looked up in :mod:`speciakin.units` and values are
converted to internal units on import.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

__all__ = [
    "ColumnSpec",
    "SheetSpec",
    "SHEETS",
    "HPLC_KINDS",
    "PH_MODE_WORDS",
    "START_ADJUSTMENT_WORDS",
    "INITIAL_PREFIX",
    "RENAMED_SHEETS",
    "RENAMED_PREFIXES",
    "normalise_name",
    "sheet_by_name",
]


@dataclass(frozen=True)
class ColumnSpec:
    """One column of a campaign sheet.

    Attributes
    ----------
    key
        Internal name used by the importer.
    names
        Accepted header names (compared case-insensitively, unit removed);
        the first one is written in templates.
    dimension
        Unit dimension of :mod:`speciakin.units` (``"time"``, ``"volume"``...)
        or None for text and unitless numbers.
    unit
        Unit written in the template header ([min], [mL], ...).
    required
        A missing required column is an error.
    description
        Plain words for the guide sheet.
    also
        Further kinds of header unit the column accepts besides ``dimension``:
        ``"mass"`` (divided by the molar mass of the row's species) and
        ``"equivalents"`` (times the run's initial amount of the substrate).
    """

    key: str
    names: tuple[str, ...]
    dimension: str | None
    unit: str | None
    required: bool
    description: str
    also: tuple[str, ...] = ()

    @property
    def header(self) -> str:
        return f"{self.names[0]} [{self.unit}]" if self.unit else self.names[0]


@dataclass(frozen=True)
class SheetSpec:
    """One sheet of the campaign workbook (or one CSV file of the csv folder)."""

    key: str
    title: str
    csv_name: str
    required: bool
    purpose: str
    columns: tuple[ColumnSpec, ...]

    def column(self, key: str) -> ColumnSpec:
        for c in self.columns:
            if c.key == key:
                return c
        raise KeyError(key)


#: Prefix of the per-species columns of the runs sheet giving the amount present at
#: time zero: ``initial S [mmol]``.
INITIAL_PREFIX = "initial "

#: Former sheet names (normalised) -> the title that replaced them.
RENAMED_SHEETS: Mapping[str, str] = MappingProxyType({"additions": "Dosing"})

#: Former prefixes of the per-species Runs columns -> the prefix that replaced them.
RENAMED_PREFIXES: Mapping[str, str] = MappingProxyType({"charge ": INITIAL_PREFIX})

#: Accepted words for the kind of an HPLC value -> internal kind.
HPLC_KINDS: Mapping[str, str] = MappingProxyType({
    "area%": "area_percent", "area %": "area_percent", "area percent": "area_percent",
    "area": "area", "peak area": "area",
    "concentration": "concentration", "conc": "concentration", "assay": "concentration",
})

#: Accepted words for the pH mode of a run -> :data:`speciakin.chemistry.model.PH_MODES`.
PH_MODE_WORDS: Mapping[str, str] = MappingProxyType({
    "held": "held", "hold": "held", "controlled": "held", "ph-stat": "held", "ph stat": "held", "phstat": "held",
    "logged": "logged", "log": "logged", "measured": "logged",
    "free": "free", "none": "free", "uncontrolled": "free",
})


#: Accepted words for how a controlled run's start solution reaches its pH ->
#: :data:`speciakin.chemistry.model.START_ADJUSTMENTS` (docs/model-file.md, "Titrants and the start of a run").
START_ADJUSTMENT_WORDS: Mapping[str, str] = MappingProxyType({
    "computed": "computed", "calculated": "computed", "charge balance": "computed",
    "given": "given", "given amount": "given", "stated": "given",
    "titrant": "titrant", "by titrant": "titrant", "with titrant": "titrant",
})


def _c(key, names, dimension, unit, required, description, also=()) -> ColumnSpec:
    return ColumnSpec(key, tuple(names), dimension, unit, required, description, tuple(also))


_RUNS = SheetSpec(
    "runs", "Runs", "runs.csv", True,
    "One row per lab run: how it was set up and operated.",
    (
        _c("run", ["run", "run id"], None, None, True,
           "Identifier of the run, unique in the workbook (e.g. R01). Other sheets refer to it."),
        _c("ph_mode", ["pH mode"], None, None, True,
           "held (a controller doses titrant to keep the setpoint), logged (pH measured but not "
           "held; the probe log drives the model) or free (no control; pH follows the chemistry)."),
        _c("setpoint", ["pH setpoint"], "ph", None, False,
           "Target pH of a held run (0-14). Required when pH mode is held."),
        _c("titrant", ["titrant ion"], None, None, False,
           "Ion dosed by the controller, as named in the model file (e.g. Na+ for NaOH, Cl- for HCl). "
           "Required for a held run; for a logged run it makes the model dose the acid or base that "
           "follows the logged pH (blank = the logged run keeps no charge balance)."),
        _c("titrant_concentration", ["titrant concentration"], "concentration", "mol/L", False,
           "Concentration of the titrant solution. Required with a titrant ion."),
        _c("opposite_titrant", ["opposite titrant ion"], None, None, False,
           "Optional second titrant of the other sign (a two-sided pH-stat: e.g. Cl- beside Na+). It is "
           "dosed whenever the titrant would have to be taken out; titrant volumes only add."),
        _c("opposite_titrant_concentration", ["opposite titrant concentration"], "concentration", "mol/L",
           False, "Concentration of the opposite titrant. Required with an opposite titrant ion."),
        _c("start_adjustment", ["start adjustment"], None, None, False,
           "How the start solution of a held or logged run reaches its pH before time zero: computed (acid or "
           "base added inside the start volume, amount from the charge balance; the default when blank), "
           "given (the amount added is written in the start acid / start base amount columns or in an "
           "initial column) or titrant (the titrant brings it there and its volume adds)."),
        # the start acid and start base columns: the same two columns for either side
        *(column for side, ion, sign in (("acid", "Cl-", "negative"), ("base", "Na+", "positive")) for column in (
            _c(f"start_{side}", [f"start {side} ion"], None, None, False,
               f"Ion of the {side} added before time zero (e.g. {ion}). Blank = the titrant of that sign, else "
               f"the model's only {sign} ion."),
            _c(f"start_{side}_amount", [f"start {side} amount"], "amount", "mmol", False,
               f"With start adjustment 'given': amount of the start {side} ion added inside the start volume."))),
        _c("temperature", ["temperature"], "temperature", "C", False,
           "Constant temperature of the run. Leave blank when the probe log has temperatures."),
        _c("start_volume", ["start volume"], "volume", "mL", True,
           "Liquid volume in the vessel at time zero."),
        _c("duration", ["duration"], "time", "min", False,
           "How long the run lasted. Blank = until the last HPLC sample."),
        _c("sample_volume", ["sample volume"], "volume", "mL", False,
           "Volume taken out with each HPLC sample (blank = negligible)."),
        _c("note", ["note", "notes", "comment"], None, None, False, "Free text."),
    ),
)

_DOSING = SheetSpec(
    "dosing", "Dosing", "dosing.csv", False,
    "Everything dosed into the vessel after time zero (reagent, base, acid), one row per dose. "
    "Several rows per run are allowed.",
    (
        _c("run", ["run", "run id"], None, None, True, "Run identifier from the Runs sheet."),
        _c("species", ["species", "what"], None, None, True,
           "What is dosed: a molecule or ion name of the model file."),
        _c("amount", ["amount"], "amount", "mmol", True,
           "Amount dosed in total: an amount (amount [mmol]), a mass (amount [mg] or [g]: divided by the "
           "molar mass the Compounds sheet gives for that molecule) or equivalents of the substrate "
           "(amount [eq]: times the run's initial amount of the substrate, the species of the first "
           "'initial' column of the Runs sheet).", also=("mass", "equivalents")),
        _c("start", ["start"], "time", "min", True, "When the addition begins."),
        _c("end", ["end"], "time", "min", False,
           "When it ends (constant rate in between). Blank or equal to start = dosed at once."),
        _c("volume", ["volume"], "volume", "mL", False, "Liquid volume that comes with it (blank = none)."),
    ),
)

_COMPOUNDS = SheetSpec(
    "compounds", "Compounds", "compounds.csv", True,
    "Each compound reported by HPLC and the model molecule it is.",
    (
        _c("compound", ["compound", "peak"], None, None, True,
           "Name as it appears in the HPLC results (e.g. the peak name)."),
        _c("molecule", ["model molecule", "molecule"], None, None, True,
           "Name of the molecule in the model file that this compound is; 'not modelled' for a peak the "
           "model does not describe (an impurity, an unknown): its area% count in the sample's total, "
           "and the model's area% of the other compounds add up to the rest."),
        _c("rrf", ["RRF"], None, None, False,
           "Relative response factor at the detection wavelength (blank = 1). "
           "Mole fraction is proportional to area / RRF."),
        _c("molar_mass", ["molar mass"], "molar_mass", "g/mol", False, "Optional, for reports."),
        _c("loq", ["LOQ"], None, None, False,
           "Limit of quantitation, in the same unit as this compound's HPLC values."),
        _c("substrate_units", ["substrate units"], None, None, False,
           "How many substrate cores the compound carries (1 for the substrate and its "
           "products, 0 for reagent-derived compounds). Used for the mass-balance check "
           "when no model file is given."),
    ),
)

_HPLC = SheetSpec(
    "hplc", "HPLC results", "hplc_results.csv", True,
    "HPLC results. Long layout: one row per value with a compound column. Wide layout: "
    "no compound column, one column per compound (header = compound name). "
    "Write <LOQ (or <0.05) for a value below the limit of quantitation; a blank cell in a "
    "sampled row counts as below the LOQ too.",
    (
        _c("run", ["run", "run id"], None, None, True, "Run identifier from the Runs sheet."),
        _c("time", ["time"], "time", "min", True, "Sampling time, counted from the start of the run."),
        _c("kind", ["kind"], None, None, True,
           "area% (normalised area percent), area (peak area) or concentration."),
        _c("compound", ["compound", "peak"], None, None, False,
           "Long layout only: compound name from the Compounds sheet."),
        _c("value", ["value", "result"], None, None, False,
           "Long layout only: the result. A concentration unit in the header (value [mmol/L]) "
           "applies to concentration rows; without one they are read as mol/L."),
    ),
)

_PROBE = SheetSpec(
    "probe", "Probe log", "probe_log.csv", False,
    "pH and temperature readings at any rate (a 1 Hz log of a day is fine). Either cell may be blank.",
    (
        _c("run", ["run", "run id"], None, None, True, "Run identifier from the Runs sheet."),
        _c("time", ["time"], "time", "min", True, "Time of the reading."),
        _c("ph", ["pH"], "ph", None, False, "pH reading (0-14)."),
        _c("temperature", ["temperature"], "temperature", "C", False, "Temperature reading."),
    ),
)

_TITRANT = SheetSpec(
    "titrant", "Titrant log", "titrant_log.csv", False,
    "Titrant consumed by the controller of held runs (and of logged runs with a titrant ion), cumulative "
    "from time zero: the titrant ion's consumption, not the opposite titrant's. "
    "Give the volume (converted with the titrant concentration of the Runs sheet) or the amount.",
    (
        _c("run", ["run", "run id"], None, None, True, "Run identifier from the Runs sheet."),
        _c("time", ["time"], "time", "min", True, "Time of the reading."),
        _c("volume", ["titrant volume"], "volume", "mL", False, "Cumulative titrant volume."),
        _c("amount", ["titrant amount"], "amount", "mmol", False, "Cumulative titrant amount."),
    ),
)

#: Every sheet of a campaign, in workbook order.
SHEETS: Mapping[str, SheetSpec] = MappingProxyType({
    s.key: s for s in (_RUNS, _DOSING, _COMPOUNDS, _HPLC, _PROBE, _TITRANT)
})


def normalise_name(text: object) -> str:
    """Lower-case, single-spaced text used to compare sheet and header names."""
    return " ".join(str(text).replace("_", " ").split()).lower()


def sheet_by_name(name: str) -> SheetSpec | None:
    """The sheet spec whose title or CSV file name matches ``name``."""
    n = normalise_name(name)
    for s in SHEETS.values():
        if n in (normalise_name(s.title), normalise_name(s.csv_name[:-4]), normalise_name(s.csv_name)):
            return s
    return None
