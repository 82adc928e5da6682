"""Reading a model file: TOML text -> :class:`speciakin.chemistry.model.Model`.

``load_model`` and ``parse_model`` (exported by the package, see
:mod:`speciakin.chemistry.modelfile`) and the building of molecules, ions and
steps; runs and the ``[fit]`` table are read by :mod:`.runs`, quantities by
:mod:`.quantity`, semantic checks are :mod:`.validate`.

Every problem of a file is gathered in one pass and raised together as a
:class:`speciakin.errors.ModelFileError` whose message names the file, the key
path (``molecule.S.site[1].pka``), the line, the value and what was expected.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any

from speciakin.chemistry.model import (
    Interaction,
    Ion,
    Model,
    Molecule,
    Quantity,
    Reactant,
    Requirement,
    Site,
    Step,
)
from speciakin.chemistry.modelfile.keys import FILE_KEYS
from speciakin.chemistry.modelfile.paths import format_path, parent_path, sub_path
from speciakin.chemistry.modelfile.quantity import read_quantity, share_quantities
from speciakin.chemistry.modelfile.runs import RunReader
from speciakin.chemistry.modelfile.reader import TableReader
from speciakin.chemistry.modelfile.units import parse_rate_constant, rate_unit_text
from speciakin.chemistry.modelfile.validate import (
    ACTIVITY_MODELS,
    MODEL_ACTIVITY_MODELS,
    hydrolysis_step_name,
    validate_model,
)
from speciakin.errors import Location, ModelFileError, Problem

__all__ = ["load_model", "parse_model", "read_toml"]


_NAN = float("nan")
_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")
_DECIMAL_COMMA = re.compile(r"=\s*[-+]?\d+,\d+\s*(?:[,}\]#]|$)")


def read_toml(text: str, source: str) -> dict[str, Any]:
    """The tables of a TOML file (model or process file) read from ``text``.

    Raises
    ------
    ModelFileError
        A syntax error, at its line, with the line's text; a number written with a decimal comma
        (``pka = 9,9``) is named as such.
    """
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        m = _TOML_POSITION.search(message)
        line = int(m.group(1)) if m else None
        lines = text.splitlines()
        written = lines[line - 1].strip() if line and line <= len(lines) else None
        expected = "valid TOML (https://toml.io)"
        if written is not None and _DECIMAL_COMMA.search(written):
            message = "a number written with a decimal comma; " + message
            expected = "a decimal point in numbers (9.5, not 9,5)"
        raise ModelFileError(f"TOML syntax error: {message}", Location(file=source, line=line), written,
                             expected=expected) from None


# ---------------------------------------------------------------------------
# public entry points
# ---------------------------------------------------------------------------
def load_model(path: str | Path) -> Model:
    """Read a model file.

    The file is opened read-only and never modified.  A logged-pH CSV named
    in a run is read relative to the model file's folder.

    Parameters
    ----------
    path
        Path of the ``.toml`` model file.

    Returns
    -------
    Model
        With ``source`` set to ``str(path)``.

    Raises
    ------
    ModelFileError
        File missing or unreadable, TOML syntax error, or any problem of
        content (all gathered in one message).
    """
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise ModelFileError(f"cannot read model file: {exc.strerror}", Location(file=str(p)),
                             expected="a readable TOML model file") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ModelFileError(f"model file is not UTF-8 text ({exc.reason} at byte {exc.start})",
                             Location(file=str(p)), expected="UTF-8 text") from None
    return parse_model(text, source=str(p), base_dir=p.parent)


def parse_model(text: str, source: str = "<string>", base_dir: str | Path | None = None) -> Model:
    """Parse model-file text.

    Parameters
    ----------
    text
        TOML text of the model file.
    source
        File name for messages; ``"<string>"`` (the default) leaves
        ``Model.source`` empty.
    base_dir
        Folder that relative CSV paths refer to (default: current folder).

    Returns
    -------
    Model
        All values in internal units (see :mod:`speciakin.chemistry.model`).

    Raises
    ------
    ModelFileError
        Every problem found, gathered in one message.
    """
    data = read_toml(text, source)
    builder = _Builder(TableReader(source, text), Path(base_dir) if base_dir is not None else Path("."))
    model = builder.build(data, "" if source == "<string>" else source)
    reader = builder.reader
    reported = [p.location.key or "" for p in reader.collector.errors]
    for problem in validate_model(model):
        key = builder.file_path(problem.location.key or "")
        if problem.severity == "error" and (
                any(_related(key, r) for r in reported)
                or (problem.code == "nonfinite" and reported)):
            continue  # already reported while reading (placeholders are NaN)
        location = Location(file=reader.source, key=key or None, line=reader.key_lines.line(key))
        reader.collector.problems.append(
            Problem(problem.message, location, problem.value, problem.expected, problem.severity,
                    problem.code))
    reader.collector.raise_if_errors(ModelFileError)
    # the warnings travel with the model (``Model.warnings``): check reports them with the workbook's
    return replace(model, warnings=tuple(reader.collector.warnings))


def _related(a: str, b: str) -> bool:
    if not a or not b:
        return False
    return a == b or a.startswith(b + ".") or a.startswith(b + "[") \
        or b.startswith(a + ".") or b.startswith(a + "[")


# ---------------------------------------------------------------------------
# building the Model from the TOML tables
# ---------------------------------------------------------------------------
class _Builder:
    def __init__(self, reader: TableReader, base_dir: Path) -> None:
        self.reader = reader
        self.base_dir = base_dir
        self.step_origin: dict[str, str] = {}
        self.k_written: set[str] = set()  # step paths whose rate constant is written as 'k'

    def file_path(self, key: str) -> str:
        """Map a key path of a generated step back to where the file wrote it."""
        for prefix in self.k_written:
            written = sub_path(prefix, "log10_k")
            if key == written or key.startswith(written + "."):
                key = sub_path(prefix, "k") + key[len(written):]
        for name, origin in self.step_origin.items():
            prefix = format_path("step", name)
            if key == prefix or key.startswith(prefix + ".") or key.startswith(prefix + "["):
                rest = key[len(prefix):]
                if rest.startswith(".products"):  # shared by both paths of the shorthand
                    return parent_path(origin) + rest
                return origin + rest
        return key

    # -- top level -----------------------------------------------------------
    def build(self, data: dict, source: str) -> Model:
        r = self.reader
        r.check_keys(data, "", FILE_KEYS["top"], required=("model",))
        head = r.table(data, "model", "") or {}
        r.check_keys(head, "model", FILE_KEYS["model"], required=("name",) if "model" in data else ())
        name = r.string(head, "name", "model", default="")
        description = r.string(head, "description", "model", default="")
        t_ref = 298.15
        if "reference_temperature" in head:
            t_ref = r.measure(head["reference_temperature"], "model.reference_temperature",
                              "temperature", positive=True) or _NAN
        activity = r.string(head, "activity", "model", default="ideal")
        if activity is not None and activity not in MODEL_ACTIVITY_MODELS:
            extra = (" ('davies' is applied by the stand-alone speciation and titration commands, not by "
                     "the kinetics simulation: a model would silently ignore it)"
                     if activity in ACTIVITY_MODELS else "")
            r.error("model.activity", "activity correction not available for a model" + extra, activity,
                    "one of: " + ", ".join(MODEL_ACTIVITY_MODELS))
            activity = None
        ions = self._ions(r.table(data, "ions", "") or {})
        molecule_tables = r.table(data, "molecule", "") or {}
        molecules = tuple(m for key, value in molecule_tables.items()
                          if (m := self._molecule(key, value)) is not None)
        steps = [s for key, value in (r.table(data, "step", "") or {}).items()
                 if (s := self._step(key, value)) is not None]
        for key, value in (r.table(data, "hydrolysis", "") or {}).items():
            steps += self._hydrolysis(key, value)
        run_reader = RunReader(r, self.base_dir, {m.name: m.molar_mass for m in molecules},
                               next((m.name for m in molecules if m.role == "substrate"), None))
        runs = tuple(run for key, value in (r.table(data, "run", "") or {}).items()
                     if (run := run_reader.run(key, value)) is not None)
        pkw, medium = self._medium(r.table(data, "medium", "") or {})
        extra: dict[str, Any] = {}
        if "fit" in data:
            fit = run_reader.fit_options(r.table(data, "fit", "") or {})
            extra["fit"] = fit
        model = Model(name=name or "", molecules=molecules, steps=tuple(steps), ions=ions,
                      reference_temperature=t_ref, activity=activity or "ideal", runs=runs,
                      description=description or "", source=source, extra=extra, pkw=pkw, medium=medium)
        return share_quantities(model, lambda name, message, value, expected: r.error(
            r.shared_paths.get(name, name), message, value, expected))

    def _medium(self, table: dict) -> tuple[Quantity | None, str]:
        """``[medium]``: name and pKw (fixed, or fitted as a shift); absent = water."""
        r = self.reader
        r.check_keys(table, "medium", FILE_KEYS["medium"])
        name = r.string(table, "name", "medium", default="") or ""
        pkw = None
        if "pkw" in table:
            pkw = read_quantity(r, table["pkw"], "medium.pkw", "pkw", "medium",
                                lambda raw, sub: r.number(raw, sub, what="a pKw value (number)"))
        return pkw, name

    def _ions(self, table: dict) -> tuple[Ion, ...]:
        out = []
        for name, charge in table.items():
            path = format_path("ions", name)
            value = self.reader.typed(charge, path, int, "a non-zero integer charge such as 1 or -1")
            if value is not None:
                out.append(Ion(name, value))
        return tuple(out)

    # -- molecules -----------------------------------------------------------
    def _molecule(self, name: str, value: Any) -> Molecule | None:
        r = self.reader
        path = format_path("molecule", name)
        table = r.keyed(value, path, FILE_KEYS["molecule"])
        if table is None:
            return None
        label = r.string(table, "label", path, default="") or ""
        role = r.string(table, "role", path, default="") or ""
        molar_mass = None
        if "molar_mass" in table:
            molar_mass = r.measure(table["molar_mass"], sub_path(path, "molar_mass"),
                                   "molar_mass", positive=True)
        charge = 0
        if "charge" in table:
            charge = r.typed(table["charge"], sub_path(path, "charge"), int,
                             "an integer fixed charge") or 0
        moieties: dict[str, float] = {}
        for moiety, count in (r.table(table, "moieties", path) or {}).items():
            number = r.number(count, sub_path(path, "moieties", moiety), minimum=0)
            if number is not None:
                moieties[moiety] = number
        sites = []
        for i, item in enumerate(self.reader.array(table, "site", path)):
            site = self._site(name, item, sub_path(path, "site", i))
            if site is not None:
                sites.append(site)
        interactions = []
        for i, item in enumerate(self.reader.array(table, "interaction", path)):
            inter = self._interaction(name, item, sub_path(path, "interaction", i))
            if inter is not None:
                interactions.append(inter)
        return Molecule(name, tuple(sites), tuple(interactions), charge, moieties, role,
                        molar_mass, label)

    def _site(self, molecule: str, value: Any, path: str) -> Site | None:
        r = self.reader
        table = r.keyed(value, path, FILE_KEYS["site"], required=("name", "kind", "pka"))
        if table is None:
            return None
        name = r.string(table, "name", path)
        kind = r.string(table, "kind", path)
        if name is None or kind is None:
            return None
        owner = f"{molecule}.{name}"
        if "pka" not in table:  # reported (missing, or written 'pKa'); the site keeps its name for the steps
            return Site(name, kind, Quantity(_NAN, "", f"pKa[{owner}]", shift=True))
        pka = read_quantity(r, table["pka"], sub_path(path, "pka"), "pka", owner,
                            lambda raw, sub: r.number(raw, sub, what="a pKa value (number)"))
        enthalpy = Quantity(0.0, "kJ/mol", f"dH[{owner}]")
        if "enthalpy" in table:
            enthalpy = read_quantity(r, table["enthalpy"], sub_path(path, "enthalpy"), "enthalpy",
                                     owner, self._energy, self._energy)
        if pka is None or enthalpy is None:
            return Site(name, kind, Quantity(_NAN, "", f"pKa[{owner}]", shift=True))
        return Site(name, kind, pka, enthalpy)

    def _energy(self, raw: Any, path: str) -> float | None:
        return self.reader.measure(raw, path, "molar_energy")

    def _interaction(self, molecule: str, value: Any, path: str) -> Interaction | None:
        r = self.reader
        table = r.keyed(value, path, FILE_KEYS["interaction"], required=("sites", "w"))
        if table is None:
            return None
        sites = table.get("sites")
        if not (isinstance(sites, list) and len(sites) == 2 and all(isinstance(s, str) for s in sites)):
            if "sites" in table:
                r.error(sub_path(path, "sites"), "wrong value", sites,
                        'two site names, e.g. ["N_alkyl", "N_aryl"]')
            return None
        if "w" not in table:
            return None
        owner = f"{molecule}.{sites[0]}~{sites[1]}"
        w = read_quantity(r, table["w"], sub_path(path, "w"), "w", owner,
                          lambda raw, sub: r.number(raw, sub, what="W in pK units (number)"))
        if w is None:
            return None
        return Interaction(sites[0], sites[1], w)

    # -- steps -----------------------------------------------------------------
    def _reactant(self, value: Any, path: str) -> Reactant | None:
        r = self.reader
        if isinstance(value, str):
            return Reactant(value)
        table = r.keyed(value, path, FILE_KEYS["reactant"], required=("species",),
                        what='a species name or a table {species = "...", requires = {...}}')
        if table is None:
            return None
        species = r.string(table, "species", path)
        requires = []
        for site, state in (r.table(table, "requires", path) or {}).items():
            state = r.typed(state, sub_path(path, "requires", site), str,
                            'a site state such as "deprotonated"')
            if state is not None:
                requires.append(Requirement(site, state))
        coefficient = 1.0
        if "coefficient" in table:
            coefficient = r.number(table["coefficient"], sub_path(path, "coefficient"),
                                   positive=True) or 1.0
        if species is None:
            return None
        return Reactant(species, tuple(requires), coefficient)

    def _products(self, table: dict, path: str) -> tuple[tuple[str, float], ...]:
        out = []
        for name, count in (self.reader.table(table, "products", path) or {}).items():
            number = self.reader.number(count, sub_path(path, "products", name), positive=True,
                                        what="a stoichiometric number > 0")
            if number is not None:
                out.append((name, number))
        return tuple(out)

    def _rate(self, table: dict, path: str, step: str, order: float) -> tuple[Quantity, Quantity] | None:
        r = self.reader
        unit_order = int(round(order))
        unit = f"log10({rate_unit_text(unit_order)})"
        if ("k" in table) == ("log10_k" in table):
            r.error(path, "give the rate constant once, as 'k' (with a unit) or as 'log10_k'",
                    expected="exactly one of 'k', 'log10_k'", code="missing")
            log10_k = None
        elif "log10_k" in table:
            log10_k = read_quantity(r, table["log10_k"], sub_path(path, "log10_k"), "log10_k", step,
                                    lambda raw, sub: r.number(raw, sub), unit=unit)
        else:
            self.k_written.add(format_path("step", step))

            def convert(raw: Any, sub: str) -> float | None:
                if isinstance(raw, bool) or not isinstance(raw, str):
                    r.error(sub, "a rate constant 'k' needs a unit", raw,
                            f"text such as '35 {rate_unit_text(unit_order)}' (or use log10_k)")
                    return None
                try:
                    return parse_rate_constant(raw, unit_order)
                except ValueError as exc:
                    r.error(sub, str(exc), raw, f"a rate constant in {rate_unit_text(unit_order)} "
                                                "or an equivalent unit", code="unit")
                    return None

            def bound(raw: Any, sub: str) -> float | None:
                return convert(raw, sub) if isinstance(raw, str) else r.number(raw, sub)

            log10_k = read_quantity(r, table["k"], sub_path(path, "k"), "log10_k", step, convert,
                                    bound, unit=unit)
        ea = Quantity(0.0, "kJ/mol", f"Ea[{step}]")
        if "activation_energy" in table:
            ea = read_quantity(r, table["activation_energy"], sub_path(path, "activation_energy"),
                               "activation_energy", step, self._energy, self._energy)
        if log10_k is None or ea is None:
            return None
        return log10_k, ea

    def _step(self, name: str, value: Any) -> Step | None:
        r = self.reader
        path = format_path("step", name)
        table = r.keyed(value, path, FILE_KEYS["step"], required=("reactants", "products"))
        if table is None:
            return None
        label = r.string(table, "label", path, default="") or ""
        reactants = []
        if "reactants" in table:
            items = r.typed(table["reactants"], sub_path(path, "reactants"), list,
                            "an array of reactants")
            for i, item in enumerate(items or []):
                reactant = self._reactant(item, sub_path(path, "reactants", i))
                if reactant is not None:
                    reactants.append(reactant)
        products = self._products(table, path)
        order = sum(x.coefficient for x in reactants if x.species != "water")
        # without reactants the order (and so the unit of k) is unknown; the
        # missing reactants are reported by validate_model
        rate = self._rate(table, path, name, order) if reactants else None
        if rate is None:
            rate = (Quantity(_NAN, "", f"log10k[{name}]"), Quantity(0.0, "kJ/mol", f"Ea[{name}]"))
        return Step(name, tuple(reactants), products, rate[0], rate[1], label)

    def _hydrolysis(self, molecule: str, value: Any) -> list[Step]:
        r = self.reader
        path = format_path("hydrolysis", molecule)
        table = r.keyed(value, path, FILE_KEYS["hydrolysis"], required=("products",))
        if table is None:
            return []
        if "water" not in table and "hydroxide" not in table:
            r.error(path, "no hydrolysis path given", expected="a 'water' and/or a 'hydroxide' table",
                    code="missing")
        products = self._products(table, path)
        steps = []
        for pseudo, order in (("water", 1), ("hydroxide", 2)):
            sub = r.table(table, pseudo, path)
            if sub is None:
                continue
            branch = sub_path(path, pseudo)
            r.check_keys(sub, branch, FILE_KEYS["hydrolysis_path"])
            name = hydrolysis_step_name(molecule, pseudo)
            self.step_origin[name] = branch
            rate = self._rate(sub, branch, name, order)
            if rate is None:
                continue
            steps.append(Step(name, (Reactant(molecule), Reactant(pseudo)), products, rate[0], rate[1]))
        return steps


