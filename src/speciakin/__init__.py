"""speciakin: speciation-kinetics workbench for pH-dependent competing reactions.

Layers (each depends only on the ones listed before it):

``chemistry``   sites, microstates, water, model file
``simulation``  charge balance, compiled kernel, runs and dosing
``data``        campaign templates, import, validation
``estimation``  generic least squares, profiles, priors, sampling, diagnostics
``decision``    process file, pH window, design space
``pipeline``    campaign objective, fit, posterior, window, predictions, output folder;
                the public Python API (steps, progress, cancellation, results)
``report``      HTML, PDF, XLSX, plots; renders the pipeline's results
``cli``         the ``speciakin`` command
"""

__version__ = "0.1.0"

from speciakin.errors import InputError, SolverError, SpeciakinError  # noqa: F401
