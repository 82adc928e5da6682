"""Speed and accuracy of the compiled simulation kernel, measured side by side.

A "likelihood evaluation": six held-pH runs (pH 4, 5, 6, 8, 10, 11) of an
invented two-site substrate (alkyl amine + aryl amine with an interaction
term) with double reaction and reagent hydrolysis (water + hydroxide);
1.05 equivalents of reagent dosed over 30 min into 1 L; outputs at 40 times
over 3 h; Gaussian log-likelihood against synthetic data.

Each time is the best of several blocks of calls, with the median beside it
(the host is a shared virtual machine whose speed moves by up to 2x, in
spells of a few seconds); for the two targets with a time limit the share of
blocks within the limit is printed too.

Compared routes (same tolerances rtol 1e-6, atol 1e-10):
  * compiled kernel, one core, one parameter set per call (simulation and
    likelihood in one compiled call);
  * compiled kernel, 64 parameter sets per call over all cores;
  * plain scipy solve_ivp (Radau) with a numpy right-hand side written here.
Accuracy: outputs against a tight scipy reference (Radau, rtol 1e-11).

Second workload: the campaign objective of the bundled demo
(data_templates/demo: 4 held runs under a logged temperature profile with
sampling withdrawals, 1 logged-pH run, 1 free-pH run): one set of weighted
residuals on one core, and the log-likelihood of 32 sets over all cores.

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_kernel.py [--cold]
      (--cold: only the cold compile, into an empty temporary cache: bench_compile.py)
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

from speciakin.chemistry.model import (
    Dose, Interaction, Ion, Model, Molecule, PhControl, Quantity, Reactant, Requirement, Run, Site, Step,
    TemperatureProfile,
)
from speciakin.chemistry import water
from speciakin.simulation import batch_log_likelihood, compile_model, compile_runs, simulate_batch

PH_VALUES = (4.0, 5.0, 6.0, 8.0, 10.0, 11.0)
TIMES = np.linspace(0.0, 3 * 3600.0, 40)
OBSERVED = ("S", "P_alkyl", "P_aryl", "P_both")


def q(v):
    return Quantity(float(v))


def build_model() -> Model:
    """Invented diamine 'Zorvamine' and an invented anhydride (all numbers invented)."""
    sub = Molecule("S", sites=(Site("N_alkyl", "base", q(9.3)), Site("N_aryl", "base", q(4.6))),
                   interactions=(Interaction("N_alkyl", "N_aryl", q(0.8)),), moieties={"core": 1},
                   role="substrate")
    mols = (sub, Molecule("E", moieties={"acyl": 2}),
            Molecule("P_alkyl", sites=(Site("N_aryl", "base", q(4.1)),), moieties={"core": 1, "acyl": 1}),
            Molecule("P_aryl", sites=(Site("N_alkyl", "base", q(9.0)),), moieties={"core": 1, "acyl": 1}),
            Molecule("P_both", moieties={"core": 1, "acyl": 2}),
            Molecule("HA", sites=(Site("O", "acid", q(4.76)),), moieties={"acyl": 1}))
    steps = (
        Step("a1", (Reactant("S", (Requirement("N_alkyl"),)), Reactant("E")), (("P_alkyl", 1), ("HA", 1)), q(0.0)),
        Step("b1", (Reactant("S", (Requirement("N_aryl"),)), Reactant("E")), (("P_aryl", 1), ("HA", 1)), q(-1.3)),
        Step("a2", (Reactant("P_aryl", (Requirement("N_alkyl"),)), Reactant("E")), (("P_both", 1), ("HA", 1)),
             q(-0.4)),
        Step("b2", (Reactant("P_alkyl", (Requirement("N_aryl"),)), Reactant("E")), (("P_both", 1), ("HA", 1)),
             q(-1.7)),
        Step("hw", (Reactant("E"), Reactant("water")), (("HA", 2),), q(-4.0)),
        Step("hoh", (Reactant("E"), Reactant("hydroxide")), (("HA", 2),), q(1.0)),
    )
    return Model("zorvamine acylation (invented)", mols, steps, ions=(Ion("Na", 1), Ion("Cl", -1)))


def build_runs():
    return [Run(f"pH{ph:g}", {"S": 0.1}, 1.0, TemperatureProfile((0.0,), (298.15,)),
                PhControl("held", setpoint=ph, titrant="Na", titrant_concentration=2.0), TIMES[-1],
                doses=(Dose("E", 0.105, 0.0, 1800.0, 0.05),)) for ph in PH_VALUES]


# ---- plain numpy right-hand side for scipy (written independently of the kernel) ----
def timed_blocks(call, repeats: int, blocks: int) -> np.ndarray:
    """Wall time of one call [s] in each of ``blocks`` blocks of ``repeats`` calls."""
    per_call = np.empty(blocks)
    for b in range(blocks):
        t0 = time.perf_counter()
        for _ in range(repeats):
            call()
        per_call[b] = (time.perf_counter() - t0) / repeats
    return per_call


def timed(call, repeats: int, blocks: int = 5) -> tuple[float, float]:
    """(best, median) wall time of one call [s] over ``blocks`` blocks of
    ``repeats`` calls: the host is a shared virtual machine whose speed moves
    from second to second, and the best block is the figure least disturbed
    by other tenants (the practice of Python's timeit); the median is printed
    beside it."""
    per_call = timed_blocks(call, repeats, blocks)
    return float(per_call.min()), float(np.median(per_call))


def python_rhs_factory(ph, log10k, pkw=float(water.pkw(298.15))):
    k = 10.0 ** np.asarray(log10k)
    h, oh = 10.0 ** -ph, 10.0 ** (ph - pkw)
    lw = np.array([0.0, 9.3 - ph, 4.6 - ph, 9.3 + 4.6 - 2 * ph - 0.8])
    pop = np.exp(np.log(10) * (lw - lw.max()))
    pop /= pop.sum()
    free_alkyl, free_aryl = pop[0] + pop[2], pop[0] + pop[1]
    theta = lambda pka: 1.0 / (1.0 + 10.0 ** (ph - pka))  # noqa: E731
    z = np.array([pop[1] + pop[2] + 2 * pop[3], 0.0, theta(4.1), theta(9.0), 0.0, theta(4.76) - 1.0, 1.0, -1.0])
    feed = 0.105 / 1800.0
    vfeed = 0.05 / 1800.0

    def rhs(t, y):
        s, e, pa, pb, pab = y[:5]
        v = y[8]
        c = y[:8] / v
        r = np.array([k[0] * c[0] * free_alkyl * c[1], k[1] * c[0] * free_aryl * c[1],
                      k[2] * c[3] * (1 - theta(9.0)) * c[1], k[3] * c[2] * (1 - theta(4.1)) * c[1],
                      k[4] * c[1], k[5] * oh * c[1]]) * v
        dy = np.zeros(10)
        dosing = t < 1800.0
        dy[0] = -r[0] - r[1]
        dy[1] = -r[0] - r[1] - r[2] - r[3] - r[4] - r[5] + (feed if dosing else 0.0)
        dy[2] = r[0] - r[3]
        dy[3] = r[1] - r[2]
        dy[4] = r[2] + r[3]
        dy[5] = r[0] + r[1] + r[2] + r[3] + 2 * r[4] + 2 * r[5]
        dy[8] = vfeed if dosing else 0.0
        num = z[:6] @ dy[:6] + (h - oh) * dy[8]
        qrate = -num / (1.0 + (h - oh) / 2.0)
        dy[6] = qrate
        dy[8] += qrate / 2.0
        dy[9] = qrate
        return dy

    return rhs


def scipy_evaluation(compiled, y0s, log10k, rtol, atol, data, sigma):
    """One likelihood evaluation with solve_ivp Radau; returns (loglik, outputs (6, 40, 4))."""
    from scipy.integrate import solve_ivp

    obs_idx = [compiled.species_index(n) for n in OBSERVED]
    outs = np.zeros((len(PH_VALUES), len(TIMES), len(OBSERVED)))
    for r, ph in enumerate(PH_VALUES):
        rhs = python_rhs_factory(ph, log10k)
        y = y0s[r].copy()
        seg = [(0.0, 1800.0), (1800.0, TIMES[-1])]
        rows = []
        for t0, t1 in seg:
            tt = TIMES[(TIMES >= t0) & (TIMES <= t1)]
            if t0 > 0:
                tt = tt[tt > t0]
            sol = solve_ivp(rhs, (t0, t1), y, method="Radau", t_eval=tt, rtol=rtol, atol=atol)
            if not sol.success:
                raise RuntimeError(sol.message)
            rows.append(sol.y.T)
            y = sol.y[:, -1] if tt.size and tt[-1] == t1 else solve_ivp(
                rhs, (t0, t1), y, method="Radau", rtol=rtol, atol=atol).y[:, -1]
        full = np.vstack(rows)
        outs[r] = full[:, obs_idx] / full[:, 8:9]
    z = (data - outs) / sigma
    return float(np.sum(-0.5 * z * z - np.log(sigma) - 0.5 * math.log(2 * math.pi))), outs


def scipy_start_states(compiled, cruns, nominal) -> np.ndarray:
    """Start states of the scipy route: the runs' amounts, volume and titrant consumed (the kernel's opposite
    titrant left out), with the held mode's initial titrant as the kernel applies it (``nominal``: the kernel's
    result at the nominal parameters)."""
    y0s = cruns.arrays.y0.copy()
    for r in range(y0s.shape[0]):
        y0s[r, compiled.species_index("Na")] += nominal.initial_titrant[0, r]
        y0s[r, compiled.n_species] += nominal.initial_titrant[0, r] / 2.0
    return y0s[:, :compiled.n_species + 2]


def radau_reference(blocks: int = 3) -> np.ndarray:
    """Wall time [s] of one evaluation of the ruler issue 16 asks every speed figure to stand beside,
    in each of ``blocks`` blocks: scipy's solve_ivp Radau with a Python right-hand side on this script's
    six held-pH runs (rtol 1e-6, atol 1e-10; :func:`scipy_evaluation`), measured in the caller's run."""
    model = build_model()
    compiled = compile_model(model)
    runs = build_runs()
    cruns = compile_runs(compiled, runs, [TIMES] * len(runs))
    q0 = compiled.nominal
    nominal = simulate_batch(compiled, cruns, q0[None, :], parallel=False)
    obs_idx = [compiled.species_index(n) for n in OBSERVED]
    vol = nominal.outputs[0, :, :, compiled.n_species]
    truth = nominal.outputs[0][:, :, obs_idx] / vol[:, :, None]
    sigma = 0.002 + 0.01 * truth
    y0s = scipy_start_states(compiled, cruns, nominal)
    log10k = q0[np.asarray(compiled.arrays.step_logk_q)]
    return timed_blocks(lambda: scipy_evaluation(compiled, y0s, log10k, 1e-6, 1e-10, truth, sigma), 1, blocks)


def radau_line(ref: np.ndarray) -> str:
    """The ruler's figure as printed beside the others."""
    return (f"scipy solve_ivp Radau, Python right-hand side (bench_kernel's six held-pH runs, one evaluation): "
            f"best {ref.min() * 1e3:.1f} ms, median {np.median(ref) * 1e3:.1f} ms")


def demo_objective() -> None:
    """Time the campaign objective of the bundled (invented) demo campaign."""
    from pathlib import Path

    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs

    folder = Path(__file__).resolve().parents[1] / "data_templates" / "demo"
    if not folder.exists():
        print("demo campaign not found; skipped")
        return
    model, campaign, _ = load_inputs(resolve_inputs(folder))
    objective = make_objective(model, campaign)
    theta = objective.start
    objective.parallel = False
    objective.residuals(theta)
    one, one_median = timed(lambda: objective.residuals(theta), 10)
    q_sets, off, fac = objective.kernel_inputs(theta[None, :])
    res = simulate_batch(objective.compiled, objective.compiled_runs, q_sets, off, fac, objective.rtol,
                         objective.atol, parallel=False)
    rng = np.random.default_rng(7)
    sets = theta + 0.01 * rng.standard_normal((32, theta.size)) * np.maximum(np.abs(theta), 1e-3)
    objective.parallel = True
    objective.log_likelihood_batch(sets)
    batch_time, batch_median = timed(lambda: objective.log_likelihood_batch(sets), 1)
    batch = batch_time / 32
    ll = objective.log_likelihood_batch(sets)
    print(f"demo campaign objective ({len(objective.compiled_runs.names)} runs, accepted steps "
          f"{', '.join(str(s) for s in res.steps[0])}):")
    print(f"  residuals, one set, one core:      {one * 1e3:8.3f} ms per evaluation (median {one_median * 1e3:.3f})")
    print(f"  log-likelihood, 32 sets, all cores:{batch * 1e3:8.3f} ms per evaluation "
          f"(median {batch_median / 32 * 1e3:.3f}; finite: {int(np.sum(np.isfinite(ll)))}/32)")


def fresh_process() -> None:
    """Time a fresh process from launch to its first simulation (compiled-code cache present)."""
    # fresh process, cache present: from launch until the first simulation is done (the child
    # prints the wall-clock time at that moment); the exit of the interpreter, which unloads numba
    # and LLVM (0.15-0.2 s here), is printed beside it but is not part of being ready
    code = ("import time; t=time.perf_counter(); import numpy as np; "
            "from speciakin.simulation import simulate_batch, compile_model, compile_runs; "
            "import sys; sys.path.insert(0, %r); import bench_kernel as b; m=b.build_model(); c=compile_model(m); "
            "r=compile_runs(c, b.build_runs()[:1], [b.TIMES]); simulate_batch(c, r, c.nominal[None,:], parallel=False); "
            "print(time.time(), time.perf_counter()-t)") % os.path.dirname(os.path.abspath(__file__))
    ready, walls, inners = [], [], []
    for _ in range(3):
        launched = time.time()
        t0 = time.perf_counter()
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=dict(os.environ))
        walls.append(time.perf_counter() - t0)
        fields = out.stdout.split()
        if out.returncode != 0 or len(fields) < 2:
            print(f"fresh process failed: {out.stderr.strip()[-300:]}")
            return
        ready.append(float(fields[-2]) - launched)
        inners.append(float(fields[-1]))
    print(f"fresh process ready (launch to first simulation done): {min(ready):.2f} s, best of 3 "
          f"(all: {', '.join(f'{w:.2f}' for w in ready)}; inside the process from its first line: "
          f"{', '.join(f'{w:.2f}' for w in inners)} s; with interpreter exit: "
          f"{', '.join(f'{w:.2f}' for w in walls)} s; target < 2 s)")


def cold_compile() -> None:
    """Time a fresh process with an empty compiled-code cache (``bench_compile.py``)."""
    subprocess.run([sys.executable, str(Path(__file__).with_name("bench_compile.py"))], check=True)


def main() -> None:
    if "--cold" in sys.argv[1:]:
        cold_compile()
        return
    model = build_model()
    compiled = compile_model(model)
    runs = build_runs()
    cruns = compile_runs(compiled, runs, [TIMES] * len(runs))
    q0 = compiled.nominal
    obs_idx = [compiled.species_index(n) for n in OBSERVED]
    rng = np.random.default_rng(20261201)
    nominal = simulate_batch(compiled, cruns, q0[None, :], parallel=False)
    assert np.all(nominal.status == 0)
    vol = nominal.outputs[0, :, :, compiled.n_species]
    truth = nominal.outputs[0][:, :, obs_idx] / vol[:, :, None]
    sigma_obs = 0.002 + 0.01 * truth
    data_obs = truth + rng.normal(0.0, 1.0, truth.shape) * sigma_obs
    data = np.full(nominal.outputs.shape[1:], np.nan)
    sigma = np.ones_like(data)
    data[:, :, obs_idx] = data_obs
    sigma[:, :, obs_idx] = sigma_obs

    load = os.getloadavg()
    print(f"machine: {os.cpu_count()} cores, load average before timing {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
    print(f"model: {compiled.n_species} species, {len(q0)} parameters; 6 runs x 40 outputs")

    # compiled, one core
    batch_log_likelihood(compiled, cruns, q0[None, :], data, sigma, parallel=False)
    # the host's slow spells last seconds: 120 blocks of 20 calls span a few seconds, so that the
    # best block (the undisturbed speed) is taken in a calm spell; the median and the share of
    # blocks within the target show how much the host disturbed the rest
    blocks = timed_blocks(lambda: batch_log_likelihood(compiled, cruns, q0[None, :], data, sigma, parallel=False),
                          20, 120)
    one_core, one_core_median = float(blocks.min()), float(np.median(blocks))
    ll_serial, res = batch_log_likelihood(compiled, cruns, q0[None, :], data, sigma, parallel=False)
    steps = res.steps[0]
    print(f"compiled kernel, one core:           {one_core * 1e3:8.3f} ms per evaluation "
          f"(median {one_core_median * 1e3:.3f}; blocks within 1 ms: {np.mean(blocks <= 1e-3):.0%}; "
          f"accepted steps per run: {', '.join(str(s) for s in steps)})")

    # compiled, 64 sets over all cores
    q_sets = q0 + rng.normal(0.0, 0.05, size=(64, q0.size))
    batch_log_likelihood(compiled, cruns, q_sets, data, sigma, parallel=True)
    pblocks = timed_blocks(lambda: batch_log_likelihood(compiled, cruns, q_sets, data, sigma, parallel=True), 1, 40)
    parallel_time, parallel_median = float(pblocks.min()), float(np.median(pblocks))
    ll_batch, bres = batch_log_likelihood(compiled, cruns, q_sets, data, sigma, parallel=True)
    per_eval_parallel = parallel_time / 64
    serial_time, _ = timed(lambda: batch_log_likelihood(compiled, cruns, q_sets, data, sigma, parallel=False), 1,
                           blocks=3)
    per_eval_serial_batch = serial_time / 64
    print(f"compiled kernel, 64 sets, all cores: {per_eval_parallel * 1e3:8.3f} ms per evaluation "
          f"(median {parallel_median / 64 * 1e3:.3f}; blocks within 0.7 ms: {np.mean(pblocks / 64 <= 0.7e-3):.0%}; "
          f"same batch on one core: {per_eval_serial_batch * 1e3:.3f} ms; failures: {int(np.sum(bres.status != 0))})")

    # plain scipy route
    y0s = scipy_start_states(compiled, cruns, nominal)
    log10k = q0[np.asarray(compiled.arrays.step_logk_q)]
    scipy_time, _ = timed(lambda: scipy_evaluation(compiled, y0s, log10k, 1e-6, 1e-10, data_obs, sigma_obs), 1,
                          blocks=3)
    ll_scipy, out_scipy = scipy_evaluation(compiled, y0s, log10k, 1e-6, 1e-10, data_obs, sigma_obs)
    print(f"scipy solve_ivp Radau, Python RHS:   {scipy_time * 1e3:8.3f} ms per evaluation")
    print(f"speed-up one core vs scipy:          {scipy_time / one_core:8.1f} x  (target >= 100 x)")
    print(f"speed-up batch vs scipy:             {scipy_time / per_eval_parallel:8.1f} x")

    # accuracy against a tight reference
    _, ref = scipy_evaluation(compiled, y0s, log10k, 1e-11, 1e-16, data_obs, sigma_obs)
    scale = np.max(np.abs(ref), axis=1, keepdims=True)
    dev_kernel = np.max(np.abs(truth - ref) / scale)
    dev_scipy = np.max(np.abs(out_scipy - ref) / scale)
    print(f"max deviation from reference (relative to each series' maximum): kernel {dev_kernel:.2e}, "
          f"scipy rtol 1e-6 {dev_scipy:.2e}  (target <= 1e-5)")
    print(f"log-likelihood: kernel {ll_serial[0]:.6f}, scipy {ll_scipy:.6f}")

    demo_objective()

    fresh_process()

    load = os.getloadavg()
    print(f"load average after timing {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")


if __name__ == "__main__":
    main()
