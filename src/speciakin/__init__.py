"""speciakin: speciation-kinetics workbench for pH-dependent competing reactions.

Layers (each depends only on the ones listed before it):

``chemistry``   sites, microstates, water, model file
``simulation``  charge balance, compiled kernel, runs and dosing
``data``        campaign templates, import, validation
``estimation``  objective, least squares, sampling, diagnostics
``decision``    pH window, design space
``report``      HTML, PDF, XLSX, plots
``cli``         the ``speciakin`` command
"""

__version__ = "0.1.0"

from speciakin.errors import InputError, SolverError, SpeciakinError  # noqa: F401
