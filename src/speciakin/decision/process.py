"""The process file: the process a chemist plans, the pH scan and the
specifications, read from TOML into the dataclasses of
:mod:`speciakin.decision.process_plan`.

The file layout is documented in ``docs/decision.md``; the skeleton that
``speciakin new`` copies is ``decision/templates/process_skeleton.toml``.
Every problem found in one pass is reported together, each with the file,
key path, line (best effort), the value and what was expected, as a
:class:`speciakin.errors.ModelFileError`.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from speciakin.chemistry.model import START_ADJUSTMENTS, Model
from speciakin.chemistry.modelfile.parse import read_toml
from speciakin.decision.process_fields import (
    PROCESS_KEYS,
    RENAMED_PROCESS_KEYS,
    SCAN_KEYS,
    Reader,
    parse_equivalents,
    parse_second_factor,
    parse_specification,
)
from speciakin.decision.process_plan import FACTOR_KINDS, FactorKind, ProcessPlan, SecondFactor
from speciakin.decision.specs import OUTCOME_KINDS, Specification
from speciakin.errors import Location, ModelFileError

__all__ = [
    "FactorKind",
    "FACTOR_KINDS",
    "SecondFactor",
    "ProcessPlan",
    "load_process",
    "parse_process",
    "validate_process",
    "area_spec_problems",
    "process_to_toml",
    "parse_equivalents",
]


def parse_process(data: Mapping[str, Any], source: str = "", text: str = "") -> ProcessPlan:
    """Build a :class:`ProcessPlan` from parsed TOML.

    Parameters
    ----------
    data
        The TOML document as a dict.
    source
        File name for error messages.
    text
        The raw text, used to find line numbers (best effort).

    Raises
    ------
    ModelFileError
        Listing every problem found.
    """
    r = Reader(source, text)
    top = {"process": "a [process] table", "scan": "a [scan] table",
           "specification": "[[specification]] tables", "report": "a [report] table (author, reviewer)"}
    r.unknown_keys(data, top, "", None)
    proc = data.get("process")
    if not isinstance(proc, dict):
        r.error("missing or not a table", Location(file=source or None, key="process"), None,
                "a [process] table", code="missing")
        r.problems.raise_if_errors(ModelFileError)
    p, t = "process", "process"
    r.unknown_keys(proc, PROCESS_KEYS, p, t, renamed=RENAMED_PROCESS_KEYS)
    name = r.text(proc, "name", p, t, required=False, default=Path(source).stem if source else "process")
    description = r.text(proc, "description", p, t, required=False)
    substrate = r.text(proc, "substrate", p, t)
    reagent = r.text(proc, "reagent", p, t)
    titrant = r.text(proc, "titrant", p, t)
    moiety = r.text(proc, "moiety", p, t, required=False) or None
    volume = r.quantity(proc, "volume", "volume", p, t)
    amount = None
    if "substrate_amount" in proc and "substrate_concentration" in proc:
        r.error("give either substrate_amount or substrate_concentration, not both",
                r.where("process.substrate_concentration", t, "substrate_concentration"),
                proc["substrate_concentration"], "one of the two keys")
    elif "substrate_concentration" in proc:
        conc = r.quantity(proc, "substrate_concentration", "concentration", p, t)
        amount = None if conc is None or volume is None else conc * volume
    else:
        amount = r.quantity(proc, "substrate_amount", "amount", p, t)
    equivalents = None
    if "equivalents" not in proc:
        r.error("missing", r.where("process.equivalents", t, None), None,
                PROCESS_KEYS["equivalents"], code="missing")
    else:
        try:
            equivalents = parse_equivalents(proc["equivalents"])
            if not math.isfinite(equivalents) or equivalents <= 0:
                raise ValueError("must be a finite number > 0")
        except ValueError as exc:
            r.error(str(exc), r.where("process.equivalents", t, "equivalents"), proc["equivalents"],
                    PROCESS_KEYS["equivalents"])
            equivalents = None
    dosing = r.quantity(proc, "dosing_time", "time", p, t, allow_zero=True)
    hold = r.quantity(proc, "hold_time", "time", p, t, allow_zero=True)
    feed = r.quantity(proc, "feed_volume", "volume", p, t, required=False, allow_zero=True,
                      default=0.0)
    temperature = r.quantity(proc, "temperature", "temperature", p, t)
    titrant_c = r.quantity(proc, "titrant_concentration", "concentration", p, t)
    opposite = r.text(proc, "opposite_titrant", p, t, required=False) or None
    opposite_c = None
    if opposite is not None or "opposite_titrant_concentration" in proc:
        opposite_c = r.quantity(proc, "opposite_titrant_concentration", "concentration", p, t)
        if opposite is None:
            r.error("a concentration without opposite_titrant",
                    r.where("process.opposite_titrant_concentration", t, "opposite_titrant_concentration"),
                    proc.get("opposite_titrant_concentration"), PROCESS_KEYS["opposite_titrant"])
    start = r.text(proc, "start_adjustment", p, t, required=False, default="computed")
    if start not in START_ADJUSTMENTS:
        r.error("unknown start adjustment", r.where("process.start_adjustment", t, "start_adjustment"),
                start, PROCESS_KEYS["start_adjustment"])
    start_acid = r.text(proc, "start_acid", p, t, required=False) or None
    start_base = r.text(proc, "start_base", p, t, required=False) or None
    charges: dict[str, float] = {}
    raw_charges = proc.get("initial", {})
    if not isinstance(raw_charges, dict):
        r.error("not a table", r.where("process.initial", t, "initial"), raw_charges,
                PROCESS_KEYS["initial"])
    else:
        for key in raw_charges:
            v = r.quantity(raw_charges, key, "amount", "process.initial", "process.initial",
                           allow_zero=True)
            if v is not None:
                charges[key] = v
    if dosing is not None and hold is not None and dosing + hold <= 0:
        r.error("dosing_time + hold_time must be > 0", r.where("process.hold_time", t, "hold_time"),
                proc.get("hold_time"), "a process that lasts some time")

    scan = data.get("scan", {})
    if not isinstance(scan, dict):
        r.error("not a table", Location(file=source or None, key="scan"), scan, "a [scan] table")
        scan = {}
    s = "scan"
    r.unknown_keys(scan, SCAN_KEYS, s, s)
    ph_from = r.number(scan, "ph_from", s, s, 2.0, -2.0, 16.0)
    ph_to = r.number(scan, "ph_to", s, s, 12.0, -2.0, 16.0)
    ph_step = r.number(scan, "ph_step", s, s, 0.25, 0.0, 16.0, open_low=True)
    if ph_to <= ph_from:
        r.error("ph_to must be above ph_from", r.where("scan.ph_to", s, "ph_to"), ph_to,
                f"a pH above {ph_from:g}")
    elif (ph_to - ph_from) / ph_step > 2000:
        r.error("the pH grid has more than 2000 points", r.where("scan.ph_step", s, "ph_step"),
                ph_step, "a coarser step")
    elif (ph_to - ph_from) / ph_step < 1 - 1e-9:
        r.error("the pH step is larger than the scanned range", r.where("scan.ph_step", s, "ph_step"),
                ph_step, f"a step <= {ph_to - ph_from:g}")
    level = r.number(scan, "level", s, s, 0.95, 0.0, 1.0, open_low=True, open_high=True)
    tolerance = r.number(scan, "ph_tolerance", s, s, 0.3, 0.0, 8.0)
    draws = r.number(scan, "draws", s, s, 500, 1, 10_000_000, integer=True)
    seed = r.number(scan, "seed", s, s, 1, 0, 2**63 - 1, integer=True)
    factor = parse_second_factor(r, scan["second_factor"]) if "second_factor" in scan else None

    specs: list[Specification] = []
    raw_specs = data.get("specification", [])
    if not isinstance(raw_specs, list):
        r.error("not an array of tables", Location(file=source or None, key="specification"),
                raw_specs, "[[specification]] tables")
        raw_specs = []
    for k, item in enumerate(raw_specs):
        spec = parse_specification(r, item, k)
        if spec is not None:
            specs.append(spec)
    if not raw_specs:
        r.error("no specification given", Location(file=source or None, key="specification"), None,
                "at least one [[specification]] table", code="missing")

    report = _report_people(r, data.get("report", {}), source)
    r.problems.raise_if_errors(ModelFileError)
    return ProcessPlan(
        name=name, substrate=substrate, substrate_amount=float(amount), volume=float(volume),
        reagent=reagent, equivalents=float(equivalents), dosing_time=float(dosing),
        hold_time=float(hold), temperature=float(temperature), titrant=titrant,
        titrant_concentration=float(titrant_c), feed_volume=float(feed), moiety=moiety,
        opposite_titrant=opposite, opposite_titrant_concentration=opposite_c, start_adjustment=start,
        start_acid=start_acid, start_base=start_base,
        extra_charges=MappingProxyType(charges), ph_from=ph_from, ph_to=ph_to, ph_step=ph_step,
        level=level, ph_tolerance=tolerance, n_draws=int(draws), seed=int(seed),
        second_factor=factor, specifications=tuple(specs), description=description, source=source,
        report_author=report.get("author", ""), report_reviewer=report.get("reviewer", ""))


def _report_people(r: Reader, table: Any, source: str) -> dict[str, str]:
    """``[report]`` author and reviewer (free text) for the report's QA block."""
    if not isinstance(table, dict):
        r.error("not a table", Location(file=source or None, key="report"), table, "a [report] table")
        return {}
    r.unknown_keys(table, {"author": "text", "reviewer": "text"}, "report", "report")
    out = {}
    for key in ("author", "reviewer"):
        if key in table:
            if isinstance(table[key], str):
                out[key] = table[key].strip()
            else:
                r.error("not text", Location(file=source or None, key=f"report.{key}"), table[key], "a name as text")
    return out


def load_process(path: str | Path, model: Model | None = None) -> ProcessPlan:
    """Read and check a process file; with ``model``, also check every name against it.

    Raises
    ------
    ModelFileError
        File missing, not TOML, or any invalid value (all problems at once).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModelFileError("process file not found", Location(file=str(path)),
                             expected="an existing TOML file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ModelFileError(f"cannot read the process file: {exc}", Location(file=str(path))) from None
    data = read_toml(text, str(path))
    process = parse_process(data, str(path), text)
    if model is not None:
        process = validate_process(process, model, text)
    return process


def area_spec_problems(process: ProcessPlan, hplc: Mapping[str, str]) -> list:
    """Errors for specifications of kind ``area%`` that name a molecule no HPLC compound is: their area%
    are those of the campaign's Compounds sheet (``hplc``: compound name -> model molecule)."""
    source = Path(process.source) if process.source else None
    text = source.read_text(encoding="utf-8") if source is not None and source.is_file() else ""
    r = Reader(process.source, text)
    listed = sorted(set(hplc.values()))
    for k, spec in enumerate(process.specifications):
        for name in spec.species if spec.kind == "area%" else ():
            if name not in listed:
                r.error("an area% specification names a molecule the HPLC does not report",
                        r.where(f"specification[{k + 1}].species", "specification", "species", k), name,
                        f"a model molecule of the Compounds sheet: {', '.join(listed) or '(none listed)'}",
                        code="not_in_hplc")
    return list(r.problems.problems)


def validate_process(process: ProcessPlan, model: Model, text: str = "") -> ProcessPlan:
    """Check every name of ``process`` against ``model``.

    Returns the process with ``moiety`` resolved (the substrate's only moiety
    when the file does not name one).

    Raises
    ------
    ModelFileError
        Unknown molecule, ion or moiety, listing the known ones.
    """
    r = Reader(process.source, text)
    molecules = [m.name for m in model.molecules]
    ions = [i.name for i in model.ions]
    for key in ("substrate", "reagent"):
        value = getattr(process, key)
        if value not in molecules:
            r.error("unknown molecule", r.where(f"process.{key}", "process", key), value,
                    f"one of {', '.join(molecules)}", code="unknown_name")
    charge = {i.name: i.charge for i in model.ions}
    for key, sign in (("titrant", 0), ("opposite_titrant", 0), ("start_acid", -1), ("start_base", 1)):
        value = getattr(process, key)
        if value is None:
            continue
        fits = [n for n, z in charge.items() if z != 0 and (sign == 0 or z * sign > 0)]
        if value not in fits:
            what = {0: "a charged ion", -1: "an ion with a negative charge", 1: "an ion with a positive charge"}
            r.error(f"unknown ion, or not {what[sign]}", r.where(f"process.{key}", "process", key), value,
                    f"one of {', '.join(fits) or '(the model declares no such ion)'}", code="unknown_name")
    if (process.opposite_titrant in charge and process.titrant in charge
            and charge[process.opposite_titrant] * charge[process.titrant] > 0):
        r.error("the opposite titrant must carry the opposite charge of the titrant",
                r.where("process.opposite_titrant", "process", "opposite_titrant"), process.opposite_titrant,
                "an ion whose charge has the other sign", code="invalid")
    for key in process.extra_charges:
        if key not in molecules and key not in ions:
            r.error("unknown molecule or ion", r.where(f"process.initial.{key}", "process.initial", key),
                    key, f"one of {', '.join(molecules + ions)}", code="unknown_name")
    moiety = process.moiety
    if process.substrate in molecules:
        own = dict(model.molecule(process.substrate).moieties)
        if moiety is None:
            if len(own) != 1:
                r.error(f"the substrate carries {len(own)} moieties; name the one to count",
                        r.where("process.moiety", "process", None), None,
                        f"moiety = one of {', '.join(own) or '(none declared in the model)'}",
                        code="missing")
            else:
                moiety = next(iter(own))
        elif moiety not in own or float(own[moiety]) <= 0:
            r.error("the substrate does not carry this moiety",
                    r.where("process.moiety", "process", "moiety"), moiety,
                    f"one of {', '.join(own) or '(none declared in the model)'}", code="unknown_name")
    for k, spec in enumerate(process.specifications):
        for name in spec.species_used():
            key = "species" if name in spec.species else "per"
            loc = r.where(f"specification[{k + 1}].{key}", "specification", key, k)
            if name not in molecules:
                r.error("unknown molecule", loc, name, f"one of {', '.join(molecules)}",
                        code="unknown_name")
            elif (spec.kind != "area%" and moiety is not None
                  and float(model.molecule(name).moieties.get(moiety, 0)) <= 0):
                r.error(f"molecule does not carry the substrate moiety '{moiety}' (its mole % "
                        f"would always be 0)", loc, name,
                        "a molecule made from the substrate", code="invalid")
    r.problems.raise_if_errors(ModelFileError)
    if moiety == process.moiety:
        return process
    return replace(process, moiety=moiety)


# ---------------------------------------------------------------- writing

def _toml_string(s: str) -> str:
    return '"' + s.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n") + '"'


def process_to_toml(process: ProcessPlan) -> str:
    """Write a process as TOML that :func:`parse_process` reads back unchanged.

    Quantities are written in internal units (mol, L, s, K) with full
    precision so that the round trip is exact.
    """
    q = repr
    lines = ["[process]",
             f"name = {_toml_string(process.name)}"]
    if process.description:
        lines.append(f"description = {_toml_string(process.description)}")
    lines += [
        f"substrate = {_toml_string(process.substrate)}",
        f'substrate_amount = "{q(process.substrate_amount)} mol"',
        f'volume = "{q(process.volume)} L"',
        f"reagent = {_toml_string(process.reagent)}",
        f"equivalents = {q(process.equivalents)}",
        f'dosing_time = "{q(process.dosing_time)} s"',
        f'hold_time = "{q(process.hold_time)} s"',
        f'feed_volume = "{q(process.feed_volume)} L"',
        f'temperature = "{q(process.temperature)} K"',
        f"titrant = {_toml_string(process.titrant)}",
        f'titrant_concentration = "{q(process.titrant_concentration)} mol/L"',
        f"start_adjustment = {_toml_string(process.start_adjustment)}",
    ]
    if process.opposite_titrant is not None:
        lines += [f"opposite_titrant = {_toml_string(process.opposite_titrant)}",
                  f'opposite_titrant_concentration = "{q(process.opposite_titrant_concentration)} mol/L"']
    for key in ("start_acid", "start_base"):
        if getattr(process, key) is not None:
            lines.append(f"{key} = {_toml_string(getattr(process, key))}")
    if process.moiety:
        lines.append(f"moiety = {_toml_string(process.moiety)}")
    if process.extra_charges:
        lines += ["", "[process.initial]"]
        lines += [f'{_toml_string(k)} = "{q(v)} mol"' for k, v in process.extra_charges.items()]
    lines += ["", "[scan]", f"ph_from = {q(process.ph_from)}", f"ph_to = {q(process.ph_to)}",
              f"ph_step = {q(process.ph_step)}", f"level = {q(process.level)}",
              f"ph_tolerance = {q(process.ph_tolerance)}", f"draws = {process.n_draws}",
              f"seed = {process.seed}"]
    if process.second_factor is not None:
        f = process.second_factor
        unit = {None: "eq", "temperature": "K", "time": "s"}[FACTOR_KINDS[f.kind].dimension]
        values = ", ".join(f'"{q(v)} {unit}"' for v in f.values)
        lines += ["", "[scan.second_factor]", f"kind = {_toml_string(f.kind)}", f"values = [{values}]"]
    for spec in process.specifications:
        lines += ["", "[[specification]]"]
        if spec.label:
            lines.append(f"label = {_toml_string(spec.label)}")
        lines.append(f"outcome = {_toml_string(spec.kind)}")
        lines.append("species = [" + ", ".join(_toml_string(s) for s in spec.species) + "]")
        if spec.per:
            lines.append("per = [" + ", ".join(_toml_string(s) for s in spec.per) + "]")
        pct = " %" if OUTCOME_KINDS[spec.kind].unit == "%" else ""
        lines.append(f'rule = "{spec.operator} {q(spec.limit)}{pct}"')
    return "\n".join(lines) + "\n"
