"""Runs -> padded arrays for the compiled kernel (:func:`compile_runs`).

Each run's pH mode, temperature profile, dosing segments, instant events,
break points and output times are validated and laid out in arrays padded to
common shapes (``layout.KernelRuns``), so that one compiled call can simulate
any (parameter set, run) pair.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from speciakin.chemistry.model import PH_MODES, START_ADJUSTMENTS, Run
from speciakin.errors import InputError, Location, ModelFileError, ProblemCollector
from speciakin.simulation.layout import START_COMPUTED, START_GIVEN, START_TITRANT, KernelRuns
from speciakin.simulation.model_layout import CompiledModel, CompiledRuns, finite_value

__all__ = ["compile_runs"]

_MODE_CODE = {mode: i for i, mode in enumerate(PH_MODES)}  # held 0, logged 1, free 2
#: Start adjustment codes of the kernel (``integrator_kernel.adjust_start``).
START_CODES = {"computed": START_COMPUTED, "given": START_GIVEN, "titrant": START_TITRANT}


def _ion_charge(compiled: CompiledModel, name: str | None) -> float | None:
    """Charge of ion ``name`` of the model (None when it is not an ion)."""
    ions = compiled.species_names[compiled.n_molecules:]
    if name not in ions:
        return None
    return float(compiled.arrays.species_charge[compiled.species_index(name)])


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
        if not (conc is not None and finite_value(conc) and conc > 0):
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


def kinks(times: Sequence[float], values: Sequence[float]) -> list[float]:
    """Knots [s] of a piecewise-linear profile (held constant outside its knots)
    where its slope changes.

    A knot with the same slope on both sides (a flat stretch of a logged
    temperature, say) is no break of the right-hand side: a segment may run
    through it, and the integrator need not land a step on it.  The slopes are
    compared exactly as the kernel computes them, so only a stretch whose values
    are equal (or exactly collinear) is crossed.
    """
    t = [float(x) for x in times]
    v = [float(x) for x in values]
    n = len(t)
    slopes = [0.0] + [(v[i + 1] - v[i]) / (t[i + 1] - t[i]) for i in range(n - 1)] + [0.0]
    return [t[i] for i in range(n) if slopes[i] != slopes[i + 1]]


#: Fewest readings of a pH log that is smoothed (a shorter log is joined by straight lines).
SMOOTH_LOG_MIN_READINGS = 20


def log_scatter(times: np.ndarray, values: np.ndarray) -> float:
    """Scatter of a log's readings about a smooth curve [units of the readings].

    The pseudo-residuals of Gasser, Sroka and Jennen-Steinmetz (Biometrika
    1986, 73, 625-633) remove a straight line through each reading's two
    neighbours, e_i = a_i v_(i-1) + b_i v_(i+1) - v_i with a_i = (t_(i+1) -
    t_i) / (t_(i+1) - t_(i-1)), b_i = 1 - a_i, so that for a curve smooth on
    the scale of the spacing var(e_i) = sigma^2 (a_i^2 + b_i^2 + 1).  Their
    median size (x 1.4826, the normal consistency factor of the median
    absolute deviation) is robust to a few real jumps of the pH.
    """
    t = np.asarray(times, float)
    v = np.asarray(values, float)
    if t.size < 3:
        return 0.0
    a = (t[2:] - t[1:-1]) / (t[2:] - t[:-2])
    b = 1.0 - a
    e = (a * v[:-2] + b * v[2:] - v[1:-1]) / np.sqrt(a * a + b * b + 1.0)
    return float(1.4826 * np.median(np.abs(e)))


def smooth_ph_log(times, values):
    """The smoothed pH log of a logged run: (breakpoints [s], values, cubic coefficients), or
    None when the readings stay joined by straight lines.

    A log of at least :data:`SMOOTH_LOG_MIN_READINGS` readings with a scatter
    (:func:`log_scatter`) above zero is replaced by the cubic smoothing spline
    whose sum of squared deviations from the readings is n sigma^2 (FITPACK's
    ``curfit``, Dierckx, "Curve and Surface Fitting with Splines", Oxford 1993,
    ch. 5, through ``scipy.interpolate.UnivariateSpline``; the number of its
    knots is the fewest that meet that sum): every reading enters it, and the
    curve stays within the readings' own scatter of them on average.  The
    spline is twice continuously differentiable, so a segment of the run runs
    through its knots.  Coefficient ``[j, p]`` multiplies (t - breakpoint j)^p.
    """
    from scipy.interpolate import PPoly, UnivariateSpline

    t = np.asarray(times, float)
    v = np.asarray(values, float)
    if t.size < SMOOTH_LOG_MIN_READINGS:
        return None
    sigma = log_scatter(t, v)
    if not sigma > 0.0:
        return None
    spline = UnivariateSpline(t, v, k=3, s=t.size * sigma ** 2)
    knots = spline.get_knots()
    full = np.concatenate(([knots[0]] * 3, knots, [knots[-1]] * 3))
    pieces = PPoly.from_spline((full, spline.get_coeffs(), 3))
    keep = np.flatnonzero(np.diff(pieces.x) > 0.0)
    breaks = np.append(pieces.x[keep], t[-1])
    coef = np.zeros((breaks.size, 4))
    coef[:-1] = pieces.c[::-1, keep].T
    coef[-1, 0] = float(spline(t[-1]))
    return breaks, spline(breaks), coef


def _run_problems(compiled: CompiledModel, run: Run, times: np.ndarray, c: ProblemCollector) -> None:
    src = compiled.model.source or None
    key = f"run.{run.name}"
    species = compiled.species_names
    if not (finite_value(run.end_time) and run.end_time > 0):
        c.error("run end time must be positive", Location(file=src, key=key + ".end_time"), run.end_time, "> 0 s")
    if not (finite_value(run.volume) and run.volume > 0):
        c.error("initial volume must be positive", Location(file=src, key=key + ".volume"), run.volume, "> 0 L")
    for name, amount in run.charges.items():
        if name not in species:
            c.error("charge names an unknown species", Location(file=src, key=f"{key}.charges.{name}"), name,
                    "one of " + ", ".join(species))
        if not (finite_value(amount) and amount >= 0):
            c.error("initial amount must be a non-negative number",
                    Location(file=src, key=f"{key}.charges.{name}"), amount, ">= 0 mol")
    end = float(run.end_time) if finite_value(run.end_time) else math.inf
    for i, d in enumerate(run.doses):
        dkey = f"{key}.doses[{i}]"
        if d.species not in species:
            c.error("dose names an unknown species", Location(file=src, key=dkey + ".species"), d.species,
                    "one of " + ", ".join(species))
        if not (finite_value(d.amount) and d.amount >= 0):
            c.error("dosed amount must be non-negative", Location(file=src, key=dkey + ".amount"), d.amount, ">= 0 mol")
        if not (finite_value(d.volume) and d.volume >= 0):
            c.error("dosed volume must be non-negative", Location(file=src, key=dkey + ".volume"), d.volume, ">= 0 L")
        if not (finite_value(d.start) and finite_value(d.end) and 0 <= d.start <= d.end <= end):
            c.error("dose lies outside the run", Location(file=src, key=dkey), f"{d.start} s to {d.end} s",
                    f"0 <= start <= end <= end time {run.end_time} s")
    for i, w in enumerate(run.withdrawals):
        wkey = f"{key}.withdrawals[{i}]"
        if not (finite_value(w.time) and 0 <= w.time <= end):
            c.error("withdrawal lies outside the run", Location(file=src, key=wkey + ".time"), w.time,
                    f"0 to {run.end_time} s")
        if not (finite_value(w.volume) and w.volume >= 0):
            c.error("withdrawn volume must be non-negative", Location(file=src, key=wkey + ".volume"), w.volume,
                    ">= 0 L")
    ph = run.ph
    pkey = f"{key}.ph"
    if ph.mode not in PH_MODES:
        c.error("unknown pH mode", Location(file=src, key=pkey + ".mode"), ph.mode, "one of " + ", ".join(PH_MODES))
    elif ph.mode == "held":
        if not (ph.setpoint is not None and finite_value(ph.setpoint)):
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
    if not (finite_value(run.ph_offset) and finite_value(run.amount_factor) and run.amount_factor > 0):
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
    smoothed = [smooth_ph_log(r.ph.log_times, r.ph.log_ph) if r.ph.mode == "logged" else None for r in runs]
    bps = []
    for r, fl, ev in zip(runs, feeds, events):
        pts = {float(r.end_time)}
        pts.update(float(x) for d in fl for x in (d.start, d.end))
        pts.update(float(e[0]) for e in ev)
        pts.update(kinks(r.temperature.times, r.temperature.temperatures))
        if r.ph.mode == "logged" and smoothed[len(bps)] is None:
            pts.update(kinks(r.ph.log_times, r.ph.log_ph))
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
    log_c = np.zeros((n_runs, max_log, 4))
    log_smooth = np.zeros(n_runs, np.int64)
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
        if smoothed[i] is not None:
            log_smooth[i] = 1
            breaks, values, coef = smoothed[i]
            log_n[i] = breaks.size
            log_t[i, :log_n[i]] = breaks
            log_v[i, :log_n[i]] = values
            log_c[i, :log_n[i]] = coef
        elif r.ph.mode == "logged":
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
    arrays = KernelRuns(mode, setpoint, titrant, titrant_conc, log_t, log_v, log_n, temp_t, temp_v, temp_n, y0,
              feed_t0, feed_t1, feed_species, feed_amount, feed_volume, n_feed, ev_t, ev_kind, ev_species,
              ev_amount, ev_volume, n_ev, bp, n_bp, out_t, n_out, scale, second, second_conc, controlled, start,
              acid, base, log_c, log_smooth)
    return CompiledRuns(runs, names, times, max_out, np.array([float(r.ph_offset) for r in runs]),
                        np.array([float(r.amount_factor) for r in runs]), arrays)
