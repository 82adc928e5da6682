"""The campaign objective: model + campaign -> weighted residuals and log-likelihood.

One :class:`CampaignObjective` serves the least-squares fit, the profiles and
the posterior sampler.  It

* picks the fitted quantities of the model (``Quantity.fit``) and the per-run
  nuisance parameters switched on in the model file's ``[fit]`` table,
* compiles the campaign's runs once for the simulation kernel (output times =
  HPLC sample times and the titrant-log times of each run),
* turns simulated amounts into the observables the chemist measured (area%
  through the RRFs, or concentrations), and
* weighs residuals with an error model that has an absolute and a relative
  part.

Observation model
-----------------
Area% of compound i in a sample (the RRF convention of
:func:`speciakin.data.campaign.mole_fractions_from_signals`)::

    y_i = (100 - U) * n_i * RRF_i / sum_j n_j * RRF_j     (j: compounds of the sample)

with U the sample's area% of peaks marked not modelled (0 without them).

Peak areas are first normalised to area% per sample; concentrations are
compared as ``n_i / V`` [mol/L].  The standard deviation of an observation is
``sigma = sqrt(a**2 + (r * y_obs)**2)`` with ``a`` the absolute and ``r`` the
relative part (weights are fixed by the data, so chi-square is an ordinary
weighted sum of squares).  A value reported below the LOQ is censored: its
least-squares residual is ``max(y_model - LOQ, 0) / sigma_LOQ`` (no penalty
while the model stays below the LOQ); in the likelihood it contributes
``log Phi((LOQ - y_model) / sigma_LOQ)``.  The area% of a sample that sum to
100 (the lab reports every peak) are not independent: their residuals are
whitened with the joint covariance of a closed composition, one value fewer
each (``pipeline.closure``); tables and plots show each value's own
``(y_model - y_obs) / sigma`` (:meth:`CampaignObjective.value_residuals`).
Titrant logs of held-pH runs are a second observable [mol] with their own
absolute and relative error.

References
----------
Bates, D. M. and Watts, D. G., "Nonlinear Regression Analysis and Its
Applications", Wiley 1988 (weighted least squares).
Tobin, J., "Estimation of relationships for limited dependent variables",
Econometrica 1958, 26, 24 (censored likelihood).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import numpy as np
from scipy.special import log_ndtr

from speciakin.chemistry.model import Model, Prior, Quantity, TemperatureProfile
from speciakin.data.campaign import Campaign
from speciakin.errors import InputError, Location
from speciakin.estimation.parameters import ParameterSpec
from speciakin.pipeline.closure import ClosedSamples
from speciakin.pipeline.objective_values import Predictions, resample_titrant, sample_values
from speciakin.pipeline.fitted import ErrorModel, FittedParameter, identifier, kernel_placement
from speciakin.pipeline.objective_jacobian import campaign_jacobian, jacobian_label
from speciakin.simulation.api import simulate_batch
from speciakin.simulation.compile import compile_model, compile_runs

__all__ = ["FittedParameter", "ErrorModel", "CampaignObjective", "Predictions", "identifier"]

#: Logs are used in full unless ``[fit] log_thinning = { titrant = N, ph = M }``
#: caps the readings per run (resampled on an even grid); the fit records how
#: many readings of each log entered it (``describe()["log_readings"]``).
#: A logged temperature that stays within this band [K] over a run is replaced
#: by its mean (the probe's scatter is not a temperature programme; a constant
#: temperature also keeps the kernel on its fast analytic-Jacobian path).
FLAT_TEMPERATURE_BAND = 0.5


class CampaignObjective:
    """Residuals and log-likelihood of a model against a campaign.

    Parameters
    ----------
    model
        The reaction model (fitted quantities marked in the model file).
    campaign
        The imported campaign.
    rtol, atol
        Integrator tolerances (relative, absolute [mol]).
    parallel
        Spread runs and parameter sets over the cores.

    Raises
    ------
    InputError
        Model and campaign do not match (a compound mapped to no molecule of
        the model), nothing to fit, or every observation of an observable
        censored.
    """

    def __init__(self, model: Model, campaign: Campaign, *, rtol: float = 1e-6, atol: float = 1e-10,
                 parallel: bool = True) -> None:
        self.model = model
        self.campaign = campaign
        self.rtol, self.atol, self.parallel = float(rtol), float(atol), bool(parallel)
        self.compiled = compile_model(model)
        fit_settings = dict(model.extra.get("fit", {}) or {})
        self.thinning = dict(fit_settings.get("log_thinning", {}) or {})
        self.log_readings: list[dict[str, Any]] = []
        self.error_model = ErrorModel.from_settings(fit_settings.get("error_model"), campaign.basis)
        self._check_mapping()
        self.runs = [self._prepare_run(r) for r in campaign.runs]
        self.run_names = [r.name for r in campaign.runs]
        self.parameters = self._collect_parameters(fit_settings)
        if not self.parameters:
            raise InputError("the model marks no quantity as fitted", Location(file=model.source or None,
                             key="fit = true"), expected="at least one pKa, rate constant or energy with fit = true")
        self._build_observations()
        self._gather: tuple | None = None  # flat output indices of the observations (predict_batch)
        self._plan: tuple | None = None  # where the fitted values go in the kernel's inputs (kernel_inputs)
        self._last_jacobian: tuple | None = None  # Jacobian columns at the last point (jacobian)
        self.jacobian_method, self.jacobian_fallbacks = "sensitivities", 0  # or "differences" (jacobian)

    # ------------------------------------------------------------ set-up
    def _check_mapping(self) -> None:
        known = set(self.compiled.species_names)
        for c in self.campaign.compounds:
            if c.molecule not in known:
                raise InputError(
                    f"compound '{c.name}' is mapped to '{c.molecule}', which the model does not have",
                    Location(file=self.campaign.source or None, sheet="compounds", row=c.row, column="model molecule"),
                    c.molecule, "one of " + ", ".join(self.compiled.species_names[:self.compiled.n_molecules]))

    def _prepare_run(self, crun):
        recipe = crun.recipe
        temps = np.asarray(recipe.temperature.temperatures, float)
        if temps.size > 1 and float(np.ptp(temps)) < FLAT_TEMPERATURE_BAND:
            flat = TemperatureProfile((0.0,), (float(temps.mean()),))
            crun = replace(crun, recipe=replace(recipe, temperature=flat))
            recipe = crun.recipe
        limit = self.thinning.get("ph")
        if recipe.ph.mode == "logged" and limit is not None and len(recipe.ph.log_times) > limit:
            grid = np.linspace(min(recipe.ph.log_times), max(recipe.ph.log_times), limit)
            crun = crun.with_resampled_ph_log(grid)
        return crun

    def _collect_parameters(self, settings: dict[str, Any]) -> list[FittedParameter]:
        out: list[FittedParameter] = []
        quantities: list[Quantity] = self.model.quantities()
        for i, q in enumerate(quantities):
            if not q.fit:
                continue
            name = q.name or self.compiled.quantity_names[i]
            if q.shift:
                value, lower, upper = 0.0, q.lower, q.upper
                unit = "pK units (shift)"
            else:
                value, lower, upper, unit = q.value, q.lower, q.upper, q.unit
            out.append(FittedParameter(name, identifier(name), "quantity", i, float(q.value), bool(q.shift),
                                       float(value), -math.inf if lower is None else float(lower),
                                       math.inf if upper is None else float(upper), unit, q.prior))
        for kind, default_bounds, default_value, unit in (("probe_offset", (-0.5, 0.5), 0.0, "pH units"),
                                                           ("amount_factor", (0.8, 1.2), 1.0, "-")):
            spec = settings.get(kind)
            if not spec:
                continue
            if spec is True:
                spec = {"runs": "all"}
            runs = spec.get("runs", "all")
            names = self.run_names if runs == "all" else list(runs)
            lower = float(spec.get("lower", default_bounds[0]))
            upper = float(spec.get("upper", default_bounds[1]))
            sd = spec.get("sd")
            prior = Prior("normal", {"mean": default_value, "sd": float(sd)}) if sd is not None else None
            for rn in names:
                if rn not in self.run_names:
                    raise InputError(f"[fit] {kind} names run '{rn}', which the campaign does not have",
                                     Location(file=self.model.source or None, key=f"fit.{kind}.runs"), rn,
                                     "one of " + ", ".join(self.run_names))
                name = f"{kind}[{rn}]"
                out.append(FittedParameter(name, identifier(name), kind, self.run_names.index(rn), default_value,
                                           False, default_value, lower, upper, unit, prior))
        return out

    def _build_observations(self) -> None:
        em = self.error_model
        nsp = self.compiled.n_species
        times_per_run: list[np.ndarray] = []
        hplc_parts: dict[str, list] = {k: [] for k in ("run", "t", "col", "rrf", "sample", "obs", "cens", "loq",
                                                       "kind", "row", "compound")}
        tit_parts: dict[str, list] = {k: [] for k in ("run", "t", "obs")}
        # the peaks marked not modelled: each sample's share [area%], and their values for the closure test
        other_parts: dict[str, list] = {k: [] for k in ("share", "sample", "obs", "cens", "loq")}
        sample_id = 0
        for ri, crun in enumerate(self.runs):
            h = crun.hplc
            end = float(crun.recipe.end_time)
            tt, ta = (np.empty(0), np.empty(0))
            if crun.titrant is not None and crun.recipe.ph.controlled:
                tt, ta = resample_titrant(crun.titrant.time, crun.titrant.amount, end,
                                          self.thinning.get("titrant"))
            source = self.campaign.runs[ri]
            self.log_readings.append({
                "run": crun.name,
                "titrant_readings": 0 if source.titrant is None else int(np.size(source.titrant.time)),
                "titrant_used": int(tt.size),
                "ph_log_readings": 0 if source.ph_log is None else int(np.size(source.ph_log.time)),
                "ph_log_used": len(crun.recipe.ph.log_times) if crun.recipe.ph.mode == "logged" else 0})
            keep = h.time <= end
            times = np.unique(np.concatenate([[0.0], h.time[keep], tt]))
            times_per_run.append(times)
            for t in np.unique(h.time[keep]):
                idx, kinds, values, loq, share, other = sample_values(h, t)
                other_parts["share"].append(share)
                for key, part in zip(("obs", "cens", "loq"), other):
                    other_parts[key] += part.tolist()
                other_parts["sample"] += [sample_id] * other[0].size
                for j, k in enumerate(idx):
                    hplc_parts["run"].append(ri)
                    hplc_parts["t"].append(int(np.searchsorted(times, t)))
                    hplc_parts["col"].append(self.compiled.species_index(str(h.molecule[k])))
                    hplc_parts["rrf"].append(float(h.rrf[k]))
                    hplc_parts["sample"].append(sample_id)
                    hplc_parts["obs"].append(values[j])
                    hplc_parts["cens"].append(bool(h.censored[k]))
                    hplc_parts["loq"].append(loq[j])
                    hplc_parts["kind"].append(str(kinds[j]))
                    hplc_parts["row"].append(int(h.rows[k]) if h.rows is not None else -1)
                    hplc_parts["compound"].append(str(h.compound[k]))
                sample_id += 1
            for t, a in zip(tt, ta):
                tit_parts["run"].append(ri)
                tit_parts["t"].append(int(np.searchsorted(times, t)))
                tit_parts["obs"].append(float(a))
        self.output_times = times_per_run
        recipes = [r.recipe for r in self.runs]
        self.compiled_runs = compile_runs(self.compiled, recipes, times_per_run)
        self.base_ph_offset = np.array([r.ph_offset for r in recipes], float)
        self.base_amount_factor = np.array([r.amount_factor for r in recipes], float)

        p = {k: np.asarray(v) for k, v in hplc_parts.items()}
        self.h_run = p["run"].astype(np.int64)
        self.h_t = p["t"].astype(np.int64)
        self.h_col = p["col"].astype(np.int64)
        self.h_rrf = p["rrf"].astype(float)
        self.h_sample = p["sample"].astype(np.int64)
        self.h_obs = p["obs"].astype(float)
        self.h_cens = p["cens"].astype(bool)
        self.h_loq = p["loq"].astype(float)
        self.h_kind = p["kind"].astype(str)
        self.h_row = p["row"].astype(np.int64)
        self.h_compound = p["compound"].astype(str)
        self.n_samples = sample_id
        self.h_area = self.h_kind == "area_percent"
        #: each sample's area% of peaks marked not modelled: its modelled compounds' area% add up to the rest
        self.other_share = np.asarray(other_parts["share"], float)
        self.h_area_total = (100.0 - self.other_share)[self.h_sample] if self.h_sample.size else np.zeros(0)
        bad = self.h_cens & ~np.isfinite(self.h_loq)
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            raise InputError("a value is reported below the LOQ but the compound has no LOQ",
                             Location(file=self.campaign.source or None, sheet="compounds",
                                      column="LOQ"), self.h_compound[i], "a LOQ for every censored compound")
        reference = np.where(self.h_cens, self.h_loq, np.abs(self.h_obs))
        self.h_sigma = np.sqrt(em.absolute ** 2 + (em.relative * reference) ** 2)
        if self.h_obs.size and np.all(self.h_cens):
            raise InputError("every HPLC value of the campaign is below the LOQ: nothing to fit",
                             Location(file=self.campaign.source or None, sheet="HPLC"),
                             expected="at least one quantified value")
        self.vol_col = nsp
        self.tit_col = nsp + 2

        t = {k: np.asarray(v) for k, v in tit_parts.items()}
        self.t_run = t["run"].astype(np.int64)
        self.t_t = t["t"].astype(np.int64)
        self.t_obs = t["obs"].astype(float)
        sig = np.zeros(self.t_obs.size)
        for ri in np.unique(self.t_run):
            sel = self.t_run == ri
            absolute = (self.error_model.titrant_absolute if self.error_model.titrant_absolute is not None
                        else 0.005 * max(float(np.max(np.abs(self.t_obs[sel]))), 1e-12))
            sig[sel] = np.sqrt(absolute ** 2 + (self.error_model.titrant_relative * self.t_obs[sel]) ** 2)
        self.t_sigma = sig
        self.n_hplc = int(self.h_obs.size)
        self.n_titrant = int(self.t_obs.size)
        #: samples whose area% sum to 100: the residuals of their quantified values are whitened with the
        #: joint covariance of a closed composition (``pipeline.closure``); one of each is 0 whatever the
        #: parameters
        others = tuple(np.asarray(other_parts[k]) for k in ("sample", "obs", "cens", "loq"))
        self.closure = ClosedSamples.of(self.h_sample, self.n_samples, self.h_obs, self.h_area, self.h_cens,
                                        self.h_sigma, self.h_loq, others=others)
        self.closed_samples = self.closure.count
        #: residuals that are zero while the model stays below the LOQ (the values reported below it)
        self.one_sided = np.concatenate([self.h_cens, np.zeros(self.n_titrant, bool)])
        self.groups = np.array([f"HPLC {self.run_names[r]}" for r in self.h_run]
                               + [f"titrant {self.run_names[r]}" for r in self.t_run], dtype=object)

    # ------------------------------------------------------------ parameters
    @property
    def names(self) -> list[str]:
        return [p.name for p in self.parameters]

    @property
    def keys(self) -> list[str]:
        return [p.key for p in self.parameters]

    def specs(self) -> list[ParameterSpec]:
        return [p.spec() for p in self.parameters]

    @property
    def start(self) -> np.ndarray:
        return np.array([p.value for p in self.parameters], float)

    @property
    def n_data(self) -> int:
        return self.n_hplc + self.n_titrant

    def kernel_inputs(self, theta: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Fitted values (n_sets, p) -> kernel q (n_sets, n_q), pH offsets and
        amount factors (n_sets, n_runs)."""
        theta = np.atleast_2d(np.asarray(theta, float))
        n = theta.shape[0]
        if self._plan is None or self._plan[0] is not self.parameters:
            self._plan = (self.parameters,) + kernel_placement(self.parameters)
        plan = self._plan
        q = np.empty((n, self.compiled.nominal.size))
        q[...] = self.compiled.nominal
        off = np.empty((n, self.base_ph_offset.size))
        off[...] = self.base_ph_offset
        fac = np.empty((n, self.base_amount_factor.size))
        fac[...] = self.base_amount_factor
        for target, (index, column, base) in zip((q, q, off, fac), plan[1:]):
            if index.size:
                target[:, index] = theta[:, column] if base is None else base + theta[:, column]
        return q, off, fac

    def quantity_vector(self, theta: np.ndarray) -> np.ndarray:
        """Full kernel parameter vector q for one fitted vector."""
        return self.kernel_inputs(theta)[0][0]

    # ------------------------------------------------------------ model values
    def predict_batch(self, theta: np.ndarray, rtol: float | None = None) -> Predictions:
        """Model values at every observation for each row of ``theta``."""
        q, off, fac = self.kernel_inputs(theta)
        res = simulate_batch(self.compiled, self.compiled_runs, q, off, fac, rtol or self.rtol, self.atol,
                             self.parallel)
        return self.predictions_from(res.outputs, res.status)

    def predictions_from(self, out: np.ndarray, status: np.ndarray) -> Predictions:
        """Model values at every observation from kernel outputs (n_sets, n_runs, n_times, n_outputs)
        and their status (n_sets, n_runs)."""
        n_sets = out.shape[0]
        # one flat gather per observable (cheaper than indexing with three index arrays per call)
        flat = out.reshape(n_sets, -1)
        shape = out.shape[1:]
        if self._gather is None or self._gather[0] != shape:
            # made once per output shape: the flat indices and which kinds of observation there are
            self._gather = (shape, np.ravel_multi_index((self.h_run, self.h_t, self.h_col), shape),
                            np.ravel_multi_index((self.h_run, self.h_t, np.full_like(self.h_t, self.vol_col)), shape),
                            np.ravel_multi_index((self.t_run, self.t_t, np.full_like(self.t_t, self.tit_col)), shape),
                            bool(self.h_area.any()), bool((~self.h_area).any()), {})
        _, at_amount, at_volume, at_titrant, any_area, any_concentration, bins_of = self._gather
        amount = flat.take(at_amount, axis=1)
        model = np.empty_like(amount)
        if any_area:
            num = amount * self.h_rrf
            # the samples' sums for every set in one bincount (each bin adds its terms in the same order)
            bins = bins_of.get(n_sets)
            if bins is None:
                bins = bins_of[n_sets] = (np.arange(n_sets)[:, None] * self.n_samples
                                          + self.h_sample[None, :]).ravel()
            denom = np.bincount(bins, weights=num.ravel(), minlength=n_sets * self.n_samples).reshape(
                n_sets, self.n_samples)
            with np.errstate(invalid="ignore", divide="ignore"):
                area = self.h_area_total * num / denom[:, self.h_sample]
            model = np.where(self.h_area, area, model) if any_concentration else area
        if any_concentration:
            vol = flat.take(at_volume, axis=1)
            model = np.where(self.h_area, model, amount / vol) if any_area else amount / vol
        tit = flat.take(at_titrant, axis=1)
        failed = status.any(axis=1)
        model[failed] = np.nan
        tit[failed] = np.nan
        return Predictions(model, self.h_obs, self.h_sigma, self.h_cens, tit, self.t_obs, self.t_sigma,
                           out, status)

    def value_residuals(self, pr: Predictions) -> np.ndarray:
        """Each HPLC value's own weighted residual (n_sets, n_hplc): (model - observed) / sigma, for a
        value below the LOQ (model - LOQ) / sigma where the model is above it, else 0 (tables, plots)."""
        return np.where(self.h_cens[None, :],
                        np.maximum(pr.hplc_model - self.h_loq[None, :], 0.0),
                        pr.hplc_model - self.h_obs[None, :]) / self.h_sigma[None, :]

    def residuals_batch(self, theta: np.ndarray, rtol: float | None = None) -> np.ndarray:
        """Weighted residuals (n_sets, n_data); NaN rows where the simulation failed.  The values of a
        closed area% sample give its whitened residuals (``pipeline.closure``), not one each."""
        return self.residuals_of(self.predict_batch(theta, rtol))

    def residuals_of(self, pr: Predictions) -> np.ndarray:
        """The weighted residuals (n_sets, n_data) of model values (:meth:`residuals_batch`)."""
        r_h = self.closure.whiten(self.value_residuals(pr), pr.hplc_model, self.h_obs)
        r_t = (pr.titrant_model - self.t_obs[None, :]) / self.t_sigma[None, :]
        return np.concatenate([r_h, r_t], axis=1)

    def residuals(self, theta: np.ndarray) -> np.ndarray:
        """Weighted residual vector for one fitted vector (the least-squares objective)."""
        return self.residuals_batch(np.asarray(theta, float)[None, :])[0]

    def jacobian(self, theta: np.ndarray, columns=None) -> np.ndarray:
        """Jacobian of :meth:`residuals`, (n_data, p) or only ``columns``: forward sensitivities
        (``jacobian_method`` "sensitivities", the default) or central differences ("differences", and where
        a run cannot be simulated); :func:`speciakin.pipeline.objective_jacobian.campaign_jacobian`."""
        return campaign_jacobian(self, theta, columns)

    @property
    def jacobian_label(self) -> str:
        """How :meth:`jacobian` was computed, for the fit's record."""
        return jacobian_label(self.jacobian_method, self.jacobian_fallbacks)

    def log_likelihood_batch(self, theta: np.ndarray) -> np.ndarray:
        """Log-likelihood of each row of ``theta`` (constants dropped; -inf on failure)."""
        pr = self.predict_batch(theta)
        z = self.closure.whiten((pr.hplc_model - self.h_obs) / self.h_sigma, pr.hplc_model, self.h_obs)
        any_censored = bool(self.h_cens.any())
        ll = -0.5 * np.sum(np.where(self.h_cens, 0.0, z * z) if any_censored else z * z, axis=1)
        if any_censored:
            zc = (self.h_loq[None, :] - pr.hplc_model) / self.h_sigma[None, :]
            ll = ll + np.sum(np.where(self.h_cens[None, :], log_ndtr(zc), 0.0), axis=1)
        zt = (pr.titrant_model - self.t_obs[None, :]) / self.t_sigma[None, :]
        ll = ll - 0.5 * np.sum(zt * zt, axis=1)
        return np.where(np.isfinite(ll), ll, -np.inf)

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        return self.log_likelihood_batch(theta)

    # ------------------------------------------------------------ curves
    def curves_batch(self, theta: np.ndarray, n_points: int = 121) -> dict[str, dict[str, Any]]:
        """Model curves of the observables on a dense time grid, for plots.

        Returns, per run name: ``time`` [s] (n_points,), ``values`` {compound:
        (n_sets, n_points)} on the data's scale (area% or [mol/L]), ``titrant``
        (n_sets, n_points) [mol], ``ph`` (n_sets, n_points), ``failed`` (n_sets,) bool.
        """
        theta = np.atleast_2d(np.asarray(theta, float))
        grids = [np.linspace(0.0, float(r.recipe.end_time), n_points) for r in self.runs]
        cruns = compile_runs(self.compiled, [r.recipe for r in self.runs], grids)
        q, off, fac = self.kernel_inputs(theta)
        res = simulate_batch(self.compiled, cruns, q, off, fac, self.rtol, self.atol, self.parallel)
        out = res.outputs
        nsp = self.compiled.n_species
        curves: dict[str, dict[str, Any]] = {}
        for ri, crun in enumerate(self.runs):
            h = crun.hplc
            names = list(dict.fromkeys(str(c) for c in h.compound))
            cols = [self.compiled.species_index(str(h.molecule[list(h.compound).index(c)])) for c in names]
            rrf = np.array([float(h.rrf[list(h.compound).index(c)]) for c in names])
            amounts = out[:, ri, :n_points, :][:, :, cols]
            mine = self.h_run == ri
            if np.any(self.h_area[mine]):
                num = amounts * rrf[None, None, :]
                # the share of the peaks marked not modelled, between the run's samples read linearly
                t_sample, first = np.unique(self.output_times[ri][self.h_t[mine]], return_index=True)
                total = 100.0 - np.interp(grids[ri], t_sample, self.other_share[self.h_sample[mine]][first])
                with np.errstate(invalid="ignore", divide="ignore"):
                    vals = total[None, :, None] * num / num.sum(axis=2, keepdims=True)
            else:
                vals = amounts / out[:, ri, :n_points, nsp][:, :, None]
            curves[crun.name] = {
                "time": grids[ri],
                "values": {c: vals[:, :, j] for j, c in enumerate(names)},
                "titrant": out[:, ri, :n_points, nsp + 2],
                "ph": out[:, ri, :n_points, nsp + 1],
                "failed": res.status[:, ri] != 0,
            }
        return curves

    # ------------------------------------------------------------ description
    def describe(self) -> dict[str, Any]:
        return {
            "parameters": [p.to_dict() for p in self.parameters],
            "error_model": self.error_model.to_dict(),
            "n_hplc": self.n_hplc, "n_titrant": self.n_titrant,
            "n_censored": int(self.h_cens.sum()), "n_runs": len(self.runs),
            "basis": self.campaign.basis,
            "conversion": ("area% of each compound = (100 - U) n_i RRF_i / sum_j n_j RRF_j over the compounds "
                           "of the sample, U the sample's area% of peaks marked not modelled"
                           if self.campaign.basis in ("area_percent", "area", "mixed") and np.any(self.other_share)
                           else "area% of each compound = 100 n_i RRF_i / sum_j n_j RRF_j over the compounds of "
                           "the sample" if self.campaign.basis in ("area_percent", "area", "mixed")
                           else "concentrations compared as n_i / V"),
            "closed_samples": self.closed_samples,
            "closure": ("the area% of a sample that sum to 100 are weighed with their joint covariance (one "
                        "value fewer each)" if self.closed_samples else None),
            "log_thinning": dict(self.thinning) or None, "log_readings": list(self.log_readings),
            "flat_temperature_band_K": FLAT_TEMPERATURE_BAND,
        }

