"""Pipeline layer: the campaign glue between the generic layers and the report.

The public Python API (the command line calls it; so can any other front end)::

    from speciakin import pipeline
    from speciakin.report import results as renderer

    inputs = pipeline.resolve_inputs("my-campaign")
    results = pipeline.run_all(inputs, "out", renderer=renderer, progress=print_progress, cancel=event)
    again = pipeline.load_results("out")             # the same Results, read from the files

A new result folder with its lock, status and index row (what every command
uses; docs/workflow.md, "Result folders")::

    with pipeline.Recording(inputs, step="run") as rec:    # <campaign>/results/<UTC time>-<id>/
        pipeline.run_all(inputs, rec.folder, renderer=renderer)

Steps one by one: :func:`check_step`, :func:`fit_step`, :func:`sample_step`,
:func:`window_step`, :func:`predict_step`; progress callbacks
``progress(stage, done, total)`` and cancellation (``cancel.is_set()`` ->
:class:`Cancelled`) work the same for each (see docs/workflow.md).

Modules
-------
inputs       the campaign's input files: find and load them
objective    model + campaign -> weighted residuals and log-likelihood
fitted       the fitted parameters and the error model of the observations
closure      area% samples closed to 100 %: weighed with their joint covariance
fit          multistart least squares of a campaign (CampaignFitResult, fit.json)
posterior    priors from the model file and the sampler on the campaign objective
window       pH window of the planned process from fit or posterior draws
predictions  fitted curves, bands and fitted values, computed once for the report
outputs      the output folder: file names, JSON codec, save / load of every result
steps        one function per step, progress and cancellation
run          run_all (the whole job) and load_results (an output folder)
folders      result folders: new_result_folder, lock, status.json, the newest complete one
history      the SQLite index of every run (index.sqlite)
record       Recording: folder + lock + status + index row around one piece of work
"""

from speciakin.pipeline.inputs import Inputs, load_inputs, resolve_inputs
from speciakin.pipeline.folders import new_result_folder, read_status, results_root
from speciakin.pipeline.outputs import RESULT_FILES
from speciakin.pipeline.record import Recording, find_result
from speciakin.pipeline.run import STEPS, Renderer, Results, for_report, load_results, run_all, says_invented
from speciakin.pipeline.steps import (Cancelled, Progress, check_step, fit_step, make_objective, predict_step,
                                      sample_step, window_step, window_text)

__all__ = [
    "Inputs", "resolve_inputs", "load_inputs", "RESULT_FILES", "STEPS", "Renderer", "Results", "run_all",
    "load_results", "Cancelled", "Progress", "check_step", "fit_step", "make_objective", "predict_step",
    "sample_step", "window_step", "window_text", "Recording", "find_result", "new_result_folder", "read_status",
    "results_root", "for_report", "says_invented",
]
