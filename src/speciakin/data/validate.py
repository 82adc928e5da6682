"""Checks of an imported campaign: plausibility warnings and model consistency.

Thresholds (documented in docs/data.md; all "common practice" for HPLC
time-course work, not taken from a standard):

=================================  ============================================
area% sum of one sample            100 +- :data:`AREA_PERCENT_TOLERANCE` (3)
mass balance drift                 > :data:`MASS_BALANCE_TOLERANCE` (5 %) of
                                   the first sample
gap in the pH log                  longer than :data:`GAP_FACTOR` (10) times
                                   the median interval and :data:`GAP_MINIMUM`
                                   (300 s)
logged pH vs setpoint              > :data:`SETPOINT_TOLERANCE` (0.5 pH units)
=================================  ============================================
"""

from __future__ import annotations

import numpy as np

from speciakin.data.campaign import Campaign, CampaignRun, TimeSeries
from speciakin.data.run_control import control_model_problems
from speciakin.data.sheets import INITIAL_PREFIX, normalise_name
from speciakin.errors import Location, ProblemCollector

__all__ = [
    "AREA_PERCENT_TOLERANCE", "MASS_BALANCE_TOLERANCE", "GAP_FACTOR", "GAP_MINIMUM",
    "SETPOINT_TOLERANCE", "campaign_warnings", "model_problems", "mass_balance",
]

AREA_PERCENT_TOLERANCE = 3.0   # [area%] common practice
MASS_BALANCE_TOLERANCE = 0.05  # [-] relative drift, common practice
GAP_FACTOR = 10.0              # [-] gap / median interval
GAP_MINIMUM = 300.0            # [s]
SETPOINT_TOLERANCE = 0.5       # [pH units] common practice for a pH-stat


def _loc(campaign: Campaign, sheet: str, row: int | None, column: str | None) -> Location:
    return campaign.locate(sheet, row, column)


def _first_decrease(time: np.ndarray) -> tuple[int, int]:
    """Index of the first value below the running maximum, and how many there are."""
    if time.size < 2:
        return -1, 0
    running = np.maximum.accumulate(time)
    bad = np.flatnonzero(time[1:] < running[:-1]) + 1
    return (int(bad[0]), int(bad.size)) if bad.size else (-1, 0)


def _log_order(campaign: Campaign, run: CampaignRun, log: TimeSeries | None, sheet: str, what: str,
               c: ProblemCollector) -> None:
    if log is None:
        return
    k, n = _first_decrease(log.time)
    if k >= 0:
        more = f" ({n} readings in all)" if n > 1 else ""
        unit = campaign.time_unit(sheet)
        c.warning(f"{what} times of run {run.name} are not increasing{more}",
                  _loc(campaign, sheet, int(log.rows[k]), "time"), log.time[k] / unit.factor,
                  f"times in increasing order [{unit.symbol}]", code="time_order")


def mass_balance(run: CampaignRun, units_per_molecule: dict[str, float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Relative mass balance of each HPLC sample of a run.

    Sum over compounds of (substrate units x amount), amount = concentration
    [mol/L] or peak area / RRF, divided by the same sum at the first sample.
    Censored values count as 0.  Area% samples are normalised by
    construction and are skipped.

    Parameters
    ----------
    run
        The imported run.
    units_per_molecule
        Substrate cores per model molecule [-].

    Returns
    -------
    times, ratios, first_rows
        Sample times [s], balance relative to the first sample [-], and the
        spreadsheet row of the first value of each sample.

    References
    ----------
    Mass balance as a check of HPLC assay completeness: ICH Q1A(R2) (2003),
    section 2.2.7 ("mass balance" in stress testing).
    """
    h = run.hplc
    use = (h.kind != "area_percent") & np.array([m in units_per_molecule for m in h.molecule], bool)
    if not use.any():
        return np.array([]), np.array([]), np.array([], np.int64)
    times = np.unique(h.time[use])
    totals = np.zeros(times.size)
    rows = np.zeros(times.size, np.int64)
    for j, t in enumerate(times):
        idx = np.flatnonzero(use & (h.time == t))
        v = np.where(h.censored[idx], 0.0, h.value[idx])
        scale = np.where(h.kind[idx] == "area", h.rrf[idx], 1.0)
        u = np.array([units_per_molecule[m] for m in h.molecule[idx]])
        totals[j] = np.sum(u * v / scale)
        rows[j] = int(h.rows[idx].min())
    if totals[0] <= 0:
        return times, np.full(times.size, np.nan), rows
    return times, totals / totals[0], rows


def _substrate_units_from_compounds(campaign: Campaign) -> dict[str, float]:
    return {c.molecule: c.substrate_units for c in campaign.compounds if c.substrate_units is not None}


def campaign_warnings(campaign: Campaign, c: ProblemCollector,
                      units_per_molecule: dict[str, float] | None = None) -> None:
    """Add plausibility warnings of ``campaign`` to ``c`` (see module table)."""
    if units_per_molecule is None:
        units_per_molecule = _substrate_units_from_compounds(campaign)
    area_used = set()
    if not campaign.runs:
        c.warning("the campaign has no runs yet", _loc(campaign, "runs", None, None), None,
                  "at least one row in the Runs sheet", code="no_runs")
    hplc_unit = campaign.time_unit("hplc")  # messages name a time as its cell shows it
    for run in campaign.runs:
        h = run.hplc
        area_used |= {str(x) for x, k in zip(h.compound, h.kind) if k != "concentration"}
        if len(h) == 0:
            c.warning(f"run {run.name} has no HPLC results", _loc(campaign, "runs", run.row, "run"),
                      run.name, "HPLC results for the run", code="no_results")
        k, n = _first_decrease(h.time)
        if k >= 0:
            more = f" ({n} values in all)" if n > 1 else ""
            c.warning(f"HPLC sampling times of run {run.name} are not increasing{more}",
                      _loc(campaign, "hplc", int(h.rows[k]), "time"), h.time[k] / hplc_unit.factor,
                      f"times in increasing order [{hplc_unit.symbol}]", code="time_order")
        seen: dict[tuple[float, str], int] = {}
        repeats: list[tuple[float, str, int, int]] = []
        o = h.other
        times, names, rows = h.time.tolist(), h.compound.tolist(), h.rows.tolist()
        if o is not None:  # the peaks marked not modelled: one value per time too
            times, names, rows = times + o.time.tolist(), names + o.compound.tolist(), rows + o.rows.tolist()
            alone = np.flatnonzero(~np.isin(o.time, h.time))
            if alone.size:
                k = int(alone[0])
                c.warning(f"{o.compound[k]} (not modelled) has a value in run {run.name} at a time no modelled "
                          "compound was sampled: it counts in no sample"
                          + (f"; {alone.size} values in all" if alone.size > 1 else ""),
                          _loc(campaign, "hplc", int(o.rows[k]), "time"), o.time[k] / hplc_unit.factor,
                          f"the time of one of the run's samples [{hplc_unit.symbol}]", code="not_modelled_alone")
        for t, comp, row in zip(times, names, rows):
            if (t, comp) in seen:
                repeats.append((t, comp, row, seen[(t, comp)]))
            else:
                seen[(t, comp)] = row
        if repeats:
            t, comp, row, first = repeats[0]
            more = f"; {len(repeats)} repeated values in all" if len(repeats) > 1 else ""
            c.warning(f"duplicate sample time for {comp} in run {run.name} (also row {first}){more}",
                      _loc(campaign, "hplc", row, "time"), t / hplc_unit.factor,
                      f"one value per compound and time [{hplc_unit.symbol}]",
                      code="duplicate_time")
        late = np.flatnonzero(h.time > run.recipe.end_time)
        if late.size and not run.recipe.withdrawals:  # with withdrawals it is an error (consistency.py)
            k = int(late[0])
            c.warning(f"sample taken after the run ends ({run.recipe.end_time / 60.0:g} min)"
                      + (f"; {late.size} values in all" if late.size > 1 else ""),
                      _loc(campaign, "hplc", int(h.rows[k]), "time"), h.time[k] / hplc_unit.factor,
                      f"a time within the run's duration [{hplc_unit.symbol}]", code="after_end")
        ap = h.kind == "area_percent"
        for t in np.unique(h.time[ap]):
            idx = np.flatnonzero(ap & (h.time == t))
            # every peak of the sample counts, those marked not modelled too
            total = float(np.sum(np.where(h.censored[idx], 0.0, h.value[idx]))) + h.other_share(t)[0]
            if abs(total - 100.0) > AREA_PERCENT_TOLERANCE:
                c.warning(f"area% of run {run.name} at {t / 60.0:g} min sum to {total:.4g}",
                          _loc(campaign, "hplc", int(h.rows[idx].min()),
                               "value" if campaign.layout == "long" else "time"),
                          round(total, 4), f"100 +- {AREA_PERCENT_TOLERANCE:g} area%, every peak of the sample "
                          "listed (one the model does not describe as 'not modelled' in the Compounds sheet)",
                          code="area_sum")
        cens = np.flatnonzero(h.censored & ~np.isfinite(h.loq))
        if cens.size:
            k = int(cens[0])
            c.warning(f"value below the LOQ but no LOQ is known for {h.compound[k]}"
                      + (f" ({cens.size} values in all)" if cens.size > 1 else ""),
                      _loc(campaign, "hplc", int(h.rows[k]), "value" if campaign.layout == "long" else "time"),
                      None, "an LOQ in the Compounds sheet or '<' followed by the limit", code="loq_unknown")
        times, ratio, rows = mass_balance(run, units_per_molecule)
        drift = np.flatnonzero(np.abs(ratio - 1.0) > MASS_BALANCE_TOLERANCE)
        if drift.size:
            k = int(drift[0])
            c.warning(f"mass balance of run {run.name} drifts to {100 * ratio[k]:.1f} % of the first sample "
                      f"at {times[k] / 60.0:g} min", _loc(campaign, "hplc", int(rows[k]), "time"),
                      round(100 * float(ratio[k]), 2), f"100 +- {100 * MASS_BALANCE_TOLERANCE:g} %",
                      code="mass_balance")
        _log_order(campaign, run, run.ph_log, "probe", "pH log", c)
        _log_order(campaign, run, run.temperature_log, "probe", "temperature log", c)
        if run.titrant is not None:
            _log_order(campaign, run, TimeSeries(run.titrant.time, run.titrant.amount, run.titrant.rows),
                       "titrant", "titrant log", c)
        log = run.ph_log
        if log is not None and len(log) > 2:
            t = np.sort(log.time)
            dt = np.diff(t)
            median = float(np.median(dt[dt > 0])) if np.any(dt > 0) else 0.0
            gap = np.flatnonzero(dt > max(GAP_FACTOR * median, GAP_MINIMUM))
            if gap.size:
                k = int(gap[0])
                row = int(log.rows[np.flatnonzero(log.time == t[k + 1])[0]])
                c.warning(f"gap of {dt[k] / 60.0:.3g} min in the pH log of run {run.name}"
                          + (f" ({gap.size} gaps in all)" if gap.size > 1 else ""),
                          _loc(campaign, "probe", row, "time"), t[k + 1] / campaign.time_unit("probe").factor,
                          f"readings at most {GAP_FACTOR:g} x the median interval "
                          f"({median:g} s) apart, or {GAP_MINIMUM / 60:g} min", code="log_gap")
        sp = run.recipe.ph.setpoint
        if log is not None and sp is not None and len(log):
            off = np.flatnonzero(np.abs(log.value - sp) > SETPOINT_TOLERANCE)
            if off.size:
                k = int(off[0])
                c.warning(f"logged pH of run {run.name} is far from the setpoint {sp:g}"
                          + (f" ({off.size} readings in all)" if off.size > 1 else ""),
                          _loc(campaign, "probe", int(log.rows[k]), "ph"), float(log.value[k]),
                          f"within {SETPOINT_TOLERANCE:g} of the setpoint", code="setpoint_deviation")
    if area_used:
        sheet = campaign.extra.get("sheets", {}).get("compounds", {})
        has_rrf = "rrf" in sheet.get("columns", {})
        if not has_rrf:
            c.warning("no RRF column: every RRF is taken as 1", _loc(campaign, "compounds", 1, None), None,
                      "an 'RRF' column for area or area% results", code="rrf_default")


def model_problems(campaign: Campaign, model, c: ProblemCollector) -> dict[str, float]:
    """Errors where the campaign names something the model does not have.

    Returns the substrate units per molecule from the model's moieties (the
    moiety of the first molecule with role ``substrate``), for the mass balance.
    """
    molecules = {m.name for m in model.molecules}
    ions = {i.name for i in model.ions}
    known = molecules | ions
    listing = ", ".join(sorted(molecules))
    for comp in campaign.compounds:
        if comp.molecule and comp.molecule not in molecules:
            c.error(f"compound {comp.name} is mapped to a molecule the model does not have",
                    _loc(campaign, "compounds", comp.row, "molecule"), comp.molecule, "one of: " + listing,
                    code="unknown_molecule")
    equivalents_of = campaign.extra.get("equivalents_of")
    substrates = [m.name for m in model.molecules if m.role == "substrate"]
    if equivalents_of and substrates and equivalents_of not in substrates:
        c.error(f"dosed equivalents refer to {equivalents_of} (the first 'initial' column of the Runs sheet), "
                "which is not the model's substrate", _loc(campaign, "dosing", 1, "amount"), equivalents_of,
                f"the substrate {substrates[0]}'s 'initial' column first in the Runs sheet", code="equivalents_of")
    for run in campaign.runs:
        for species in run.recipe.charges:
            if species not in known:
                c.error(f"run {run.name} starts with a species the model does not have",
                        _loc(campaign, "runs", run.row, normalise_name(f"{INITIAL_PREFIX}{species}")), species,
                        "a molecule or ion of the model: " + ", ".join(sorted(known)), code="unknown_species")
        rows = run.dose_rows or (None,) * len(run.recipe.doses)
        for dose, row in zip(run.recipe.doses, rows):
            if dose.species not in known:
                c.error(f"run {run.name} doses a species the model does not have",
                        _loc(campaign, "dosing", row, "species"), dose.species,
                        "a molecule or ion of the model: " + ", ".join(sorted(known)), code="unknown_species")
    control_model_problems(campaign, model, c)  # titrants, start ions, reachable set points (run_control.py)
    substrate = next((m for m in model.molecules if m.role == "substrate" and m.moieties), None)
    if substrate is None:
        return _substrate_units_from_compounds(campaign)
    moiety = next(iter(substrate.moieties))
    return {m.name: float(m.moieties.get(moiety, 0.0)) for m in model.molecules}
