"""Time of the demo posterior (run until converged) and of the demo pH window (the decision step).

Targets: the demo's converged posterior in <= 60 s warm on two cores (issue "Speed where users
wait"; earlier target 5 minutes for 50 autocorrelation times); the window with 41 pH values x
500 draws in under 1 minute.  Measured in one run after a warm-up call that excludes numba
compilation.

The posterior runs with the library default: until the convergence criteria of
docs/sampling.md hold (chain >= 50 tau, rank R-hat <= 1.01, bulk and tail ESS >= 400, checked
every 200 steps from step 400, cap 5000), or a fixed length with --steps.  Reference measured in
the same run: the demo log-likelihood of the batches the moves send (all walkers in one batch for
the independence move, two half-batches for differential evolution), timed in blocks before and
after sampling (best and median), so that the posterior time can be read against the host's
speed at the time (it moves by up to 2x); the script prints the time the sampled steps would take
at the reference speed and the ratio, the old fixed default of 2000 steps at the measured speed,
the core count and the load average (the machine may be shared).

With --compare NAME the script also runs the move choice NAME (e.g. laplace, the default before the
adaptive moves) until converged, alternating with the default, --rounds times, and prints each
run's time, steps at stop, stop reason and the load average beside it (the host's load moves the
times; the steps at stop do not depend on it).

Input: the bundled INVENTED demo campaign (speciakin.demo.demo_dir()).

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_posterior_window.py [--steps N]
      [--compare laplace --rounds 1]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

POSTERIOR_TARGET_S = 60.0
OLD_FIXED_STEPS = 2000


def batch_blocks(objective, theta: np.ndarray, blocks: int) -> np.ndarray:
    """Seconds per call of the batched log-likelihood on ``theta``, one call per block."""
    times = []
    for _ in range(blocks):
        t = time.perf_counter()
        objective.log_likelihood_batch(theta)
        times.append(time.perf_counter() - t)
    return np.array(times)


def load() -> str:
    return " ".join(f"{x:.2f}" for x in os.getloadavg())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=None, help="fixed steps per walker (default: until converged)")
    parser.add_argument("--proposal", default=None, help="moves: laplace (default with a fit) or stretch")
    parser.add_argument("--walkers", type=int, default=32)
    parser.add_argument("--blocks", type=int, default=15, help="reference blocks before and after sampling")
    parser.add_argument("--compare", default=None, help="another move choice run alternately with --proposal")
    parser.add_argument("--rounds", type=int, default=1, help="alternating rounds with --compare")
    args = parser.parse_args()

    from speciakin import pipeline
    from speciakin.pipeline.window import COVARIANCE, window_for_campaign
    from speciakin.decision.draws import draws_from_covariance
    from speciakin.demo import demo_dir
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.posterior import proposal_covariance_from_fit, sample_campaign
    from speciakin.estimation.proposals import ADAPTIVE_WEIGHTS, LAPLACE_WEIGHTS

    folder = demo_dir()
    inputs = pipeline.resolve_inputs(folder)
    model, campaign, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    print(f"machine: {os.cpu_count()} cores, load average (1, 5, 15 min) {load()}")
    objective.log_likelihood_batch(np.repeat(objective.start[None, :], 2, axis=0))  # compile / warm up

    t = time.perf_counter()
    # as `speciakin run` does: profiles too (they widen the proposal where an interval is open)
    fit = fit_campaign(objective, starts=1, profiles=True)
    t_fit = time.perf_counter() - t
    print(f"fit (1 start, with profiles): {t_fit:.1f} s")

    se = np.array([fit.fit.parameter(k).standard_error for k in fit.keys], float)
    covariance, note = proposal_covariance_from_fit(fit) if args.proposal != "stretch" else (None, None)
    # reference: the likelihood batches of one step, at sets spread like the posterior
    spread = draws_from_covariance(fit.theta, fit.covariance, args.walkers, 2).draws
    full, half = spread, spread[: args.walkers // 2]
    before = (batch_blocks(objective, full, args.blocks), batch_blocks(objective, half, args.blocks))

    def timed_posterior(proposal):
        start_load = load()
        t = time.perf_counter()
        result = sample_campaign(objective, fit.theta, se, n_walkers=args.walkers, n_steps=args.steps, seed=1,
                                 progress=False, covariance=covariance, proposal=proposal)
        elapsed = time.perf_counter() - t
        print(f"posterior ({result.proposal}): {elapsed:.1f} s, {result.n_steps} steps, stopped: "
              f"{result.stop_reason}; load average {start_load} at the start, {load()} at the end")
        return result, elapsed

    if args.compare:
        rows = {}
        for _ in range(args.rounds):
            for proposal in (args.proposal, args.compare):
                result, elapsed = timed_posterior(proposal)
                rows.setdefault(result.proposal, []).append((elapsed, result.n_steps, result.stop_reason))
        for name, runs in rows.items():
            times = np.array([r[0] for r in runs])
            print(f"converged posterior, {name}: best {times.min():.1f} s, median {np.median(times):.1f} s "
                  f"over {len(runs)} run(s); steps at stop {sorted({r[1] for r in runs})}, "
                  f"stop reasons {sorted({r[2] for r in runs})}")
        names = list(rows)
        if len(names) == 2:
            ratio = np.median([r[0] for r in rows[names[0]]]) / np.median([r[0] for r in rows[names[1]]])
            print(f"median time {names[0]} / {names[1]} = {ratio:.2f} (alternating runs, same process)")
    post, t_post = timed_posterior(args.proposal)
    load_after_sampling = load()
    after = (batch_blocks(objective, full, args.blocks), batch_blocks(objective, half, args.blocks))
    full_blocks, half_blocks = np.concatenate([before[0], after[0]]), np.concatenate([before[1], after[1]])

    print(f"moves: {post.proposal} ({note or 'fit covariance used' if covariance is not None else 'no covariance'})")
    steps = post.n_steps
    tau = np.asarray(post.diagnostics.autocorrelation_time, float)
    per_eval = t_post / max(post.n_likelihood_evaluations, 1) * 1e3
    print(f"posterior: {args.walkers} walkers x {steps} steps in {t_post:.1f} s "
          f"({t_post / steps:.3f} s per step, {per_eval:.2f} ms per likelihood evaluation of 6 runs); "
          f"load average at its end {load_after_sampling}")
    print(f"  stopped: {post.stop_message}")
    for c in post.stop_checks:
        print(f"  check at step {c['step']}: " + ("passed" if c["passed"] else "; ".join(c["failing"])))
    if np.all(np.isfinite(tau)):
        print(f"  chain = {steps / np.max(tau):.0f} x the longest tau; tau per parameter: "
              + ", ".join(f"{v:.1f}" for v in tau))
    # one step: the independence move (weight w) sends one full batch, differential evolution
    # (weight 1 - w) two half batches (docs/sampling.md, "Moves")
    w = {"adaptive": ADAPTIVE_WEIGHTS, "laplace": LAPLACE_WEIGHTS}.get(post.proposal, {"independence": 0.0})
    w = w["independence"]
    step_best = w * full_blocks.min() + 2 * (1 - w) * half_blocks.min()
    step_median = w * np.median(full_blocks) + 2 * (1 - w) * np.median(half_blocks)
    print(f"reference (same run, {2 * args.blocks} blocks each): likelihood of {args.walkers} sets "
          f"{full_blocks.min() * 1e3:.0f} ms best / {np.median(full_blocks) * 1e3:.0f} ms median, of "
          f"{len(half)} sets {half_blocks.min() * 1e3:.0f} / {np.median(half_blocks) * 1e3:.0f} ms -> "
          f"{steps} steps at the reference speed: {steps * step_best:.1f} s best, {steps * step_median:.1f} s "
          f"median; posterior / reference median = {t_post / (steps * step_median):.2f}")
    print(f"converged posterior: {t_post:.1f} s against the target {POSTERIOR_TARGET_S:.0f} s -> ratio "
          f"{t_post / POSTERIOR_TARGET_S:.2f} (at the best reference speed: "
          f"{steps * step_best / POSTERIOR_TARGET_S:.2f}); the old fixed default of {OLD_FIXED_STEPS} steps "
          f"would take {t_post / steps * OLD_FIXED_STEPS:.0f} s at the measured speed "
          f"(ratio converged / fixed {steps / OLD_FIXED_STEPS:.2f})")

    import dataclasses

    draws = draws_from_covariance(fit.theta, fit.covariance, 500, 1).draws
    plan = dataclasses.replace(process, second_factor=None, ph_from=3.0, ph_to=7.0, ph_step=0.1)
    t = time.perf_counter()
    result = window_for_campaign(objective, plan, draws, COVARIANCE)
    t_win = time.perf_counter() - t
    print(f"window: {result.ph.size} pH values x {result.n_draws} draws = "
          f"{result.ph.size * result.n_draws} process simulations in {t_win:.1f} s "
          f"({t_win / (result.ph.size * result.n_draws) * 1e3:.2f} ms each); target 60 s -> ratio {t_win / 60:.2f}")
    print(f"load average at the end: {load()}")


if __name__ == "__main__":
    main()
