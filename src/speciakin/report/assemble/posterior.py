"""Report section "Convergence and profiles".

Sampler diagnostics (integrated autocorrelation time against chain length,
acceptance fraction, rank-normalised split R-hat, bulk and tail effective
sample size) with trace and corner plots when a posterior exists; profile
likelihood plots when the fit computed profiles.

References
----------
Goodman, J. and Weare, J., Comm. App. Math. Comp. Sci. 2010, 5, 65 (ensemble
sampler; acceptance fraction).
Foreman-Mackey, D. et al., "emcee: The MCMC Hammer", PASP 2013, 125, 306
(autocorrelation time; chains of at least 50 times it).
Vehtari, A. et al., Bayesian Analysis 2021, 16, 667 (R-hat, ESS).
Raue, A. et al., Bioinformatics 2009, 25, 1923 (profile likelihood).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from speciakin.report.blocks import as_sentences
from speciakin.report.document import Callout, Figure, KeyValues, Paragraph, Section, Table

__all__ = [
    "stop_words",
    "STOP_REASONS",
    "convergence_section",
    "diagnostics_table",
    "profile_blocks",
    "CORNER_MAX_SAMPLES",
    "corner_samples",
]

#: Most samples drawn in the corner plot (thinned evenly beyond this).
CORNER_MAX_SAMPLES = 4000


def corner_samples(samples) -> np.ndarray:
    """The posterior samples the corner plot draws: at most :data:`CORNER_MAX_SAMPLES`, evenly thinned
    (the report and the figures folder draw the same plot, so it is drawn once per job)."""
    samples = np.asarray(samples, float)
    if samples.shape[0] > CORNER_MAX_SAMPLES:
        samples = samples[np.linspace(0, samples.shape[0] - 1, CORNER_MAX_SAMPLES).astype(int)]
    return samples


#: Plain words for the sampler's stop reasons (estimation/stopping.py).
STOP_REASONS = {
    "converged": "a convergence check passed",
    "cap": "the cap on steps was reached before a convergence check passed",
    "fixed": "the fixed number of steps that was asked for was reached",
}


def stop_words(posterior: Any) -> str:
    """Why sampling stopped, in plain words (the sampler's own message when it has one)."""
    reason = getattr(posterior, "stop_reason", None)
    message = getattr(posterior, "stop_message", "") or ""
    if not reason:
        return "not recorded"
    text = STOP_REASONS.get(reason, reason)
    checks = getattr(posterior, "stop_checks", None) or []
    if message:
        text += f" ({message.rstrip('.')})"
    if checks:
        text += f"; {len(checks)} convergence check{'s' if len(checks) != 1 else ''} made"
    return text


def diagnostics_table(posterior: Any) -> Table:
    """Per-parameter convergence figures of a posterior."""
    d = posterior.diagnostics
    rows = []
    for j, name in enumerate(d.parameter_names):
        tau = d.autocorrelation_time[j]
        multiple = d.chain_length / tau if tau and np.isfinite(tau) and tau > 0 else None
        rows.append([name, tau, multiple, d.r_hat[j], d.ess_bulk[j], d.ess_tail[j], d.mcse_mean[j]])
    return Table("Convergence diagnostics",
                 ["parameter", "autocorrelation time", "chain length / time", "R-hat", "ESS bulk", "ESS tail",
                  "MCSE of mean"], rows, units=[None, "stored steps", "-", "-", "-", "-", None],
                 formats=[None, ".3g", ".3g", ".4f", ".0f", ".0f", ".2g"], sheet_name="convergence",
                 note=f"Chain length {d.chain_length} stored steps; target: at least {d.target_tau_multiple:g} "
                      "autocorrelation times (emcee documentation), R-hat below 1.01 (Vehtari et al. 2021).")


def profile_blocks(fit: Any) -> list:
    """Profile-likelihood figure of a fit (or a "not run" / "not computed" note)."""
    if fit is None:
        return [Paragraph("Profile likelihood: not run (no least-squares fit).")]
    if not fit.profiles:
        return [Paragraph("Profile likelihood: not computed for this fit.")]
    from speciakin.report.figures import profile_figure

    values, delta, best, units = {}, {}, {}, {}
    threshold = None
    for key, prof in fit.profiles.items():
        name = fit.names[fit.keys.index(key)] if key in fit.keys else prof.name
        v = np.asarray(prof.values, float)
        dc = np.asarray(prof.delta_chisqr, float)
        ok = np.isfinite(v) & np.isfinite(dc)
        if ok.sum() < 2:
            continue
        values[name], delta[name] = v[ok], dc[ok]
        best[name] = float(prof.best_value)
        units[name] = prof.unit or ""
        threshold = float(prof.threshold) if threshold is None else threshold
    if not values:
        return [Paragraph("Profile likelihood: every profile failed; nothing to plot.")]
    kwargs = {"threshold": threshold} if threshold is not None else {}
    return [Figure(profile_figure(values, delta, best, units=units, **kwargs),
                   "Profile likelihood of each fitted parameter: increase of chi-square when the parameter "
                   "is fixed and the others are re-fitted; the interval ends where the curve crosses the "
                   "threshold line.")]


def convergence_section(fit: Any, posterior: Any) -> Section:
    """The "Convergence and profiles" section."""
    blocks: list = []
    if posterior is None:
        blocks.append(Paragraph("Posterior sampling: not run; no convergence diagnostics, trace or corner plots."))
    else:
        from speciakin.report.figures import corner_figure, trace_figure

        d = posterior.diagnostics
        blocks.append(KeyValues([
            ("Walkers", posterior.n_walkers), ("Steps per walker", posterior.n_steps),
            ("Stored every", posterior.thin_by), ("Burn-in [stored steps]", posterior.burn_in),
            ("Thinned by", posterior.thin), ("Samples kept", int(posterior.samples.shape[0])),
            ("Acceptance fraction (mean, min, max)",
             f"{d.acceptance_mean:.3f}, {d.acceptance_min:.3f}, {d.acceptance_max:.3f}"),
            ("Chain length / longest autocorrelation time", d.tau_multiple),
            ("Converged", bool(d.converged)), ("Seed", posterior.seed),
            ("Why sampling stopped", stop_words(posterior)),
        ], number_format=".4g"))
        blocks.append(diagnostics_table(posterior))
        notes = list(d.warnings) + [w for w in posterior.warnings if w not in d.warnings]
        if notes:
            blocks.append(Callout("warning", "Sampler warnings", as_sentences(notes)))
        names = list(posterior.parameter_names)
        chain = np.asarray(posterior.chain, float)
        if chain.ndim == 3 and chain.shape[0] >= 2:
            burn_in = min(max(int(posterior.burn_in), 0), chain.shape[0] - 1)
            blocks.append(Figure(trace_figure(chain, names, burn_in=burn_in),
                                 "Walker traces against stored step; the steps before the dashed "
                                 "burn-in line are discarded."))
        samples = corner_samples(posterior.samples)
        if samples.shape[0] >= 10:
            blocks.append(Figure(corner_figure(samples, names),
                                 "Posterior samples: pairwise densities and marginal histograms."))
    blocks += profile_blocks(fit)
    return Section("Convergence and profiles", blocks, anchor="convergence")
