"""The least-squares Jacobian of the demo campaign: forward sensitivities against central differences.

Measured side by side in one run on the objective ``speciakin fit`` builds for
the bundled, invented demo campaign (``speciakin.demo``; six runs: four held
pH under a logged temperature profile, one logged pH, one free pH; eight
fitted parameters):

* the Jacobian at the start point by each method (``CampaignObjective.jacobian``
  with ``jacobian_method`` "sensitivities", the default, and "differences"),
  in alternating blocks, best and median of each and the median of the
  paired ratios;
* how far apart the two are, column by column (largest |difference| over the
  column's largest entry), and how far each is from a fine central
  difference at rtol 1e-10 (step 1e-4, the residuals themselves);
* the demo fit with its profiles by each method (one each; target of issue 16:
  <= 30 s warm), with the chi-square reached and the Jacobian calls;
* the scipy Radau ruler of ``bench_kernel.py`` (six held-pH runs, one evaluation), measured in the
  same run;
* the load average before and after.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_jacobian.py [--blocks N] [--no-fit]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

from speciakin.demo import demo_dir
from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
from speciakin.pipeline.fit import fit_campaign

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench_kernel  # noqa: E402  (the scipy Radau ruler)

FIT_TARGET_S = 30.0
METHODS = ("sensitivities", "differences")


def jacobian_time(objective, theta, method: str) -> float:
    objective.jacobian_method = method
    objective._last_jacobian = None  # nothing remembered: each call computes every column
    t = time.perf_counter()
    objective.jacobian(theta)
    return time.perf_counter() - t


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--blocks", type=int, default=20, help="alternating blocks of each method (default 20)")
    parser.add_argument("--no-fit", action="store_true", help="leave out the fits with profiles")
    args = parser.parse_args()
    print(f"cores: {os.cpu_count()}, load average before: {os.getloadavg()[0]:.2f}")
    model, campaign, _ = load_inputs(resolve_inputs(demo_dir()))
    objective = make_objective(model, campaign)
    theta = objective.start
    for method in METHODS:  # compile or load both paths
        jacobian_time(objective, theta, method)
    times = {m: [] for m in METHODS}
    for block in range(args.blocks):
        order = METHODS if block % 2 == 0 else METHODS[::-1]
        for method in order:
            times[method].append(jacobian_time(objective, theta, method))
    print(f"\nJacobian at the start point ({len(objective.parameters)} columns, {objective.n_data} residuals), "
          f"{args.blocks} alternating blocks:")
    for method in METHODS:
        t = np.array(times[method]) * 1e3
        print(f"  {method:14s} best {t.min():7.1f} ms   median {np.median(t):7.1f} ms")
    ratio = np.array(times["sensitivities"]) / np.array(times["differences"])
    print(f"  sensitivities / differences: median of the paired ratios {np.median(ratio):.2f}")
    ruler = bench_kernel.radau_reference()
    print(f"  {bench_kernel.radau_line(ruler)}; the Jacobian by sensitivities costs "
          f"{min(times['sensitivities']) / ruler.min():.2f} of it, by differences "
          f"{min(times['differences']) / ruler.min():.2f}")

    jac = {}
    for method in METHODS:
        objective.jacobian_method = method
        objective._last_jacobian = None
        jac[method] = objective.jacobian(theta)
    fine = make_objective(model, campaign)
    fine.rtol, fine.atol = 1e-10, 1e-14
    h = 1e-4
    fd = np.column_stack([(fine.residuals(theta + h * e) - fine.residuals(theta - h * e)) / (2 * h)
                          for e in np.eye(theta.size)])

    def apart(a, b):
        return np.max(np.abs(a - b), axis=0) / np.max(np.abs(b), axis=0)

    np.set_printoptions(precision=1)
    print("\nColumn by column, largest |difference| / the column's largest entry:")
    print(f"  sensitivities vs differences:            {apart(jac['sensitivities'], jac['differences'])}")
    print(f"  sensitivities vs fine difference (1e-10): {apart(jac['sensitivities'], fd)}")
    print(f"  differences vs fine difference (1e-10):   {apart(jac['differences'], fd)}")

    if not args.no_fit:
        print(f"\nDemo fit with profiles (target <= {FIT_TARGET_S:.0f} s warm):")
        for method in METHODS:
            obj = make_objective(model, campaign)
            obj.jacobian_method = method
            calls = [0]
            plain = obj.jacobian

            def counted(t, columns=None, plain=plain, calls=calls):
                calls[0] += 1
                return plain(t, columns)

            obj.jacobian = counted
            t = time.perf_counter()
            result = fit_campaign(obj)
            total = time.perf_counter() - t
            print(f"  {method:14s} fit {result.elapsed['fit']:5.1f} s + profiles {result.elapsed['profiles']:5.1f} s"
                  f" = {total:5.1f} s ({'met' if total <= FIT_TARGET_S else 'NOT met'}); chi-square "
                  f"{result.fit.chisqr:.6f}; Jacobian calls {calls[0]}")
    print(f"\nload average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
