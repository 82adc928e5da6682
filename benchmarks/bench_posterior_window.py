"""Time of the demo posterior and of the demo pH window (the decision step).

Targets (issue "posterior and pH window"): demo posterior with at least 32 walkers, long enough
for 50 autocorrelation times, in under 5 minutes on this 2-core machine; the
window with 41 pH values x 500 draws in under 1 minute.  Both are measured in
one run, after a warm-up call that excludes numba compilation; the script
prints the figures, the ratios to the targets, the core count and the load
average (the machine may be shared).

Input: the bundled INVENTED demo campaign (speciakin.demo.demo_dir()).

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_posterior_window.py [--steps N]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=1000, help="posterior steps per walker")
    parser.add_argument("--proposal", default=None, help="moves: laplace (default with a fit) or stretch")
    parser.add_argument("--walkers", type=int, default=32)
    args = parser.parse_args()

    from speciakin import pipeline
    from speciakin.pipeline.window import COVARIANCE, window_for_campaign
    from speciakin.decision.draws import draws_from_covariance
    from speciakin.demo import demo_dir
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.posterior import proposal_covariance_from_fit, sample_campaign

    folder = demo_dir()
    inputs = pipeline.resolve_inputs(folder)
    model, campaign, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}")
    objective.log_likelihood_batch(np.repeat(objective.start[None, :], 2, axis=0))  # compile / warm up

    t = time.perf_counter()
    # as `speciakin run` does: profiles too (they widen the proposal where an interval is open)
    fit = fit_campaign(objective, starts=1, profiles=True)
    t_fit = time.perf_counter() - t
    print(f"fit (1 start, with profiles): {t_fit:.1f} s")

    se = np.array([fit.fit.parameter(k).standard_error for k in fit.keys], float)
    t = time.perf_counter()
    covariance, note = proposal_covariance_from_fit(fit) if args.proposal != "stretch" else (None, None)
    post = sample_campaign(objective, fit.theta, se, n_walkers=args.walkers, n_steps=args.steps, seed=1,
                           progress=False, covariance=covariance, proposal=args.proposal)
    print(f"moves: {post.proposal} ({note or 'fit covariance used' if covariance is not None else 'no covariance'})")
    t_post = time.perf_counter() - t
    tau = np.asarray(post.diagnostics.autocorrelation_time, float)
    ratio = args.steps / np.nanmax(tau) if np.all(np.isfinite(tau)) else float("nan")
    per_eval = t_post / max(post.n_likelihood_evaluations, 1) * 1e3
    print(f"posterior: {args.walkers} walkers x {args.steps} steps in {t_post:.1f} s "
          f"({per_eval:.2f} ms per likelihood evaluation of 6 runs); chain = {ratio:.0f} x the longest "
          f"autocorrelation time (50 x needed); target 300 s -> ratio {t_post / 300:.2f}")
    if np.isfinite(ratio):
        needed = 50.0 * np.nanmax(tau)
        print(f"  50 x tau = {needed:.0f} steps -> {t_post / args.steps * needed:.0f} s at this speed "
              f"(target 300 s -> ratio {t_post / args.steps * needed / 300:.2f}); tau per parameter: "
              + ", ".join(f"{v:.1f}" for v in tau))

    import dataclasses

    draws = draws_from_covariance(fit.theta, fit.covariance, 500, 1).draws
    plan = dataclasses.replace(process, second_factor=None, ph_from=3.0, ph_to=7.0, ph_step=0.1)
    t = time.perf_counter()
    result = window_for_campaign(objective, plan, draws, COVARIANCE)
    t_win = time.perf_counter() - t
    print(f"window: {result.ph.size} pH values x {result.n_draws} draws = "
          f"{result.ph.size * result.n_draws} process simulations in {t_win:.1f} s "
          f"({t_win / (result.ph.size * result.n_draws) * 1e3:.2f} ms each); target 60 s -> ratio {t_win / 60:.2f}")
    print(f"load average at the end: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
