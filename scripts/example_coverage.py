"""How well the fit's standard errors describe its scatter, on seeded copies of the invented example.

Each copy is the example campaign of ``speciakin new --example`` simulated with
another noise seed (``speciakin.data.example.example_campaign(model, seed)``:
the "true" rate constants of ``example.TRUTH``, HPLC and titrant noise as the
example's model file states them).  Every copy is fitted as ``speciakin fit
--no-profiles`` does, and the distance of each estimate from the truth is
measured in its standard errors, z = (estimate - truth) / se.  For calibrated
standard errors z has standard deviation 1.  Printed: the standard deviation
of z per parameter with the covariance as reported (scaled by the observed
scatter, s^2 = chi2 / dof) and with the stated errors (as the posterior uses
them), the mean reduced chi-square, and how many fits warned that the stated
errors look too large.  The figures of 2026-12-05 (300 copies from seed 1001,
before and after closed area% samples were weighed with their joint
covariance) are in docs/estimation.md ("Closed area% samples").

Run:  .venv/bin/python scripts/example_coverage.py [N] [FIRST_SEED]   (default 120 copies from seed 1;
about 1 s per copy with a warm kernel cache)
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np

from speciakin.chemistry.modelfile import load_model
from speciakin.data import example
from speciakin.data.writer import write_campaign
from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
from speciakin.pipeline.fit import fit_campaign


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 120
    first = int(sys.argv[2]) if len(sys.argv) > 2 else 1
    z_reported, z_stated, reduced, warned = [], [], [], 0
    with tempfile.TemporaryDirectory() as tmp:
        for seed in range(first, first + n):
            folder = Path(tmp) / f"copy-{seed}"
            example.new_example(folder)
            (folder / "campaign.xlsx").unlink()
            write_campaign(example.example_campaign(load_model(folder / "model.toml"), seed=seed),
                           folder / "campaign.xlsx")
            model, campaign, _ = load_inputs(resolve_inputs(folder))
            result = fit_campaign(make_objective(model, campaign), profiles=False)
            rows = {r["name"]: r for r in result.rows()}
            names = list(example.TRUTH)
            value = np.array([rows[k]["value"] for k in names])
            se = np.array([rows[k]["standard_error"] for k in names])
            truth = np.array([example.TRUTH[k] for k in names])
            z_reported.append((value - truth) / se)
            z_stated.append((value - truth) / se * np.sqrt(result.fit.reduced_chisqr))
            reduced.append(result.fit.reduced_chisqr)
            warned += any("look too large" in w for w in result.warnings)
    names = ", ".join(example.TRUTH)
    print(f"{n} copies (seeds {first}-{first + n - 1}); parameters {names}")
    print(f"sd of z, covariance as reported:  {np.round(np.std(z_reported, axis=0), 3).tolist()}")
    print(f"sd of z, stated errors:           {np.round(np.std(z_stated, axis=0), 3).tolist()}")
    print(f"mean reduced chi-square {np.mean(reduced):.3f}; fits warning that the stated errors look too large: "
          f"{warned} of {n}")


if __name__ == "__main__":
    main()
