"""Accuracy per cost of the compiled kernel on the kernel benchmark's workload.

Workload: that of ``bench_kernel.py`` (six held-pH runs of the invented
two-site substrate, 40 outputs over 3 h each; the observed outputs are the
concentrations of S, P_alkyl, P_aryl and P_both).

Accuracy: the largest deviation of the observed outputs from a reference
computed by the same kernel at rtol 1e-11 (atol scaled by the same factor,
1e-15 mol against the default 1e-10), each deviation relative to
max(|y_ref|, 1e-5 of the substrate's start concentration) (issue 16's
metric).  The reference itself is checked against scipy's solve_ivp
(Radau, rtol 1e-11) with the independent right-hand side of
``bench_kernel.py``.

Cost: the time of one likelihood evaluation (the six runs on one core,
``batch_log_likelihood``) at each tolerance, measured in alternating blocks
in one run (best and median of the blocks, wall and CPU time, median of the
paired ratios to the first tolerance, load average beside); the accepted
steps beside it.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_accuracy.py
      [--rtol 1e-6,6e-7,5e-7:1e-12] [--blocks 40] [--no-scipy]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench_kernel as bk  # noqa: E402

from speciakin.simulation import batch_log_likelihood, compile_model, compile_runs, simulate_batch  # noqa: E402

#: Default tolerances of the kernel (``simulation.api``): rtol, atol [mol].
DEFAULT_RTOL, DEFAULT_ATOL = 1e-6, 1e-10
#: The reference's rtol; its atol is the default's scaled by the same factor.
REFERENCE_RTOL = 1e-11
#: Floor of the metric's scale, as a share of the substrate's start concentration.
FLOOR_SHARE = 1e-5
#: Target of issue 16 for the default tolerance.
TARGET = 1e-6


def deviation(outputs: np.ndarray, reference: np.ndarray, floor: float) -> np.ndarray:
    """|y - y_ref| / max(|y_ref|, floor), element by element."""
    return np.abs(outputs - reference) / np.maximum(np.abs(reference), floor)


def observed(compiled, result) -> np.ndarray:
    """Observed concentrations [mol/L] (runs, times, species) of the first parameter set."""
    idx = [compiled.species_index(n) for n in bk.OBSERVED]
    out = result.outputs[0]
    return out[:, :, idx] / out[:, :, compiled.n_species:compiled.n_species + 1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rtol", default="1e-6",
                        help="comma-separated tolerances to measure, each RTOL (atol scaled with rtol) or RTOL:ATOL "
                             "(default 1e-6, the default tolerances; the first is the one the others are timed against)")
    parser.add_argument("--blocks", type=int, default=40, help="timing blocks per tolerance (default 40)")
    parser.add_argument("--no-scipy", action="store_true", help="skip the scipy check of the reference")
    args = parser.parse_args()
    pairs = [[float(x) for x in v.split(":")] for v in args.rtol.split(",") if v]

    model = bk.build_model()
    compiled = compile_model(model)
    runs = bk.build_runs()
    cruns = compile_runs(compiled, runs, [bk.TIMES] * len(runs))
    q0 = compiled.nominal[None, :]
    start = runs[0].charges["S"] / runs[0].volume
    floor = FLOOR_SHARE * start

    def atol_for(rtol):
        return DEFAULT_ATOL * rtol / DEFAULT_RTOL

    ref_res = simulate_batch(compiled, cruns, q0, rtol=REFERENCE_RTOL, atol=atol_for(REFERENCE_RTOL),
                             parallel=False)
    if np.any(ref_res.status != 0):
        raise SystemExit(f"reference failed: status {ref_res.status.tolist()}")
    ref = observed(compiled, ref_res)
    print(f"reference: kernel at rtol {REFERENCE_RTOL:g}, atol {atol_for(REFERENCE_RTOL):g} "
          f"(accepted steps {ref_res.steps[0].tolist()})")
    if not args.no_scipy:
        # the reference against scipy (Radau, rtol 1e-11) with bench_kernel's own right-hand side
        y0s = cruns.arrays.y0.copy()
        na = compiled.species_index("Na")
        for r in range(len(runs)):
            y0s[r, na] += ref_res.initial_titrant[0, r]
            y0s[r, compiled.n_species] += ref_res.initial_titrant[0, r] / 2.0
        y0s = y0s[:, :compiled.n_species + 2]
        log10k = compiled.nominal[np.asarray(compiled.arrays.step_logk_q)]
        _, scipy_ref = bk.scipy_evaluation(compiled, y0s, log10k, 1e-11, 1e-16, ref, np.ones_like(ref))
        print(f"reference vs scipy Radau rtol 1e-11: largest deviation {deviation(ref, scipy_ref, floor).max():.2e} "
              f"(same metric)")

    # data for the likelihood (its value is not what is measured)
    sigma_obs = 0.002 + 0.01 * ref
    data = np.full(ref_res.outputs.shape[1:], np.nan)
    sigma = np.ones_like(data)
    idx = [compiled.species_index(n) for n in bk.OBSERVED]
    data[:, :, idx] = ref
    sigma[:, :, idx] = sigma_obs

    tolerances = [(p[0], p[1] if len(p) > 1 else atol_for(p[0])) for p in pairs]
    calls = []
    for rtol, atol in tolerances:
        res = simulate_batch(compiled, cruns, q0, rtol=rtol, atol=atol, parallel=False)
        dev = deviation(observed(compiled, res), ref, floor)
        worst = np.unravel_index(int(np.argmax(dev)), dev.shape)
        per_species = ", ".join(f"{n} {dev[:, :, j].max():.2e}" for j, n in enumerate(bk.OBSERVED))
        print(f"rtol {rtol:g}, atol {atol:g}: largest deviation {dev.max():.2e} (run {runs[worst[0]].name}, "
              f"t = {bk.TIMES[worst[1]]:.0f} s, {bk.OBSERVED[worst[2]]}; {per_species}); "
              f"{'meets' if dev.max() <= TARGET else 'misses'} {TARGET:g}; accepted steps "
              f"{int(res.steps[0].sum())} {res.steps[0].tolist()}")

        def call(rtol=rtol, atol=atol):
            batch_log_likelihood(compiled, cruns, q0, data, sigma, rtol=rtol, atol=atol, parallel=False)
        call()
        calls.append(call)

    load = os.getloadavg()
    # wall and CPU time of this process per block (on a crowded host the wall time mostly measures waiting)
    times = np.zeros((2, len(tolerances), args.blocks))
    for b in range(args.blocks):
        order = range(len(tolerances)) if b % 2 == 0 else reversed(range(len(tolerances)))
        for i in order:
            t0, c0 = time.perf_counter(), time.process_time()
            for _ in range(20):
                calls[i]()
            times[:, i, b] = (time.perf_counter() - t0) / 20, (time.process_time() - c0) / 20
    load_after = os.getloadavg()
    for i, (rtol, atol) in enumerate(tolerances):
        for kind, t in zip(("wall", "CPU"), times):
            ratio = f"; median paired ratio to the first: {np.median(t[i] / t[0]):.3f}" if i else ""
            print(f"rtol {rtol:g}, atol {atol:g}: time per evaluation ({kind}) best {t[i].min() * 1e3:.3f} ms, "
                  f"median {np.median(t[i]) * 1e3:.3f} ms ({args.blocks} blocks of 20, alternating){ratio}")
    print(f"load average {load[0]:.2f} before, {load_after[0]:.2f} after timing ({os.cpu_count()} cores)")


if __name__ == "__main__":
    main()
