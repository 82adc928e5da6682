"""Assemble the tech-transfer report from the results of a campaign.

:func:`build_report` turns a :class:`ReportInputs` (model, campaign and
whatever results exist: least-squares fit, posterior, pH window) into one
:class:`~speciakin.report.document.ReportDocument`.  Every missing result
(None) gives a short "not run" note instead of its section's numbers, so the
same builder serves a report after only a fit.

Sections, in reading order:

1. Decision summary (a decision callout)
2. Inputs (files with SHA-256, software version, command, date)
3. The model (species, sites, reaction scheme, fitted and fixed quantities)
4. Parameters (least squares, covariance and profile intervals, posterior, priors)
5. Correlations and identifiability
6. Runs: data, fitted curves, predictive bands, residuals, titrant
7. Convergence and profiles
8. pH window
9. Next-run suggestion (only when a suggestion was made)
10. Quality assurance (document ID, author and reviewer, versions, commit)
11. Assumptions and limitations; Cautions

Every absolute path in the finished document is made relative to the
report's base folder (or cut to its last component), so no report shows the
folders of the machine that made it.

The science-specific pieces live in the other modules of this folder, one
concern each; this module only orders them.  Curves and fitted values come
ready-made (:mod:`speciakin.pipeline.predictions`): the report only renders.

References
----------
Peterson, J. J., "A Bayesian approach to the ICH Q8 definition of design
space", J. Biopharm. Stat. 2008, 18, 959 (probability of meeting every
specification).
Raue, A. et al., "Structural and practical identifiability analysis of
partially observed dynamical models by exploiting the profile likelihood",
Bioinformatics 2009, 25, 1923 (profile intervals).
Vehtari, A. et al., "Rank-normalization, folding, and localization: an
improved R-hat", Bayesian Analysis 2021, 16, 667 (convergence figures).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Any

from speciakin import __version__
from speciakin.report.assemble.decision import decision_summary_section, window_section, window_table
from speciakin.report.assemble.inputs import inputs_section, model_section
from speciakin.report.assemble.parameters import (
    correlation_section,
    correlation_table,
    identifiability_warnings,
    interval_table,
    parameter_section,
    parameter_table,
)
from speciakin.palette import SpeciesColors, display_names, model_species_colors
from speciakin.report.assemble.posterior import convergence_section
from speciakin.report.assemble.qa import document_id, qa_section, strip_absolute_paths
from speciakin.report.assemble.runs import observation_table, runs_section
from speciakin.report.assemble.suggest import SUGGESTION_TITLE, suggestion_section
from speciakin.report.document import ReportDocument, Section, Table
from speciakin.report.texts import INVENTED_DATA_NOTE, assumptions_section, cautions_section

__all__ = ["ReportInputs", "build_report", "REPORT_SECTION_TITLES", "NOT_RUN"]

#: Words used wherever a result is missing.
NOT_RUN = "not run"

#: Titles of the report sections, in order (stable: tests and readers rely on them).
REPORT_SECTION_TITLES = (
    "Decision summary",
    "Inputs",
    "The model",
    "Parameters",
    "Correlations and identifiability",
    "Runs: data and fitted curves",
    "Convergence and profiles",
    "pH window",
    SUGGESTION_TITLE,
    "Quality assurance",
    "Assumptions and limitations",
    "Cautions",
)


@dataclass
class ReportInputs:
    """Everything the report is made from; results not computed are None.

    Attributes
    ----------
    model
        :class:`speciakin.chemistry.model.Model`.
    campaign
        :class:`speciakin.data.campaign.Campaign` (provenance gives the
        workbook paths and SHA-256).
    predictions
        :class:`speciakin.pipeline.predictions.PredictionSet`: curves, bands
        and fitted values of model and campaign, or None (no run plots).
    fit
        :class:`speciakin.pipeline.fit.CampaignFitResult` or None.
    posterior
        :class:`speciakin.estimation.sampling.PosteriorResult` or None.
    window
        :class:`speciakin.decision.result.WindowResult` or None.
    process
        :class:`speciakin.decision.process_plan.ProcessPlan` or None.
    check
        :class:`speciakin.data.check.CheckReport` or None.
    command
        The exact command that reproduces the report.
    software_version
        speciakin version that made the numbers.
    extra_inputs
        ``(label, path)`` of the other input files (model file, process
        file); their SHA-256 is computed when the report is built.
    invented
        True to label the report as based on invented demonstration data.
    title
        Report title (default: from the model name).
    suggestion
        The ``suggest.json`` body, or None (no suggestion section).
    suggestion_figure
        Path of ``figures/suggest_shrinkage.png``, or None.
    author, reviewer
        Names for the QA block (empty: taken from the process file's
        ``[report]`` table, else "not stated").
    base_folder
        Folder that absolute paths in the report are made relative to
        (None: paths are cut to their last component).
    """

    model: Any
    campaign: Any
    predictions: Any = None
    fit: Any = None
    posterior: Any = None
    window: Any = None
    process: Any = None
    check: Any = None
    command: str = ""
    software_version: str = __version__
    extra_inputs: list[tuple[str, str]] = field(default_factory=list)
    invented: bool = False
    title: str = ""
    suggestion: Any = None
    suggestion_figure: Any = None
    author: str = ""
    reviewer: str = ""
    base_folder: Any = None


def species_colors(model) -> SpeciesColors:
    """One :class:`SpeciesColors` for the whole report, in the model's molecule order, keyed by
    compound label (short names as aliases; :func:`speciakin.palette.model_species_colors`)."""
    return model_species_colors(model)


def build_report(inputs: ReportInputs) -> ReportDocument:
    """Build the tech-transfer report.

    Parameters
    ----------
    inputs
        The model, campaign and available results.

    Returns
    -------
    ReportDocument
        Sections in the order of :data:`REPORT_SECTION_TITLES`; the workbook
        tables are parameters, intervals, correlation, observations (with
        fitted values and weighted residuals) and window, where available.

    Raises
    ------
    InputError
        When an extra input file cannot be read for its SHA-256, or a result
        does not belong to the model (parameter names differ).
    """
    colors = species_colors(inputs.model)
    names = display_names(inputs.model)
    warnings = identifiability_warnings(inputs.fit, inputs.posterior)
    title = inputs.title or f"Speciation-kinetics report: {inputs.model.name}"
    subtitle = INVENTED_DATA_NOTE if inputs.invented else ""
    created = datetime.now(timezone.utc).replace(microsecond=0).isoformat()

    sections: list[Section] = [
        decision_summary_section(inputs.window, inputs.fit, inputs.posterior, inputs.invented, names,
                                 inputs.suggestion),
        inputs_section(inputs.campaign, inputs.extra_inputs, inputs.software_version, inputs.command,
                       inputs.check, inputs.invented, created),
        model_section(inputs.model, inputs.fit),
        parameter_section(inputs.fit, inputs.posterior),
        correlation_section(inputs.fit, inputs.posterior, warnings),
        runs_section(inputs.predictions, inputs.fit, inputs.posterior, colors, names=names),
        convergence_section(inputs.fit, inputs.posterior),
        window_section(inputs.window, colors, inputs.process, names),
    ]
    suggestion = suggestion_section(inputs.suggestion, inputs.suggestion_figure)
    if suggestion is not None:
        sections.append(suggestion)
    tail = [assumptions_section(warnings, inputs.model), cautions_section()]
    workbook: list[Table] = []
    for table in (parameter_table(inputs.fit, inputs.posterior),
                  interval_table(inputs.fit, inputs.posterior),
                  correlation_table(inputs.fit, inputs.posterior),
                  observation_table(inputs.predictions),
                  window_table(inputs.window)):
        if table is not None:
            workbook.append(table)
    command = strip_absolute_paths(inputs.command, inputs.base_folder)
    doc = _without_absolute_paths(ReportDocument(title, sections + tail, subtitle=subtitle, created=created,
                                                 software_version=inputs.software_version, command=command,
                                                 tables_for_workbook=workbook), inputs.base_folder)
    content = doc.to_dict()
    content.pop("created", None)
    process = inputs.process
    author = inputs.author or (getattr(process, "report_author", "") if process is not None else "")
    reviewer = inputs.reviewer or (getattr(process, "report_reviewer", "") if process is not None else "")
    qa = qa_section(document_id(content), author, reviewer, created)
    doc.sections.insert(len(doc.sections) - len(tail), qa)
    return doc


def _without_absolute_paths(doc: ReportDocument, base: Any) -> ReportDocument:
    """The document with every absolute path in its text made relative to ``base`` (or cut)."""
    def clean(value: Any, key: str = "") -> Any:
        if key == "png_base64":
            return value
        if isinstance(value, str):
            return strip_absolute_paths(value, base)
        if isinstance(value, dict):
            return {k: clean(v, k) for k, v in value.items()}
        if isinstance(value, list):
            return [clean(v) for v in value]
        return value

    return ReportDocument.from_dict(clean(doc.to_dict()))

