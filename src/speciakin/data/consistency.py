"""Checks of each imported run as the simulator will see it, located at workbook cells.

Two kinds of finding, both tied to the cell the value came from:

* **Consistency** (errors): what the simulation layer would reject later
  with internal keys (``run.R06.withdrawals[9].time``) is found here first:
  a start volume or run length of zero, a run whose HPLC area values
  measure only molecules it never contains, doses or HPLC withdrawals after the
  run ends, a pH log that does not cover a logged run, repeated log times,
  a held run without titrant ion or concentration.
* **Plausibility** (errors for physically impossible values, warnings for
  unusual ones): volumes, temperatures, concentrations and the titrant
  consumption against the amounts in the vessel.  Thresholds are module
  constants, documented in docs/data.md ("common practice" unless a source
  is named).
"""

from __future__ import annotations

import numpy as np

# shared limits: volumes (1 uL to 100 m3), temperatures (-100 C to 300 C), concentrations (30 mol/L)
from speciakin.chemistry.modelfile.plausibility import CONCENTRATION_LIMIT, TEMPERATURE_LIMITS, VOLUME_RANGE
from speciakin.data.campaign import Campaign, CampaignRun
from speciakin.data.sheets import INITIAL_PREFIX, normalise_name
from speciakin.errors import ProblemCollector

__all__ = [
    "VOLUME_RANGE", "TEMPERATURE_LIMITS", "TEMPERATURE_USUAL", "CONCENTRATION_LIMIT", "CONCENTRATION_USUAL",
    "TITRANT_CONCENTRATION_USUAL", "TITRANT_CONCENTRATION_LIMIT", "TITRANT_CONCENTRATION_MINIMUM", "MAX_RUN_TIME",
    "RRF_USUAL", "AREA_PERCENT_EXCESS", "TITRANT_RATIO_USUAL", "HELD_PH_RANGE", "SAMPLING_SPAN_FRACTION",
    "run_problems",
]

#: [K] temperatures outside -20 C to 120 C draw a warning (common practice).
TEMPERATURE_USUAL = (253.15, 393.15)
#: [mol/L] concentrations above this draw a warning (common practice).
CONCENTRATION_USUAL = 10.0
#: [mol/L] pH-stat titrants are usually 0.01 to 10 mol/L (common practice); outside: a warning.
TITRANT_CONCENTRATION_USUAL = (0.01, 10.0)
#: [mol/L] a titrant more concentrated than this is an error (saturated NaOH is about 19 mol/L,
#: from memory).
TITRANT_CONCENTRATION_LIMIT = 25.0
#: [mol/L] below this a titrant cannot hold a pH (it would take litres per millimole): an error.
TITRANT_CONCENTRATION_MINIMUM = 1e-4
#: [s] a run longer than a year is an error (a time unit mistake), common practice.
MAX_RUN_TIME = 365.25 * 86400.0
#: [-] RRF values outside this range draw a warning (common practice for UV detection).
RRF_USUAL = (0.01, 100.0)
#: [area%] a single area% value above 100 + this is an error (the area_sum tolerance of validate.py).
AREA_PERCENT_EXCESS = 3.0
#: [pH] a held (pH-stat) set point outside this range is an error: below pH 1 the free acid alone is
#: above 0.1 mol/L, a tenth of a 1 M titrant, and above pH 13 the free base likewise, so the titrant
#: volume no longer measures the reaction; glass electrodes read low above about pH 12-13 (alkaline
#: error) and drift below about pH 1 (acid error) (common practice, from memory).  The simulation
#: does not integrate a held run of the demo model near pH 0.
HELD_PH_RANGE = (1.0, 13.0)
#: [-] every HPLC sample of a run within this fraction of its stated duration draws a warning
#: (`sampling_span`: minutes read as seconds put a 3 h run's samples within its first 3 min), common practice.
SAMPLING_SPAN_FRACTION = 0.05
#: [-] titrant consumed over the amounts in the vessel (initial + dosed, titrant ion excluded):
#: outside this range a warning asks to check the titrant concentration and its unit (common practice).
TITRANT_RATIO_USUAL = (1e-3, 1e2)


def _first_repeat(times: np.ndarray) -> int:
    """Index of the first time that equals an earlier one, or -1."""
    _, first = np.unique(times, return_index=True)
    if first.size == times.size:
        return -1
    mask = np.ones(times.size, bool)
    mask[first] = False
    return int(np.flatnonzero(mask)[0])


def _consistency(campaign: Campaign, run: CampaignRun, c: ProblemCollector) -> None:
    r = run.recipe
    loc = campaign.locate
    end = float(r.end_time)
    end_min = f"{end / 60.0:g} min"
    # messages name a time as its cell shows it, in the unit of the column's header
    hplc_unit, probe_unit = campaign.time_unit("hplc"), campaign.time_unit("probe")
    if r.volume is not None and r.volume <= 0:
        c.error(f"start volume of run {run.name} is zero", loc("runs", run.row, "start_volume"), 0.0,
                "a volume > 0", code="out_of_range")
    if not end > 0:
        where = "duration" if "duration" in campaign.extra.get("sheets", {}).get("runs", {}).get("columns", {}) \
            else "run"
        c.error(f"run {run.name} has no length: no duration and nothing observed after time zero",
                loc("runs", run.row, where), None, "a duration > 0, or HPLC samples or log readings after time zero",
                code="zero_length")
        return
    if end > MAX_RUN_TIME:
        has_duration = "duration" in campaign.extra.get("sheets", {}).get("runs", {}).get("columns", {})
        duration_unit = campaign.time_unit("runs", "duration")
        c.error(f"run {run.name} lasts {end / 86400.0:.3g} days", loc("runs", run.row, "duration" if has_duration
                                                                          else "run"),
                end / duration_unit.factor, f"at most {MAX_RUN_TIME / 86400.0:g} days [{duration_unit.symbol}]; "
                "check the time values and units (the run ends at its duration or else at its last observation)",
                code="implausible")
        return
    _sampling_span(campaign, run, end, c)
    rows = run.dose_rows or (None,) * len(r.doses)
    for dose, row in zip(r.doses, rows):
        if dose.end > end:
            col = "end" if dose.end != dose.start else "start"
            c.error(f"dose of {dose.species} in run {run.name} ends after the run ends ({end_min})",
                    loc("dosing", row, col), dose.end / campaign.time_unit("dosing", col).factor,
                    f"a time <= the run's duration [{campaign.time_unit('dosing', col).symbol}]; check the time unit "
                    "in the header", code="after_end")
    if r.withdrawals:
        late = np.flatnonzero(run.hplc.time > end)
        if late.size:
            k = int(late[0])
            more = f"; {late.size} values in all" if late.size > 1 else ""
            c.error(f"HPLC sample of run {run.name} taken after the run ends ({end_min}) while each sample "
                    f"removes {r.withdrawals[0].volume * 1e3:g} mL{more}",
                    loc("hplc", int(run.hplc.rows[k]), "time"), float(run.hplc.time[k]) / hplc_unit.factor,
                    f"a time within the run's duration [{hplc_unit.symbol}]; check the time unit "
                    "in the headers of the HPLC results and the Runs sheet", code="after_end")
    for log, what in ((run.ph_log, "pH"), (run.temperature_log, "temperature")):
        if log is None or not len(log):
            continue
        k = _first_repeat(log.time)
        if k >= 0:
            c.error(f"two {what} readings of run {run.name} at the same time", loc("probe", int(log.rows[k]), "time"),
                    float(log.time[k]) / probe_unit.factor, f"one reading per time [{probe_unit.symbol}]",
                    code="duplicate_time")
    ph = r.ph
    if ph.mode == "logged" and run.ph_log is not None and len(run.ph_log):
        log = run.ph_log
        first, last = int(np.argmin(log.time)), int(np.argmax(log.time))
        if log.time[first] > 0:
            c.error(f"the pH log of logged run {run.name} starts after time zero",
                    loc("probe", int(log.rows[first]), "time"), float(log.time[first]) / probe_unit.factor,
                    "a first reading at time 0 (the model needs the pH over the whole run)", code="log_coverage")
        if log.time[last] < end:
            c.error(f"the pH log of logged run {run.name} ends before the run ends ({end_min})",
                    loc("probe", int(log.rows[last]), "time"), float(log.time[last]) / probe_unit.factor,
                    "readings up to the end of the run, or a shorter duration; check the time units",
                    code="log_coverage")
    if ph.mode == "held":
        lo, hi = HELD_PH_RANGE
        if ph.setpoint is not None and 0.0 <= ph.setpoint <= 14.0 and not lo <= ph.setpoint <= hi:
            c.error(f"held-pH run {run.name} has a set point no pH-stat can hold", loc("runs", run.row, "setpoint"),
                    f"pH {ph.setpoint:g}", f"a set point from pH {lo:g} to {hi:g} (outside it the free acid or base "
                    "alone is above 0.1 mol/L); check the value, or give the run as logged or free",
                    code="implausible")
        if not ph.titrant:
            c.error(f"held-pH run {run.name} names no titrant ion", loc("runs", run.row, "titrant"), None,
                    "the ion the controller doses, as named in the model (e.g. Na+)", code="missing_titrant")
        if ph.titrant_concentration is None or not ph.titrant_concentration > 0:
            c.error(f"held-pH run {run.name} has no titrant concentration",
                    loc("runs", run.row, "titrant_concentration"), ph.titrant_concentration,
                    "the concentration of the titrant solution (> 0)", code="missing_value")


def _sampling_span(campaign: Campaign, run: CampaignRun, end: float, c: ProblemCollector) -> None:
    """Warning when every HPLC sample of a run with a stated duration falls in its first few percent."""
    times = np.unique(run.hplc.time[np.isfinite(run.hplc.time)])
    if "duration" not in campaign.extra.get("sheets", {}).get("runs", {}).get("columns", {}) or times.size < 2:
        return
    if times[-1] < SAMPLING_SPAN_FRACTION * end:
        k = int(np.argmax(run.hplc.time))
        c.warning(f"every HPLC sample of run {run.name} is taken within the first {times[-1] / 60.0:.3g} min of "
                  f"the run's {end / 60.0:g} min", campaign.locate("hplc", int(run.hplc.rows[k]), "time"),
                  float(run.hplc.time[k]) / campaign.time_unit("hplc").factor, "samples spread over the run; "
                  "check the time unit "
                  "in the header of the HPLC results (min, s or h)", code="sampling_span")


def _plausibility(campaign: Campaign, run: CampaignRun, c: ProblemCollector) -> None:
    r = run.recipe
    loc = campaign.locate
    lo, hi = VOLUME_RANGE
    if r.volume is not None and r.volume > 0 and not lo <= r.volume <= hi:
        c.error(f"start volume of run {run.name} is not physically plausible", loc("runs", run.row, "start_volume"),
                r.volume * 1e3, f"{lo * 1e3:g} to {hi * 1e3:g} mL; check the value and the header unit",
                code="implausible")
    rows = run.dose_rows or (None,) * len(r.doses)
    for dose, row in zip(r.doses, rows):
        if dose.volume > hi:
            c.error(f"dose volume in run {run.name} is not physically plausible", loc("dosing", row, "volume"),
                    dose.volume * 1e3, f"at most {hi * 1e3:g} mL", code="implausible")
    if r.withdrawals and r.volume:
        removed = sum(w.volume for w in r.withdrawals)
        present = r.volume + sum(d.volume for d in r.doses)
        if removed >= present:
            c.error(f"the HPLC samples of run {run.name} remove {removed * 1e3:g} mL, more than the "
                    f"{present * 1e3:g} mL in the vessel", loc("runs", run.row, "sample_volume"),
                    r.withdrawals[0].volume * 1e3, "a sample volume [mL] that leaves liquid in the vessel",
                    code="implausible")
    temps = [(t, loc("runs", run.row, "temperature")) for t in r.temperature.temperatures[:1]]
    if run.temperature_log is not None and len(run.temperature_log):
        tl = run.temperature_log
        temps = [(float(tl.value[k]), loc("probe", int(tl.rows[k]), "temperature"))
                 for k in (int(np.argmin(tl.value)), int(np.argmax(tl.value)))]
    for t, where in temps:
        if not TEMPERATURE_LIMITS[0] <= t <= TEMPERATURE_LIMITS[1]:
            c.error(f"temperature of run {run.name} is not plausible for a solution with a pH probe", where,
                    f"{t:g} K = {t - 273.15:g} C",
                    f"{TEMPERATURE_LIMITS[0] - 273.15:g} to {TEMPERATURE_LIMITS[1] - 273.15:g} C; "
                    "check the header unit (C or K)", code="implausible")
        elif not TEMPERATURE_USUAL[0] <= t <= TEMPERATURE_USUAL[1]:
            c.warning(f"temperature of run {run.name} is unusual", where, f"{t - 273.15:g} C",
                      f"{TEMPERATURE_USUAL[0] - 273.15:g} to {TEMPERATURE_USUAL[1] - 273.15:g} C",
                      code="unusual_temperature")
    if r.volume and r.volume > 0:
        for species, amount in r.charges.items():
            conc = amount / r.volume
            where = loc("runs", run.row, normalise_name(f"{INITIAL_PREFIX}{species}"))
            if conc > CONCENTRATION_LIMIT:
                c.error(f"initial amount of {species} in run {run.name} gives {conc:.3g} mol/L, which no "
                        "solution can hold", where, amount * 1e3,
                        f"at most {CONCENTRATION_LIMIT:g} mol/L x the start volume; check the units",
                        code="implausible")
            elif conc > CONCENTRATION_USUAL:
                c.warning(f"initial amount of {species} in run {run.name} gives {conc:.3g} mol/L", where,
                          amount * 1e3, f"below {CONCENTRATION_USUAL:g} mol/L; check the units",
                          code="unusual_concentration")
    h = run.hplc
    over = (h.kind == "area_percent") & np.isfinite(h.value) & (h.value > 100.0 + AREA_PERCENT_EXCESS)
    if over.any():
        k = int(np.flatnonzero(over)[0])
        c.error(f"area% of {h.compound[k]} in run {run.name} is above 100",
                loc("hplc", int(h.rows[k]), "value" if campaign.layout == "long" else "time"), float(h.value[k]),
                f"an area% from 0 to 100 (+{AREA_PERCENT_EXCESS:g} for rounding)", code="implausible")
    conc = (h.kind == "concentration") & np.isfinite(h.value) & (h.value > CONCENTRATION_LIMIT)
    if conc.any():
        k = int(np.flatnonzero(conc)[0])
        c.error(f"HPLC concentration of {h.compound[k]} in run {run.name} is not physically possible",
                loc("hplc", int(h.rows[k]), "value" if campaign.layout == "long" else "time"),
                f"{h.value[k]:g} mol/L", f"at most {CONCENTRATION_LIMIT:g} mol/L; check the unit in the header",
                code="implausible")
    _titrant_plausibility(campaign, run, c)


def _titrant_plausibility(campaign: Campaign, run: CampaignRun, c: ProblemCollector) -> None:
    r = run.recipe
    ph = r.ph
    where = campaign.locate("runs", run.row, "titrant_concentration")
    tc = ph.titrant_concentration
    if tc is not None and tc > 0:
        lo, hi = TITRANT_CONCENTRATION_USUAL
        if not TITRANT_CONCENTRATION_MINIMUM <= tc <= TITRANT_CONCENTRATION_LIMIT:
            c.error(f"titrant concentration of run {run.name} is not physically plausible", where, f"{tc:g} mol/L",
                    f"{TITRANT_CONCENTRATION_MINIMUM:g} to {TITRANT_CONCENTRATION_LIMIT:g} mol/L; check the value and "
                    "the unit in the header", code="implausible")
        elif not lo <= tc <= hi:
            c.warning(f"titrant concentration of run {run.name} is unusual for a pH-stat titrant", where,
                      f"{tc:g} mol/L", f"{lo:g} to {hi:g} mol/L; check the unit in the header "
                      "(mol/L or mmol/L)", code="unusual_titrant")
    if run.titrant is None or not run.titrant.amount.size:
        return
    vol = run.titrant.volume
    if vol is not None and vol.size and np.nanmax(vol) > VOLUME_RANGE[1]:
        k = int(np.nanargmax(vol))
        c.error(f"titrant volume of run {run.name} is not physically plausible",
                campaign.locate("titrant", int(run.titrant.rows[k]), "volume"), float(vol[k]) * 1e3,
                f"at most {VOLUME_RANGE[1] * 1e3:g} mL; check the value and the header unit", code="implausible")
        return
    used = float(np.nanmax(run.titrant.amount))
    present = sum(a for s, a in r.charges.items() if s != ph.titrant)
    present += sum(d.amount for d in r.doses if d.species != ph.titrant)
    if used <= 0 or present <= 0:
        return
    ratio = used / present
    lo, hi = TITRANT_RATIO_USUAL
    if not lo <= ratio <= hi:
        k = int(np.nanargmax(run.titrant.amount))
        c.warning(f"run {run.name} consumed {used * 1e3:.3g} mmol titrant, {ratio:.3g} times the "
                  f"{present * 1e3:.3g} mmol in the vessel", campaign.locate("titrant", int(run.titrant.rows[k]), None),
                  None, f"{lo:g} to {hi:g} times; check the titrant concentration and the units of the "
                  "titrant log and the Runs sheet", code="titrant_consumption")


def run_problems(campaign: Campaign, c: ProblemCollector) -> None:
    """Add the consistency and plausibility findings of every run (and of the
    compounds' RRFs) to ``c``."""
    lo, hi = RRF_USUAL
    for comp in campaign.compounds:
        if not lo <= comp.rrf <= hi:
            c.warning(f"RRF of {comp.name} is unusual", campaign.locate("compounds", comp.row, "rrf"), comp.rrf,
                      f"{lo:g} to {hi:g} (the response relative to the reference compound)", code="unusual_rrf")
    for run in campaign.runs:
        _consistency(campaign, run, c)
        _nothing_measured(campaign, run, c)
        _plausibility(campaign, run, c)


def _nothing_measured(campaign: Campaign, run: CampaignRun, c: ProblemCollector) -> None:
    """A run with HPLC area values whose measured molecules are neither present at the start nor
    dosed, although the Runs sheet has an initial column for one of them: every area% would be 0 / 0."""
    r = run.recipe
    area = np.isin(run.hplc.kind, ("area_percent", "area"))
    if not area.any():
        return
    observed = set(run.hplc.molecule[area].tolist())
    present = {sp for sp, v in r.charges.items() if v > 0} | {d.species for d in r.doses if d.amount > 0}
    columns = campaign.extra.get("sheets", {}).get("runs", {}).get("columns", {})
    declared = sorted(sp for sp in observed if normalise_name(INITIAL_PREFIX + sp) in columns)
    if declared and not observed & present:
        c.error(f"run {run.name} starts with none of the molecules its HPLC area values measure and doses none "
                "of them (their area% would be 0 / 0)",
                campaign.locate("runs", run.row, normalise_name(INITIAL_PREFIX + declared[0])),
                r.charges.get(declared[0]), f"an initial amount > 0 of {' or '.join(declared)}",
                code="nothing_measured")
