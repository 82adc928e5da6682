"""Speed of the demo campaign's likelihood, measured side by side in one run.

The workload is the objective ``speciakin fit`` builds for the bundled,
invented demo campaign (``speciakin.demo``: ``model.toml`` and
``campaign.xlsx``; ``pipeline.make_objective``): six runs, four held at pH
4.0-8.5 under a logged temperature profile, one logged-pH run, one free-pH run.
Printed, each as the best of several blocks with the median beside it (the
host is a shared virtual machine whose speed moves by up to 2x in spells of a
few seconds):

* the log-likelihood of one parameter set on one core
  (``CampaignObjective.log_likelihood_batch``, parallel off), and the kernel
  alone for that set (``batch_tasks`` on one core) so that the Python around it shows;
* the log-likelihood of 64 parameter sets over all cores, per set;
* the cost of each run alone (one set, one core, kernel only) with its
  accepted steps and segments, and, for held and logged pH, the sub-segments
  (segments after halving) and full speciation evaluations of the coefficient
  cubics (:func:`coefficient_evaluations`), so that it shows where the time goes;
* the scipy reference of ``bench_kernel.py`` measured in the same run
  (solve_ivp Radau with a Python right-hand side, six held-pH runs), as the
  ruler the issue asks for;
* the load average before and after.

Targets (issue 16): <= 2 ms best for one set on one core, <= 1.2 ms per set
in a batch of 64 over two cores.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_demo_likelihood.py [--quick]
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_kernel  # noqa: E402  (the scipy reference and the block timer)

from speciakin.demo import demo_dir  # noqa: E402
from speciakin.pipeline import load_inputs, make_objective, resolve_inputs  # noqa: E402
from speciakin.simulation import compile_runs  # noqa: E402
from speciakin.simulation.api import N_INFO  # noqa: E402
from speciakin.simulation.batch_kernel import batch_tasks  # noqa: E402

ONE_SET_TARGET = 2e-3
BATCH_TARGET = 1.2e-3


def load_line(when: str) -> str:
    """The host's load average, for printing beside the figures."""
    load = os.getloadavg()
    return f"load average {when} {load[0]:.2f} {load[1]:.2f} {load[2]:.2f} ({os.cpu_count()} cores)"


def demo_objective():
    """The demo campaign's objective, as ``speciakin fit`` builds it, and its start vector."""
    model, campaign, _ = load_inputs(resolve_inputs(demo_dir()))
    objective = make_objective(model, campaign)
    return objective, objective.start


def kernel_call(objective, theta, run_indices=None):
    """A call of ``batch_tasks`` (one core) on the objective's runs (or a subset) for one set."""
    compiled = objective.compiled
    cruns = objective.compiled_runs
    if run_indices is not None:
        cruns = compile_runs(compiled, [cruns.runs[i] for i in run_indices],
                             [objective.output_times[i] for i in run_indices])
    q, off, fac = objective.kernel_inputs(theta[None, :])
    if run_indices is not None:
        off, fac = off[:, run_indices], fac[:, run_indices]
    n_runs = off.shape[1]
    out = np.full((1, n_runs, cruns.n_times_max, compiled.n_outputs), np.nan)
    status = np.zeros((1, n_runs), np.int64)
    info = np.zeros((1, n_runs, N_INFO))
    args = (compiled.arrays, q, cruns.arrays, off, fac, objective.rtol, objective.atol, out, status, info)

    def call():
        batch_tasks(*args, 0, 1, True, True)  # the variant with every path, as the demo's objective runs

    call()
    if np.any(status != 0):
        raise SystemExit(f"a demo run failed: status {status.tolist()}")
    return call, info[0, :, 1].astype(int)


def coefficient_evaluations(objective, theta, r):
    """(sub-segments, full speciation evaluations) of the coefficient cubics of held or logged run ``r``.

    Counted by running the Python copies (``py_func``) of the run driver and
    of ``segment_kernel.integrate_smooth`` with the compiled speciation
    wrapped by a counter and the step loop replaced by a stub that only
    skips the outputs: where a segment is halved depends on the pH and the
    temperature, never on the amounts, so the counts are those of the
    compiled run.  The module globals are restored afterwards.
    """
    from speciakin.simulation import integrator_kernel, segment_kernel

    counts = {"evaluations": 0, "sub_segments": 0}
    speciation = segment_kernel.time_speciation
    steps = segment_kernel.smooth_steps
    smooth = integrator_kernel.integrate_smooth

    def counted(*args):
        counts["evaluations"] += 1
        return speciation(*args)

    def no_steps(prob, varying, ta, tb, t1, span, y, h, work, rtol, atol, out, out_t, i_out, n_out, *rest):
        counts["sub_segments"] += 1
        while i_out < n_out and out_t[i_out] < tb:
            out[i_out] = 0.0
            i_out += 1
        return 0, h, i_out

    compiled = objective.compiled
    q, off, fac = objective.kernel_inputs(theta[None, :])
    out = np.full((objective.compiled_runs.n_times_max, compiled.n_outputs), np.nan)
    try:
        segment_kernel.time_speciation = counted
        segment_kernel.smooth_steps = no_steps
        integrator_kernel.integrate_smooth = segment_kernel.integrate_smooth.py_func
        ws, sw = integrator_kernel.run_workspaces(compiled.arrays)
        integrator_kernel.run_one.py_func(compiled.arrays, q[0], objective.compiled_runs.arrays, r, off[0, r],
                                          fac[0, r], objective.rtol, objective.atol, out, np.zeros(N_INFO), ws, sw)
    finally:
        segment_kernel.time_speciation = speciation
        segment_kernel.smooth_steps = steps
        integrator_kernel.integrate_smooth = smooth
    return counts["sub_segments"], counts["evaluations"]


def main() -> None:
    quick = "--quick" in sys.argv[1:]
    objective, theta = demo_objective()
    print(load_line("before timing"))
    names = objective.run_names
    print(f"demo objective: {len(names)} runs, {theta.size} fitted parameters, {objective.n_data} data")

    # ---- one set, one core
    objective.parallel = False
    one_theta = theta[None, :]
    objective.log_likelihood_batch(one_theta)
    kernel, steps = kernel_call(objective, theta)
    n_blocks = 15 if quick else 40
    like = bench_kernel.timed_blocks(lambda: objective.log_likelihood_batch(one_theta), 10, n_blocks)
    kern = bench_kernel.timed_blocks(kernel, 10, n_blocks)
    print(f"log-likelihood, one set, one core:   {like.min() * 1e3:8.3f} ms (median {np.median(like) * 1e3:.3f}; "
          f"blocks within {ONE_SET_TARGET * 1e3:g} ms: {np.mean(like <= ONE_SET_TARGET):.0%})")
    print(f"  kernel alone (batch_tasks):        {kern.min() * 1e3:8.3f} ms (median {np.median(kern) * 1e3:.3f}); "
          f"Python around it {max(like.min() - kern.min(), 0.0) * 1e3:.3f} ms")

    # ---- 64 sets over all cores
    objective.parallel = True
    rng = np.random.default_rng(7)
    sets = theta + 0.01 * rng.standard_normal((64, theta.size)) * np.maximum(np.abs(theta), 1e-3)
    ll = objective.log_likelihood_batch(sets)
    batch = bench_kernel.timed_blocks(lambda: objective.log_likelihood_batch(sets), 1, 10 if quick else 25) / 64
    within = np.mean(batch <= BATCH_TARGET)
    print(f"log-likelihood, 64 sets, all cores:  {batch.min() * 1e3:8.3f} ms per set (median "
          f"{np.median(batch) * 1e3:.3f}; blocks within {BATCH_TARGET * 1e3:g} ms: {within:.0%}; "
          f"finite {int(np.sum(np.isfinite(ll)))}/64)")

    # ---- each run alone
    print("each run alone (one set, one core, kernel only; best of blocks, median):")
    total = 0.0
    for i, name in enumerate(names):
        run = objective.compiled_runs.runs[i]
        call, run_steps = kernel_call(objective, theta, [i])
        t = bench_kernel.timed_blocks(call, 10, 8 if quick else 20)
        total += t.min()
        ramp = "ramp" if len(run.temperature.times) > 1 else "flat T"
        # segments: the run's breakpoints as laid out for the kernel
        n_segments = int(objective.compiled_runs.arrays.n_bp[i])
        cubics = ""
        if run.ph.mode != "free":
            subs, evaluations = coefficient_evaluations(objective, theta, i)
            cubics = f"  sub-segments {subs:4d}  speciation evaluations {evaluations:4d}"
        print(f"  {name:<12} {run.ph.mode:<7} {ramp:<6} segments {n_segments:4d}  steps {run_steps[0]:4d}  "
              f"{t.min() * 1e3:7.3f} ms (median {np.median(t) * 1e3:.3f}){cubics}")
    print(f"  sum of the runs' bests: {total * 1e3:.3f} ms; accepted steps in the full call: "
          f"{', '.join(str(s) for s in steps)}")

    # ---- scipy reference of bench_kernel.py, measured in the same run
    ref = bench_kernel.radau_reference()
    print(f"scipy solve_ivp Radau, Python RHS (bench_kernel's six held runs): {ref.min() * 1e3:.1f} ms "
          f"(median {np.median(ref) * 1e3:.1f}); ratio to the demo likelihood one set: "
          f"{ref.min() / like.min():.0f} x, batch per set: {ref.min() / batch.min():.0f} x")
    print(load_line("after timing"))


if __name__ == "__main__":
    main()
