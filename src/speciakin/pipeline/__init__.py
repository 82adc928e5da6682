"""Pipeline layer: the campaign glue between the generic layers and the report.

Modules
-------
objective  model + campaign -> weighted residuals and log-likelihood
fit        multistart least squares of a campaign (CampaignFitResult, fit.json)
posterior  priors from the model file and the sampler on the campaign objective
window     pH window of the planned process from fit or posterior draws
outputs    the output folder: file names, JSON codec, save / load of every result
steps      the steps check -> fit -> sample -> window -> report, and run_all
"""
