"""The pH control of each run in the Runs sheet: titrants and the start adjustment.

The Runs columns ``titrant ion``, ``titrant concentration``, ``opposite
titrant ion``, ``opposite titrant concentration``, ``start adjustment``,
``start acid ion`` / ``start base ion`` and ``start acid amount`` /
``start base amount`` state what the ``ph`` table of a model-file run states
(docs/model-file.md, "Titrants and the start of a run"); this module turns
them into the fields of :class:`speciakin.chemistry.model.PhControl` and
reports every inconsistent cell.  With a model, :func:`control_model_problems`
checks the ions against it and simulates each controlled run once at the
model's start values, so that a set point the titrants cannot reach or hold is
reported at its workbook cell, never later as a negative volume.
"""

from __future__ import annotations

import numpy as np

from speciakin.data.columns import SheetColumns, column_numbers, column_texts, optional_float
from speciakin.data.sheets import SHEETS, START_ADJUSTMENT_WORDS, normalise_name
from speciakin.errors import InputError, Location, ProblemCollector

__all__ = ["read_control_columns", "control_fields", "control_model_problems", "cell_locator"]

#: (ion column, amount column, sign) of the two sides of a start adjustment.
_START_SIDES = (("start_acid", "start_acid_amount", -1), ("start_base", "start_base_amount", 1))


def cell_locator(cols: SheetColumns, row: int):
    """``locate(column_key) -> Location`` of a cell of Runs row ``row``; a column
    missing from the sheet is named by its template header."""
    def locate(key: str) -> Location:
        i = cols.index(key)
        if i is not None:
            return cols.table.location(row, i)
        loc = cols.table.location(row)
        return Location(file=loc.file, sheet=loc.sheet, row=row, column=f"{SHEETS['runs'].column(key).header} "
                                                                          "(not in the sheet)")
    return locate


def read_control_columns(cols: SheetColumns, c: ProblemCollector) -> list[dict]:
    """Per row of the Runs sheet: the pH-control cells in internal units.

    Returns
    -------
    list of dict
        Keys ``titrant``, ``titrant_concentration`` [mol/L],
        ``opposite_titrant``, ``opposite_titrant_concentration`` [mol/L],
        ``start_adjustment`` (a key of ``START_ADJUSTMENTS``, None when blank
        or unknown), ``start_word`` (the cell as written), ``start_acid``,
        ``start_base``, ``start_acid_amount``, ``start_base_amount`` [mol]
        (None when blank).  Negative numbers and unknown words are reported
        to ``c`` at their cells.
    """
    t = cols.table
    texts = {k: column_texts(cols, k) for k in ("titrant", "opposite_titrant", "start_adjustment",
                                                "start_acid", "start_base")}
    numbers = {
        "titrant_concentration": column_numbers(cols, "titrant_concentration", c, "titrant concentration",
                                                minimum=0.0),
        "opposite_titrant_concentration": column_numbers(cols, "opposite_titrant_concentration", c,
                                                         "opposite titrant concentration", minimum=0.0),
        "start_acid_amount": column_numbers(cols, "start_acid_amount", c, "start acid amount", minimum=0.0),
        "start_base_amount": column_numbers(cols, "start_base_amount", c, "start base amount", minimum=0.0),
    }
    out = []
    for k, row in enumerate(t.row_numbers.tolist()):
        word = texts["start_adjustment"][k]
        start = START_ADJUSTMENT_WORDS.get(normalise_name(word)) if word else None
        if word and start is None:
            c.error("unknown start adjustment", t.location(row, cols.index("start_adjustment")), word,
                    "one of: " + ", ".join(START_ADJUSTMENT_WORDS) + " (blank = computed)", code="invalid_choice")
        fields = {key: (texts[key][k] or None) for key in ("titrant", "opposite_titrant", "start_acid",
                                                            "start_base")}
        fields.update({key: optional_float(v[k]) for key, v in numbers.items()})
        fields.update(start_adjustment=start, start_word=word)
        out.append(fields)
    return out


def control_fields(r: dict, mode: str | None, locate, c: ProblemCollector) -> tuple[dict, dict[str, float]]:
    """PhControl keyword fields of one run and the amounts its stated start adjustment adds.

    Parameters
    ----------
    r
        The run's row: its :func:`read_control_columns` fields, ``name`` and ``row``.
    mode
        The run's pH mode (held, logged, free or None when unknown).
    locate
        ``locate(column_key) -> Location`` of this run's cell.

    Returns
    -------
    (fields, added)
        ``fields``: titrant, opposite titrant (with concentrations), start
        adjustment and the start ions for ``PhControl`` (empty for a free or
        unknown mode); ``added``: ion name -> amount [mol] of a ``given``
        adjustment, to add to the run's initial amounts.
    """
    if mode not in ("held", "logged"):
        return {}, {}
    name = r["name"]
    if r["opposite_titrant"] and not r["titrant"]:
        c.error(f"run {name} names an opposite titrant but no titrant", locate("titrant"), None,
                "the titrant ion (the opposite titrant is dosed only where the titrant would be taken out)",
                code="missing_titrant")
    for key, what in (("titrant", "titrant"), ("opposite_titrant", "opposite titrant")):
        ion, conc = r[key], r[f"{key}_concentration"]
        if ion and conc is None and not (key == "titrant" and mode == "held"):  # held: consistency.py says it
            c.error(f"the {what} {ion} of run {name} has no concentration", locate(f"{key}_concentration"), None,
                    f"the concentration of the {what} solution (> 0) [mol/L]", code="missing_value")
        elif ion and conc is not None and conc <= 0:
            if key != "titrant" or mode != "held":
                c.error(f"the {what} concentration of run {name} must be positive", locate(f"{key}_concentration"),
                        conc, "a concentration > 0 [mol/L]", code="out_of_range")
        elif conc is not None and not ion:
            c.error(f"run {name} gives a {what} concentration but no {what} ion", locate(key), None,
                    f"the {what} ion, as named in the model file, or a blank concentration", code="missing_value")
    start = r["start_adjustment"]
    stated = [(ion_key, amount_key) for ion_key, amount_key, _ in _START_SIDES if r[amount_key] is not None]
    if start is None and not r["start_word"]:
        start = "given" if stated else "computed"
    added: dict[str, float] = {}
    for ion_key, amount_key in stated:
        side = ion_key.split("_")[1]
        if start != "given":
            c.error(f"run {name} states a start {side} amount but its start adjustment is {start or r['start_word']}",
                    locate(amount_key), f"{r[amount_key] * 1e3:g} mmol",
                    "start adjustment 'given' (or a blank amount: 'computed' finds it from the charge balance)",
                    code="invalid_choice")
        elif not r[ion_key]:
            c.error(f"run {name} states a start {side} amount without its ion", locate(ion_key), None,
                    f"the ion of the start {side} (e.g. {'Cl-' if side == 'acid' else 'Na+'})", code="missing_value")
        else:
            added[r[ion_key]] = added.get(r[ion_key], 0.0) + r[amount_key]
    if start == "titrant" and not r["titrant"]:
        c.error(f"run {name} reaches its start pH by titrant but names no titrant", locate("titrant"), None,
                "the titrant ion, or start adjustment 'computed'", code="missing_titrant")
    fields = {
        "titrant": r["titrant"], "titrant_concentration": r["titrant_concentration"],
        "opposite_titrant": r["opposite_titrant"],
        "opposite_titrant_concentration": r["opposite_titrant_concentration"],
        "start_adjustment": start or "computed", "start_acid": r["start_acid"], "start_base": r["start_base"],
    }
    return fields, added


def _ion_problems(campaign, model, c: ProblemCollector) -> None:
    """Titrant, opposite titrant and start ions of every controlled run against the model's ions."""
    charges = {i.name: i.charge for i in model.ions}
    listing = ", ".join(sorted(charges)) or "(the model declares no ions)"
    for run in campaign.runs:
        ph = run.recipe.ph
        if ph.mode not in ("held", "logged"):
            continue
        for key in ("titrant", "opposite_titrant"):
            ion = getattr(ph, key)
            if ion and not charges.get(ion):
                c.error(f"{key.replace('_', ' ')} of run {run.name} is not a charged ion of the model",
                        campaign.locate("runs", run.row, key), ion, "one of: " + listing + _ion_hint(ion, charges),
                        code="unknown_species")
        a, b = charges.get(ph.titrant or ""), charges.get(ph.opposite_titrant or "")
        if a and b and a * b > 0:
            c.error(f"the opposite titrant of run {run.name} has the same charge sign as its titrant",
                    campaign.locate("runs", run.row, "opposite_titrant"), ph.opposite_titrant,
                    "an ion of the other sign (an acid beside a base titrant, or a base beside an acid)",
                    code="invalid_choice")
        for ion_key, _, sign in _START_SIDES:
            ion = getattr(ph, ion_key)
            if ion and not (charges.get(ion, 0) * sign > 0):
                c.error(f"{ion_key.replace('_', ' ')} of run {run.name} is not a "
                        f"{'negative' if sign < 0 else 'positive'} ion of the model",
                        campaign.locate("runs", run.row, ion_key), ion,
                        "one of: " + (", ".join(n for n, z in charges.items() if z * sign > 0) or "(none)"),
                        code="unknown_species")


def _reach_problems(campaign, model, c: ProblemCollector) -> None:
    """Simulate every controlled run once at the model's start values; a set
    point the titrants cannot reach or hold is an error at its Runs cell."""
    from speciakin.simulation import compile_model, compile_runs, default_times, simulate_batch
    from speciakin.simulation.api import PH_CONTROL_STATUS, ph_control_error
    from speciakin.simulation.status import STATUS_TITRANT_SIGN

    runs = [run for run in campaign.runs if run.recipe.ph.controlled]
    if not runs:
        return
    try:
        compiled = compile_model(model)
        compiled_runs = compile_runs(compiled, [run.recipe for run in runs],
                                     [default_times(run.recipe, 3) for run in runs])
    except InputError:  # the model's or the runs' own problems are reported by their checks
        return
    # free-pH runs of the campaign are simulated next (the fit): the kernel with that path serves both
    free = any(run.recipe.ph.mode == "free" for run in campaign.runs)
    res = simulate_batch(compiled, compiled_runs, compiled.nominal[None, :], parallel=False, with_free_ph=free)
    for j in np.flatnonzero(np.isin(res.status[0], PH_CONTROL_STATUS)):
        run, code = runs[j], int(res.status[0, j])
        ph, time = run.recipe.ph, float(res.failure_time[0, j])
        err = ph_control_error(compiled, run.recipe, code, time)
        problem = err.problems[0]
        column = ("opposite_titrant" if code == STATUS_TITRANT_SIGN and not (time <= 0 and ph.start_adjustment
                                                                               == "titrant")
                  else "start_adjustment")
        present = campaign.extra.get("sheets", {}).get("runs", {}).get("columns", {})
        cell = campaign.locate("runs", run.row, column if column in present else "titrant")
        where = f"set point pH {ph.setpoint:g}" if ph.mode == "held" else "the logged pH"
        c.error(problem.message.replace(f"run '{run.name}'", f"run {run.name}", 1)
                + " (simulated with the model's start values)", cell,
                ph.setpoint if ph.mode == "held" else where, problem.expected, code="unreachable_ph")


def control_model_problems(campaign, model, c: ProblemCollector) -> None:
    """Errors of the runs' pH control against ``model``: unknown or wrongly
    signed ions, then (when those are fine) set points the titrants cannot
    reach or hold."""
    _ion_problems(campaign, model, c)
    if not c.has_errors:
        _reach_problems(campaign, model, c)


def _ion_hint(written: str, charges: dict[str, int]) -> str:
    """' (the ion the titrant brings: Na+ for NaOH)' when ``written`` names a reagent (NaOH, HCl,
    KOH) holding exactly one of the model's charged ions, else ''."""
    found = [ion for ion, z in charges.items() if z and (element := ion.rstrip("+-0123456789"))
             and element in written and written != ion]
    return f" (the ion the titrant brings: {found[0]} for {written})" if len(found) == 1 else ""
