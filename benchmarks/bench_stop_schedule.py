"""Where the demo posterior would stop under other check schedules (same criteria), and what a check costs.

A convergence check is a function of the stored chain alone and the chain does not depend on the
stop rule (docs/sampling.md, "Stopping when converged"), so one fixed-length run per seed tells
where a run until converged stops for every schedule: this script samples the INVENTED demo
campaign (``speciakin.demo.demo_dir()``) for ``--steps`` steps with the default moves, then
applies ``check_chain`` to the stored chain at every ``--grain`` steps and prints, for each
schedule (first check, interval), the first step where every criterion holds (chain >= 50 tau,
rank R-hat <= 1.01, bulk and tail ESS >= 400; the criteria are not changed) and the CPU time its
checks cost, beside the sampling time per step measured in the same run.

The fit (with profiles, seed 1, as ``speciakin run``) is cached in ``--fit-cache`` (a fit.json
written by this script) so that several seeds can be run in turn.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_stop_schedule.py
      [--seeds 1 2] [--steps 1200] [--grain 10] [--fit-cache /tmp/demo_fit.json]
"""

from __future__ import annotations

import argparse
import json
import os
import time
from pathlib import Path

import numpy as np

#: (first check, interval) [steps]: the schedules compared; the first is the library default.
SCHEDULES = ((400, 200), (400, 100), (400, 50), (350, 50), (400, 20), (320, 20), (310, 10))


def load() -> str:
    return "/".join(f"{x:.1f}" for x in os.getloadavg())


def demo_fit(objective, cache: Path | None):
    from speciakin.pipeline.fit import CampaignFitResult, fit_campaign

    if cache is not None and cache.is_file():
        return CampaignFitResult.from_dict(json.loads(cache.read_text()))
    t = time.perf_counter()
    fit = fit_campaign(objective, seed=1, profiles=True)
    print(f"fit with profiles: {time.perf_counter() - t:.1f} s (load {load()})")
    if cache is not None:
        cache.write_text(fit.to_json())
    return fit


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, nargs="+", default=[1])
    parser.add_argument("--steps", type=int, default=1200, help="fixed steps per seed")
    parser.add_argument("--grain", type=int, default=10, help="steps between the post-hoc checks")
    parser.add_argument("--fit-cache", type=Path, default=None)
    args = parser.parse_args()

    from speciakin import pipeline
    from speciakin.demo import demo_dir
    from speciakin.estimation.proposals import warm_up_iterations
    from speciakin.estimation.stopping import check_chain
    from speciakin.pipeline.posterior import proposal_covariance_from_fit, sample_campaign

    model, campaign, _ = pipeline.load_inputs(pipeline.resolve_inputs(demo_dir()))
    objective = pipeline.make_objective(model, campaign)
    objective.log_likelihood_batch(np.repeat(objective.start[None, :], 2, axis=0))  # compile / warm up
    fit = demo_fit(objective, args.fit_cache)
    se = np.array([fit.fit.parameter(k).standard_error for k in fit.keys], float)
    covariance, _ = proposal_covariance_from_fit(fit)
    print(f"machine: {os.cpu_count()} cores, load average (1/5/15 min) {load()}")
    for seed in args.seeds:
        l0, t, c = load(), time.perf_counter(), time.process_time()
        post = sample_campaign(objective, fit.theta, se, n_steps=args.steps, seed=seed, progress=False,
                               covariance=covariance)
        wall, cpu = time.perf_counter() - t, time.process_time() - c
        print(f"seed {seed}: {post.n_walkers} walkers x {args.steps} steps ({post.proposal}) in {wall:.1f} s wall, "
              f"{cpu:.1f} s CPU = {wall / args.steps * 1e3:.0f} ms wall, {cpu / args.steps * 1e3:.0f} ms CPU per step; "
              f"load {l0} -> {load()}")
        warm_up = warm_up_iterations(post.proposal)
        checks, cost = {}, {}
        for step in range(args.grain, args.steps + 1, args.grain):
            if step <= warm_up:
                continue
            c = time.process_time()
            checks[step] = check_chain(post.chain[:step], post.parameter_names, step, 50.0, warm_up)
            cost[step] = time.process_time() - c
        passing = [s for s, k in checks.items() if k.passed]
        print(f"  passing at steps: {passing[:12]}{' ...' if len(passing) > 12 else ''}")
        for s in (400, 600, 800, 1000, 1200):
            if s in checks:
                print(f"  check at {s}: {checks[s].short()}")
        print(f"  {'first check':>12}{'interval':>9}{'stops at':>9}{'checks':>7}{'check CPU s':>12}"
              f"{'saved steps':>12}{'saved s (at this run speed)':>29}")
        default_stop = None
        for first, every in SCHEDULES:
            at = [s for s in checks if s >= first and (s - first) % every == 0]
            stop = next((s for s in at if checks[s].passed), None)
            made = [s for s in at if stop is None or s <= stop]
            spent = sum(cost[s] for s in made)
            if default_stop is None:
                default_stop = stop
            saved = (default_stop - stop) if stop is not None and default_stop is not None else None
            print(f"  {first:>12}{every:>9}{stop if stop else 'beyond':>9}{len(made):>7}{spent:>12.2f}"
                  f"{'' if saved is None else saved:>12}"
                  f"{'' if saved is None else f'{saved * wall / args.steps - spent:.1f}':>29}")


if __name__ == "__main__":
    main()
