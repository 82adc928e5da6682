"""Build a :class:`~speciakin.data.campaign.Campaign` from a workbook or CSV folder.

All problems are gathered in one pass (:class:`speciakin.errors.ProblemCollector`);
:func:`load_campaign` raises :class:`speciakin.errors.DataError` listing every
error, and keeps warnings in ``Campaign.problems``.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from speciakin import units
from speciakin.chemistry.model import Dose, PhControl, Run, TemperatureProfile, Withdrawal
from speciakin.data.campaign import (NOT_MODELLED, NOT_MODELLED_WORDS, Campaign, CampaignRun, Compound, HplcData,
                                     TitrantLog, basis_of)
from speciakin.data.consistency import run_problems
from speciakin.data.validate import campaign_warnings, model_problems
from speciakin.data.clock import convert_clock_cells
from speciakin.data.columns import (EQUIVALENTS, SheetColumns, column_numbers, column_texts, match_columns,
                                    moles_per_gram, optional_float)
from speciakin.data.import_hplc import empty_hplc, read_hplc
from speciakin.data.import_logs import read_dosing, read_probe, read_titrant
from speciakin.data.run_control import cell_locator, control_fields, read_control_columns
from speciakin.data.reader import (RawTable, SourceFile, column_letter, numeric_column, read_csv_folder,
                                   read_workbook)
from speciakin.data.sheets import (INITIAL_PREFIX, PH_MODE_WORDS, RENAMED_SHEETS, SHEETS, normalise_name,
                                   sheet_by_name)
from speciakin.errors import DataError, Location, ProblemCollector

__all__ = ["load_campaign", "import_campaign", "find_sources"]


#: Spreadsheet formats that are not read, with what to do instead.
_OTHER_BOOKS = {
    ".xls": "this is an old Excel 97-2003 (.xls) workbook; open it and save it as .xlsx",
    ".xlsm": "macro-enabled workbooks (.xlsm) are not read; save a copy as .xlsx",
    ".xlsb": "binary workbooks (.xlsb) are not read; save a copy as .xlsx",
    ".ods": "OpenDocument spreadsheets (.ods) are not read; save a copy as .xlsx",
    ".numbers": "Numbers files are not read; export the workbook as .xlsx",
}


def find_sources(path: str | Path) -> tuple[dict[str, RawTable], list[SourceFile]]:
    """Read the campaign's tables from a folder (one .xlsx or a csv/ folder), a
    workbook file, or a folder of CSV files.

    Raises
    ------
    DataError
        When nothing readable is found or the choice is ambiguous.
    """
    p = Path(path)
    if p.is_file():
        if p.suffix.lower() == ".xlsx":
            tables, src = read_workbook(p)
            return tables, [src]
        if p.suffix.lower() == ".csv":
            return read_csv_folder(p.parent)
        if p.suffix.lower() in _OTHER_BOOKS:
            raise DataError(_OTHER_BOOKS[p.suffix.lower()], Location(file=str(p)), p.suffix,
                            "an .xlsx workbook (or a folder of CSV files)")
        raise DataError("not a campaign workbook", Location(file=str(p)), p.suffix,
                        "an .xlsx workbook, a campaign folder or a folder of CSV files")
    if not p.is_dir():
        raise DataError("campaign not found", Location(file=str(p)), expected="an existing folder or .xlsx file")
    books = sorted(q for q in p.glob("*.xlsx") if not q.name.startswith(("~$", ".")))
    if len(books) > 1:
        raise DataError("the campaign folder holds several workbooks", Location(file=str(p)),
                        ", ".join(q.name for q in books), "exactly one .xlsx workbook (or a csv/ folder)")
    if books:
        tables, src = read_workbook(books[0])
        return tables, [src]
    for folder in (p / "csv", p):
        if folder.is_dir() and any(folder.glob("*.csv")):
            return read_csv_folder(folder)
    others = sorted(q.name for q in p.iterdir() if q.suffix.lower() in _OTHER_BOOKS)
    if others:
        raise DataError(_OTHER_BOOKS[Path(others[0]).suffix.lower()], Location(file=str(p / others[0])),
                        ", ".join(others), "an .xlsx workbook (or a csv/ folder)")
    raise DataError("no campaign workbook or CSV files found", Location(file=str(p)),
                    expected="one .xlsx workbook, or a csv/ folder with one CSV file per sheet")


def import_campaign(path: str | Path, collector: ProblemCollector) -> Campaign | None:
    """Import a campaign, recording every problem in ``collector``.

    Returns None when errors prevent building the campaign; warnings and
    errors are left in ``collector`` either way.
    """
    tables, sources = find_sources(path)
    c = collector
    found: dict[str, RawTable] = {}
    renamed: list[tuple] = []
    for name, table in tables.items():
        spec = sheet_by_name(name)
        if spec is None:
            new = RENAMED_SHEETS.get(normalise_name(name))
            if new is not None:  # reported with the sheets' own findings, below
                renamed.append((f"sheet '{name}' was renamed to '{new}'", Location(file=table.file, sheet=name),
                                name, f"a sheet named '{new}' (CSV file {SHEETS['dosing'].csv_name}); rename it",
                                "renamed_sheet"))
            continue
        if spec.key in found:
            c.error("sheet appears twice", Location(file=table.file, sheet=name), name, "each sheet once",
                    code="duplicate_sheet")
            continue
        found[spec.key] = table
    any_file = sources[0].path if sources else str(path)
    for spec in SHEETS.values():
        if spec.required and spec.key not in found:
            c.error("required sheet is missing", Location(file=any_file, sheet=spec.title), None,
                    f"a sheet named '{spec.title}'" + (f" (or {spec.csv_name})" if any_file.endswith(".csv")
                                                     else ""), code="missing_sheet")
    for table in found.values():
        table_notes(table, c)
    if c.has_errors:
        return None

    matched: dict[str, SheetColumns] = {key: match_columns(found[key], SHEETS[key], c, open_extra=key == "hplc")
                                    for key in found}
    for message, loc, value, expected, code in renamed:
        c.error(message, loc, value, expected, code=code)
    convert_clock_cells(matched, c)  # clock times and durations -> elapsed time (docs/data.md)
    runs_cols = matched["runs"]
    listed = _read_compounds(matched["compounds"], c)
    compounds = [x for x in listed if x.modelled]
    run_rows = _read_runs(runs_cols, c, {x.molecule: x.molar_mass for x in compounds if x.molar_mass})
    known = {r["name"]: r["row"] for r in run_rows}
    hplc_cols = matched["hplc"]
    hplc = read_hplc(hplc_cols, c, known, {x.name: x for x in listed})
    molar_masses = {x.molecule: x.molar_mass for x in compounds if x.molar_mass}
    substrate = next((name.strip()[len(INITIAL_PREFIX):].strip() for _, name, _ in runs_cols.extra
                      if (normalise_name(name) + " ").startswith(INITIAL_PREFIX)), None) or None
    dosing = read_dosing(matched["dosing"], c, known, molar_masses, {r["name"]: r["charges"] for r in run_rows},
                         substrate) if "dosing" in found else {}
    probe = read_probe(matched["probe"], c, known) if "probe" in found else {}
    conc = {r["name"]: r["titrant_concentration"] for r in run_rows}
    titrant = read_titrant(matched["titrant"], c, known, conc) if "titrant" in found else {}

    runs: list[CampaignRun] = []
    for r in run_rows:
        built = _build_run(r, hplc.get(r["name"]), dosing.get(r["name"], ()), probe.get(r["name"], {}),
                           titrant.get(r["name"]), runs_cols, c)
        if built is not None:
            runs.append(built)
    for table in found.values():
        comma_note(table, c)
        percent_note(table, c)
    if c.has_errors:
        return None
    sheets_info = {key: {"file": t.file, "sheet": t.sheet,
                         "columns": {k: matched[key].label(k) for k in matched[key].found}}
                   for key, t in found.items()}
    runs_table = runs_cols.table
    sheets_info["runs"]["columns"].update(
        {normalise_name(name): f"{column_letter(i)} ({runs_table.headers[i]})" for i, name, _ in runs_cols.extra})
    all_kinds = np.concatenate([r.hplc.kind for r in runs]) if runs else np.array([], dtype=object)
    campaign = Campaign(
        runs=tuple(runs), compounds=tuple(compounds), other_compounds=tuple(x for x in listed if not x.modelled),
        provenance=tuple(sources), problems=(),
        source=str(path), basis=basis_of(all_kinds),
        layout="long" if hplc_cols.index("compound") is not None else "wide",
        extra={"sheets": sheets_info},
    )
    if "dosing" in matched and matched["dosing"].unit("amount") == EQUIVALENTS:
        campaign.extra["equivalents_of"] = substrate   # checked against the model's substrate (validate.py)
    run_problems(campaign, c)
    return None if c.has_errors else campaign


def load_campaign(path: str | Path, model=None) -> Campaign:
    """Import a campaign folder, workbook or CSV folder.

    Parameters
    ----------
    path
        A campaign folder (holding one .xlsx workbook or a ``csv/`` folder), a
        workbook file, or a folder of CSV files (one per sheet).
    model
        Optional :class:`speciakin.chemistry.model.Model`: names of
        compounds, species and titrants are then checked against it, so that
        a mismatch is reported at its workbook cell (not later by the
        simulator at a model-file key).

    Returns
    -------
    Campaign
        Runs, HPLC observations and logs in internal units; warnings in
        ``problems``.

    Raises
    ------
    DataError
        Listing every error found, each with file, sheet, row and column.
    """
    c = ProblemCollector()
    campaign = import_campaign(path, c)
    c.raise_if_errors(DataError)
    units_map = model_problems(campaign, model, c) if model is not None else None
    c.raise_if_errors(DataError)
    campaign_warnings(campaign, c, units_map)
    return replace(campaign, problems=tuple(c.warnings))


# --------------------------------------------------------------------- files

def table_notes(table: RawTable, c: ProblemCollector) -> None:
    """Report what the reader found about a whole sheet: encoding notes, shifted
    cells, formulas without a stored result (one error per column)."""
    for severity, message, code in table.notes:
        loc = Location(file=table.file, sheet=table.sheet)
        if severity == "warning":
            c.warning(message, loc, code=code)
        else:
            c.error(message, loc, expected="one cell per header column", code=code)
    by_column: dict[int, list[tuple[int, str]]] = {}
    for row, col, formula in table.formula_cells:
        by_column.setdefault(col, []).append((row, formula))
    for col, cells in sorted(by_column.items()):
        row, formula = cells[0]
        more = f" ({len(cells)} such cells in this column)" if len(cells) > 1 else ""
        header = table.headers[col] if col < len(table.headers) else ""
        c.error(f"formula has no stored result, so its value is unknown{more}",
                Location(file=table.file, sheet=table.sheet, row=row,
                         column=f"{column_letter(col)} ({header})" if header else column_letter(col)),
                "=" + formula, "a value: open the workbook in Excel or LibreOffice and save it (this stores the "
                "results), or replace the formulas by their values (copy, paste values)",
                code="formula_without_value")


def comma_note(table: RawTable, c: ProblemCollector) -> None:
    """One note per sheet for numbers written with a decimal comma."""
    if not table.comma_cells:
        return
    row, col, text = min(table.comma_cells, key=lambda cell: cell[:2])
    n = len(table.comma_cells)
    first = f"the first, '{text.strip()}', as {text.strip().replace(',', '.')}"
    c.warning(f"{n} number(s) written with a decimal comma were read as decimals ({first})",
              table.location(row, col), None, "decimal points, or decimal commas throughout", code="decimal_comma")


def percent_note(table: RawTable, c: ProblemCollector) -> None:
    """One note per sheet for numbers in cells formatted as percentages: area% values are read as
    the percentage shown (the workbook stores 40.59 % as 0.4059), any other number as stored."""
    if table.percent_read:
        row, col, stored = min(table.percent_read)
        n = len(table.percent_read)
        c.warning(f"{n} area% value(s) in cells formatted as percentages were read as the percentages shown "
                  f"(the first, stored as {stored:g} and shown as {100.0 * stored:g} %, as {100.0 * stored:g} area%)",
                  table.location(row, col), stored, "area% written as plain numbers (e.g. 40.59)",
                  code="percent_format")
    converted = {(row, col) for row, col, _ in table.percent_read}
    others = sorted(cell for cell in table.percent_cells - converted
                    if 1 < cell[0] and cell[1] < len(table.headers) and table.headers[cell[1]])
    if others:
        row, col = others[0]
        stored = next((r[col] for r, number in zip(table.rows, table.row_numbers) if number == row), None)
        shown = f", shown as {100.0 * stored:g} %" if isinstance(stored, (int, float)) else ""
        c.warning(f"{len(others)} number(s) in cells formatted as percentages were read as stored (the first, "
                  f"{stored!r}{shown}); only area% values are read as the percentage shown",
                  table.location(row, col), stored, "numbers in cells with a number format, not a percentage",
                  code="percent_format")


# --------------------------------------------------------------------- sheets

def _initial_factor(species: str, unit_text: str | None, header: str, molar_masses: dict[str, float], loc,
                    c: ProblemCollector) -> float | None:
    """Factor from an initial-amount column's numbers to [mol]: an amount unit,
    or a mass unit divided by the molar mass [g/mol] of the Compounds sheet."""
    try:
        return units.lookup(unit_text or "", "amount").factor
    except KeyError:
        pass
    try:
        mass = units.lookup(unit_text or "", "mass")
    except KeyError:
        c.error("unknown unit in header" if unit_text else "header has no unit", loc, unit_text or header,
                "one of: " + ", ".join(units.DIMENSIONS["amount"] + units.DIMENSIONS["mass"]),
                code="unknown_unit" if unit_text else "missing_unit")
        return None
    per_gram = moles_per_gram(species, molar_masses, loc, c, unit_text)
    return None if per_gram is None else mass.factor * per_gram


def _read_runs(cols: SheetColumns, c: ProblemCollector, molar_masses: dict[str, float] | None = None) -> list[dict]:
    t = cols.table
    names = column_texts(cols, "run")
    modes = column_texts(cols, "ph_mode")
    control = read_control_columns(cols, c)
    notes = column_texts(cols, "note")
    setpoint = column_numbers(cols, "setpoint", c, "pH setpoint", minimum=0.0, maximum=14.0)
    temp = column_numbers(cols, "temperature", c, "temperature")
    volume = column_numbers(cols, "start_volume", c, "start volume", minimum=0.0, blank_ok=False)
    duration = column_numbers(cols, "duration", c, "duration", minimum=0.0)
    sample_volume = column_numbers(cols, "sample_volume", c, "sample volume", minimum=0.0)
    charges: list[tuple[str, np.ndarray]] = []
    for i, name, unit_text in cols.extra:
        n = normalise_name(name)
        if not (n + " ").startswith(INITIAL_PREFIX):
            continue
        species = name.strip()[len(INITIAL_PREFIX):].strip()
        loc = t.location(1, i)
        if not species:
            c.error("initial-amount column does not name a species", loc, t.headers[i], "e.g. 'initial S [mmol]'",
                    code="invalid_header")
            continue
        factor = _initial_factor(species, unit_text, t.headers[i], molar_masses or {}, loc, c)
        if factor is None:
            continue
        charges.append((species, numeric_column(t, i, c, what=f"initial amount of {species}", factor=factor,
                                                minimum=0.0)))
    out: list[dict] = []
    first: dict[str, int] = {}
    temp_col = cols.index("temperature")
    for k, row in enumerate(t.row_numbers.tolist()):
        name = names[k]
        if not name:
            c.error("run identifier is missing", t.location(row, cols.index("run")), None, "a name such as R01",
                    code="missing_value")
            continue
        if name in first:
            c.error(f"run identifier used twice (first in row {first[name]})", t.location(row, cols.index("run")),
                    name, "a unique identifier", code="duplicate_run")
            continue
        first[name] = row
        mode = PH_MODE_WORDS.get(normalise_name(modes[k])) if cols.index("ph_mode") is not None else None
        if mode is None and cols.index("ph_mode") is not None:
            c.error("unknown pH mode", t.location(row, cols.index("ph_mode")), modes[k] or None,
                    "held, logged or free", code="invalid_choice")
        if mode == "held" and not np.isfinite(setpoint[k]):
            idx = cols.index("setpoint")
            c.error("held-pH run without a setpoint", t.location(row, idx if idx is not None else cols.index("ph_mode")),
                    None, "a pH setpoint between 0 and 14", code="missing_setpoint")
        if np.isfinite(temp[k]) and temp[k] <= 0:
            c.error("temperature is below absolute zero", t.location(row, temp_col), temp[k], "a temperature > 0 K",
                    code="out_of_range")
        fields, added = control_fields({**control[k], "name": name, "row": row}, mode,
                                       cell_locator(cols, row), c)
        initial = {sp: float(v[k]) for sp, v in charges if np.isfinite(v[k])}
        for ion, amount in added.items():
            initial[ion] = initial.get(ion, 0.0) + amount
        out.append({
            "name": name, "row": row, "mode": mode, "setpoint": optional_float(setpoint[k]),
            "control": fields, "titrant": control[k]["titrant"],
            "titrant_concentration": control[k]["titrant_concentration"],
            "temperature": optional_float(temp[k]), "volume": optional_float(volume[k]), "duration": optional_float(duration[k]),
            "sample_volume": optional_float(sample_volume[k]), "note": notes[k],
            "charges": initial,
        })
    return out


def _read_compounds(cols: SheetColumns, c: ProblemCollector) -> list[Compound]:
    t = cols.table
    names = column_texts(cols, "compound")
    molecules = column_texts(cols, "molecule")
    rrf = column_numbers(cols, "rrf", c, "RRF", minimum=0.0)
    mm = column_numbers(cols, "molar_mass", c, "molar mass", minimum=0.0)
    loq = column_numbers(cols, "loq", c, "LOQ", minimum=0.0)
    su = column_numbers(cols, "substrate_units", c, "substrate units", minimum=0.0)
    out: list[Compound] = []
    first: dict[str, int] = {}
    for k, row in enumerate(t.row_numbers.tolist()):
        if not names[k]:
            c.error("compound name is missing", t.location(row, cols.index("compound")), None, "a compound name",
                    code="missing_value")
            continue
        if names[k] in first:
            c.error(f"compound listed twice (first in row {first[names[k]]})", t.location(row, cols.index("compound")),
                    names[k], "each compound once", code="duplicate_compound")
            continue
        first[names[k]] = row
        modelled = normalise_name(molecules[k]) not in NOT_MODELLED_WORDS
        if not molecules[k] and cols.index("molecule") is not None:
            c.error("compound is not mapped to a model molecule", t.location(row, cols.index("molecule")), None,
                    f"the name of a molecule of the model file, or '{NOT_MODELLED}' for a peak the model does not "
                    "describe (it then counts in its samples' totals)", code="unmapped_compound")
        if rrf[k] == 0:
            c.error("RRF must be positive", t.location(row, cols.index("rrf")), 0, "a number > 0", code="out_of_range")
        out.append(Compound(names[k], molecules[k] if modelled else "", float(rrf[k]) if rrf[k] > 0 else 1.0,
                            optional_float(mm[k]), optional_float(loq[k]), optional_float(su[k]), row,
                            modelled=modelled))
    return out


def _build_run(r: dict, hplc: HplcData | None, dosing: tuple[tuple[Dose, int], ...], probe: dict,
               titrant: TitrantLog | None, cols: SheetColumns, c: ProblemCollector) -> CampaignRun | None:
    t = cols.table
    row = r["row"]
    hplc = hplc if hplc is not None else empty_hplc()
    ph_log = probe.get("ph")
    temp_log = probe.get("temperature")
    mode = r["mode"]
    if mode is None:
        return None
    if mode == "held":
        control = PhControl("held", r["setpoint"], **r["control"])
    elif mode == "logged":
        if ph_log is None:
            c.error("logged-pH run has no pH readings in the Probe log", t.location(row, cols.index("ph_mode")),
                    "logged", "pH readings for this run in the 'Probe log' sheet", code="missing_ph_log")
            return None
        order = np.argsort(ph_log.time, kind="stable")
        control = PhControl("logged", r["setpoint"], log_times=tuple(ph_log.time[order].tolist()),
                            log_ph=tuple(ph_log.value[order].tolist()), **r["control"])
    else:
        control = PhControl("free", r["setpoint"])
    if temp_log is not None:
        order = np.argsort(temp_log.time, kind="stable")
        temperature = TemperatureProfile(tuple(temp_log.time[order].tolist()),
                                         tuple(temp_log.value[order].tolist()))
    elif r["temperature"] is not None:
        temperature = TemperatureProfile((0.0,), (r["temperature"],))
    else:
        idx = cols.index("temperature")
        c.error("run has no temperature", t.location(row, idx) if idx is not None else t.location(row),
                None, "a temperature in the Runs sheet or temperature readings in the Probe log",
                code="missing_value")
        return None
    if r["volume"] is None:
        return None
    if r["duration"] is not None:
        end = r["duration"]
    else:
        candidates = [hplc.time.max()] if len(hplc) else []
        candidates += [x.time.max() for x in (ph_log, temp_log) if x is not None and len(x)]
        candidates += [titrant.time.max()] if titrant is not None and titrant.time.size else []
        end = float(max(candidates)) if candidates else 0.0
    withdrawals: tuple[Withdrawal, ...] = ()
    if r["sample_volume"]:
        withdrawals = tuple(Withdrawal(float(x), r["sample_volume"]) for x in hplc.sample_times)
    recipe = Run(name=r["name"], charges=dict(r["charges"]), volume=r["volume"], temperature=temperature,
                 ph=control, end_time=float(end), doses=tuple(d for d, _ in dosing), withdrawals=withdrawals,
                 note=r["note"])
    return CampaignRun(recipe, hplc, titrant, ph_log, temp_log, row, tuple(k for _, k in dosing))
