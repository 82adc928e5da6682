"""Speed of the numpy speciation engine.

Prints, measured side by side in one run:

* time to speciate a 6-site molecule (invented demo compound) at 10,000 pH
  values: populations, site fractions, mean charge (target well under 0.1 s);
* the same for 10 sites, for scale;
* time per charge-balance solve (one 6-site molecule plus a weak acid);
* ratio of the 6-site time to the target.

Run:  .venv/bin/python benchmarks/bench_speciation.py
"""

from __future__ import annotations

import time

import numpy as np

from speciakin.chemistry import microstates as ms
from speciakin.chemistry.equilibrium import IonizableSpecies, solve_ph

TARGET_SECONDS = 0.1


def _best_of(func, repeats: int = 5) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - start)
    return best


def _molecule(n: int):
    pka = np.linspace(2.0, 12.0, n)
    w = np.full((n, n), 0.3)
    np.fill_diagonal(w, 0.0)
    zp = np.array([1.0 if i % 2 == 0 else 0.0 for i in range(n)])
    return pka, w, zp, zp - 1.0


def _speciate(pka, w, zp, zd, ph):
    return (ms.microstate_populations(pka, w, ph), ms.site_protonated_fraction(pka, w, ph),
            ms.mean_charge(pka, w, zp, zd, ph))


def main() -> None:
    ph = np.linspace(-1.0, 15.0, 10_000)
    print("speciation engine benchmark (numpy)")
    times = {}
    for n in (6, 10):
        pka, w, zp, zd = _molecule(n)
        times[n] = _best_of(lambda: _speciate(pka, w, zp, zd, ph))
        print(f"  {n:2d} sites, {2 ** n:5d} microstates, 10,000 pH values: {times[n] * 1e3:8.2f} ms")
    print(f"  6-site time / target ({TARGET_SECONDS * 1e3:.0f} ms): {times[6] / TARGET_SECONDS:.3f}")

    pka, w, zp, zd = _molecule(6)
    species = [IonizableSpecies("S", pka, w, zp, zd),
               IonizableSpecies("HA", np.array([4.76]), np.zeros((1, 1)), np.array([0.0]), np.array([-1.0]))]
    strong = np.linspace(-0.02, 0.02, 200)
    elapsed = _best_of(lambda: [solve_ph(species, [0.01, 0.005], q) for q in strong], repeats=3)
    print(f"  charge-balance solve (6 sites + weak acid): {elapsed / strong.size * 1e6:8.1f} us per solve")


if __name__ == "__main__":
    main()
