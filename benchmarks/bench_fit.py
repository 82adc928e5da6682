"""Time of the global campaign fit and of its profile likelihoods.

Targets (issue "global least-squares fit"): the fit of the bundled demo campaign in
under 30 s, fit plus profiles of every fitted parameter in under 3 min.

Input: the INVENTED demo campaign in data_templates/demo (model.toml +
campaign.xlsx).  When that folder is missing, the benchmark falls back to the
small INVENTED synthetic campaign of tests/estimation/campaign_synthetic.py and
says so in its output.  Figures depend on the machine and its load; the run
prints the core count and the load average beside them.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_fit.py [--starts N] [--no-profiles] [--synthetic]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path


ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_templates" / "demo"
FIT_TARGET_S = 30.0
TOTAL_TARGET_S = 180.0


def _inputs(synthetic: bool = False):
    """(model, campaign, label) of the demo campaign, or of the synthetic fallback."""
    from speciakin.chemistry.modelfile import load_model

    if not synthetic and (DEMO / "model.toml").is_file() and (DEMO / "campaign.xlsx").is_file():
        from speciakin.data.importer import load_campaign

        return load_model(DEMO / "model.toml"), load_campaign(DEMO), f"demo campaign {DEMO}"
    sys.path.insert(0, str(ROOT / "tests" / "estimation"))
    from campaign_synthetic import (SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model,  # noqa: E402
                                    synthetic_campaign)

    model = small_model()
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=1)
    reason = "--synthetic given" if synthetic else "data_templates/demo not found"
    return model, campaign, f"FALLBACK: small synthetic campaign ({reason}); not the demo targets' input"


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--starts", type=int, default=None, help="starting points (default: the model file's)")
    parser.add_argument("--no-profiles", action="store_true", help="time the fit only")
    parser.add_argument("--synthetic", action="store_true", help="use the small synthetic campaign")
    args = parser.parse_args()

    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.objective import CampaignObjective

    t0 = time.perf_counter()
    model, campaign, label = _inputs(args.synthetic)
    t_load = time.perf_counter() - t0
    objective = CampaignObjective(model, campaign)
    theta = objective.start
    objective.residuals(theta)  # compile / load the kernel cache before timing
    t1 = time.perf_counter()
    for _ in range(5):
        objective.residuals(theta)
    t_res = (time.perf_counter() - t1) / 5
    t1 = time.perf_counter()
    objective.jacobian(theta)
    t_jac = time.perf_counter() - t1

    print(f"input: {label}")
    print(f"cores: {os.cpu_count()}   load average: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    print(f"runs: {len(objective.runs)}   HPLC values: {objective.n_hplc}   titrant points: {objective.n_titrant}"
          f"   fitted parameters: {len(objective.parameters)}")
    print(f"load model + campaign: {t_load:8.2f} s")
    print(f"one residual vector:   {t_res:8.4f} s")
    print(f"one Jacobian ({2 * len(theta)} sets): {t_jac:8.4f} s   ratio to one residual: {t_jac / t_res:.1f}",
          flush=True)

    stages: dict[str, list[float]] = {}

    def progress(stage, done, total):
        stages.setdefault(stage, []).append(time.perf_counter())
        print(f"  ... {stage} {done}/{total} at {time.perf_counter() - t2:7.1f} s", flush=True)

    t2 = time.perf_counter()
    result = fit_campaign(objective, starts=args.starts, profiles=not args.no_profiles, progress=progress)
    total = time.perf_counter() - t2
    t_fit = result.elapsed.get("fit", float("nan"))
    t_prof = result.elapsed.get("profiles", float("nan"))
    print(f"fit ({result.fit.n_varying} parameters, {len(result.fit.starts)} starts): {t_fit:8.2f} s   "
          f"target < {FIT_TARGET_S:.0f} s   {'MET' if t_fit < FIT_TARGET_S else 'MISSED'}   "
          f"ratio to target: {t_fit / FIT_TARGET_S:.2f}")
    if not args.no_profiles:
        print(f"profiles: {t_prof:8.2f} s")
        print(f"fit + profiles: {total:8.2f} s   target < {TOTAL_TARGET_S:.0f} s   "
              f"{'MET' if total < TOTAL_TARGET_S else 'MISSED'}   ratio to target: {total / TOTAL_TARGET_S:.2f}")
    print(f"converged: {result.fit.success}   reduced chi-square: {result.fit.reduced_chisqr:.3f}")
    for row in result.rows():
        print(f"  {row['name']:<36} {row['value']:10.4g}  implied {row['implied_value']:10.4g}")
    truth_file = DEMO / "truth.json"
    if label.startswith("demo") and truth_file.is_file():
        import json

        truth = json.loads(truth_file.read_text()).get("parameters", {})
        errors = [abs(r["implied_value"] - truth[r["name"]]) for r in result.rows() if r["name"] in truth]
        if errors:
            print(f"largest |fitted - true| over {len(errors)} parameters with a stated truth: {max(errors):.3g}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
