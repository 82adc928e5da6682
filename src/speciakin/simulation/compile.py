"""Model and runs -> flat arrays for the compiled kernel.

:func:`compile_model` (``model_layout``) validates a
:class:`~speciakin.chemistry.model.Model` and lays it out as integer and float
arrays (sites, microstates, steps, reactants with their site requirements as
bit masks); :func:`compile_runs` (``runs_layout``) does the same for a list of
runs, padded to common shapes so that one compiled call can simulate any
(parameter set, run) pair.  The fields of both tuples are named in ``layout``.

The parameter vector ``q`` has the order of ``Model.quantities()``: for each
molecule, for each site: pKa, enthalpy; then its interactions' W; then for
each step: log10 k, activation energy; then the medium's pKw, when the model
sets one (``KernelModel.medium_q`` is its index, -1 for water).
"""

from speciakin.simulation.model_layout import MAX_SITES, CompiledModel, CompiledRuns, compile_model
from speciakin.simulation.runs_layout import compile_runs

__all__ = ["CompiledModel", "CompiledRuns", "compile_model", "compile_runs", "MAX_SITES"]
