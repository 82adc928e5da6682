"""The local browser workbench: the campaign journey on a page (``speciakin web``).

It sits on top of the pipeline, like the command line, and calls the same
public Python API (:mod:`speciakin.pipeline`); nothing below imports it.

Modules
-------
app            the Dash application, token and loopback guards, the server
paths          the campaign root: every path resolved inside it, safe upload names, result folders
state          what the server keeps: root, job board, caches keyed by file times
jobs           pipeline work in the background: progress, time left, cancel, one folder per job
job_kinds      the kinds of job (fit, posterior, window, suggestion, report, whole run), each recorded
dask_jobs      the same jobs on a Dask cluster (local, or an existing scheduler)
downloads      a result's files sent to the browser, every path checked inside the result folder
figures        Plotly figures: raw data per run, fitted curves, window, correlation, 2-D map
bundles        plotly.js of the page's three trace types (static/), sent in place of the full plotly.js
warm           the code and data the first answers need, loaded when the server is made
page_campaign  step 1: open or create a campaign, upload, check table, raw data
page_model     step 2: model summary and the parameter table (page_params, params_table)
page_jobs      step 3: start, follow and cancel jobs; download what they wrote
page_results   step 4: parameters, correlation, window and its status, 2-D map, fitted curves
page_history   step 5: every result from the results index, its files, two results side by side
"""

from speciakin.web.app import create_app, is_loopback, make_server, new_token

__all__ = ["create_app", "make_server", "is_loopback", "new_token"]
