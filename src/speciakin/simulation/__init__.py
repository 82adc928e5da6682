"""Simulation layer: compiled speciation-kinetics kernel, runs and dosing.

Public API::

    compile_model(model) -> CompiledModel
    compile_runs(compiled, runs, output_times_per_run) -> CompiledRuns
    simulate(model, run, times=None, q=None, microstates=False, rtol=1e-6, atol=1e-10) -> SimulationResult
    simulate_batch(compiled, compiled_runs, q_sets, ph_offset=None, amount_factor=None, ...) -> BatchResult
    batch_log_likelihood(compiled, compiled_runs, q_sets, data, sigma, ...) -> (loglik, BatchResult)

See docs/simulation.md.
"""

from speciakin.simulation.cache_guard import choose_cache_dir

# before any kernel module is imported: one compiled-code cache for every entry point
choose_cache_dir()

from speciakin.simulation.api import (BatchResult, batch_log_likelihood, default_times, simulate,  # noqa: E402
                                      simulate_batch)
from speciakin.simulation.compile import CompiledModel, CompiledRuns, compile_model, compile_runs  # noqa: E402
from speciakin.simulation.results import SimulationResult  # noqa: E402
from speciakin.simulation.status import STATUS_TEXT  # noqa: E402

__all__ = [
    "BatchResult", "CompiledModel", "CompiledRuns", "SimulationResult", "STATUS_TEXT",
    "batch_log_likelihood", "compile_model", "compile_runs", "default_times", "simulate", "simulate_batch",
]
