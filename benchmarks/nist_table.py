"""Log relative errors (LRE) of the estimation layer on all 27 NIST StRD nonlinear problems.

Prints, for both NIST starting points, the smallest LRE over the parameters,
over the standard errors and of the residual sum of squares, for the default
Jacobian (optimizer differences, central differences with Richardson
extrapolation at the optimum) and for the complex-step Jacobian, with the time
of each fit and the ratio of the two times.  A second table compares a plain
local Levenberg-Marquardt fit (lmfit "leastsq", one start) with the multistart
search from start 1.

Run:  .venv/bin/python benchmarks/nist_table.py [--markdown]
Reference data: tests/data/nist_strd (NIST Statistical Reference Datasets, public domain).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

from speciakin.errors import SolverError
from speciakin.estimation import ParameterSpec, fit_least_squares

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "estimation"))
from nist_strd import NIST_FOLDER, NIST_MODELS, log_relative_error, read_nist_file  # noqa: E402


def _scores(prob, fit):
    lre_p = min(log_relative_error(v, c) for v, c in zip(fit.value_vector, prob.certified_values))
    se = [p.standard_error for p in fit.parameters]
    lre_s = min(log_relative_error(v, c) for v, c in zip(se, prob.certified_standard_errors))
    lre_r = log_relative_error(fit.chisqr, prob.certified_rss)
    return lre_p, lre_s, lre_r


def _run(prob, start, **options):
    specs = [ParameterSpec(f"b{i + 1}", float(v)) for i, v in enumerate(start)]
    t0 = time.perf_counter()
    try:
        fit = fit_least_squares(prob.residual, specs, **options)
    except SolverError as exc:
        return None, time.perf_counter() - t0, str(exc)
    return fit, time.perf_counter() - t0, fit.message


def main(argv: list[str]) -> int:
    folder = NIST_FOLDER
    sep = " | " if "--markdown" in argv else "  "
    head = ["dataset", "level", "start", "LRE b", "LRE se", "LRE RSS", "ok", "t [ms]",
            "LRE b (cs)", "LRE se (cs)", "ok (cs)", "t [ms] (cs)", "t cs / t"]
    print(sep.join(f"{h:>11}" for h in head))
    for name in NIST_MODELS:
        prob = read_nist_file(folder / f"{name}.dat")
        for k, start in ((1, prob.start1), (2, prob.start2)):
            row = [name, prob.difficulty, str(k)]
            times = []
            for jac in (None, "complex"):
                fit, seconds, _ = _run(prob, start, starts=1, jacobian=jac)
                times.append(seconds)
                if fit is None:
                    row += ["fail", "fail"] + ([] if jac else ["fail"]) + ["no", f"{1e3 * seconds:.0f}"]
                    continue
                lp, ls, lr = _scores(prob, fit)
                row += [f"{lp:.1f}", f"{ls:.1f}"] + ([] if jac else [f"{lr:.1f}"])
                row += ["yes" if fit.success else "no", f"{1e3 * seconds:.0f}"]
            row.append(f"{times[1] / times[0]:.2f}")
            print(sep.join(f"{c:>11}" for c in row))
    print()
    print("Plain local Levenberg-Marquardt (leastsq, 1 start) against multistart ('auto', seed 0), start 1")
    head = ["dataset", "local ok", "local RSS/cert", "multi ok", "multi LRE b", "best start", "t local", "t multi",
            "ratio"]
    print(sep.join(f"{h:>14}" for h in head))
    for name in NIST_MODELS:
        prob = read_nist_file(folder / f"{name}.dat")
        local, t_local, _ = _run(prob, prob.start1, starts=1, method="leastsq", tolerance=1e-10,
                                 max_evaluations=2000)
        multi, t_multi, _ = _run(prob, prob.start1, starts="auto", seed=0, method="leastsq", tolerance=1e-10,
                                 max_evaluations=2000)
        row = [name,
               "error" if local is None else ("yes" if local.success else "no"),
               "-" if local is None else f"{local.chisqr / prob.certified_rss:.4g}",
               "error" if multi is None else ("yes" if multi.success else "no"),
               "-" if multi is None else f"{_scores(prob, multi)[0]:.1f}",
               "-" if multi is None else str(multi.best_start),
               f"{t_local:.3f}", f"{t_multi:.3f}", f"{t_multi / t_local:.1f}"]
        print(sep.join(f"{c:>14}" for c in row))
    return 0


if __name__ == "__main__":
    with np.errstate(all="ignore"):
        sys.exit(main(sys.argv[1:]))
