"""``check_campaign``: import a campaign, check it (with a model when given)
and gather every error and warning into a :class:`CheckReport`."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from speciakin.data.importer import import_campaign
from speciakin.data.validate import campaign_warnings, model_problems
from speciakin.errors import DataError, InputError, Location, Problem, ProblemCollector, ProblemList

__all__ = ["CHECK_FAILED", "CheckReport", "check_campaign"]

#: Exit code of ``speciakin check`` when it finds errors (a command that stops on them, such as
#: ``fit`` or ``run``, exits with the input-error code 2 instead).
CHECK_FAILED = 1


#: Result line of a check without errors that found no data yet (a new campaign's blank workbook).
NOTHING_TO_FIT = ("OK so far, but nothing to fit yet: fill in the workbook's runs and their HPLC results "
                  "(or titrant log), then check again")


@dataclass
class CheckReport(ProblemList):
    """Outcome of :func:`check_campaign`.

    Attributes
    ----------
    source
        Campaign path.
    model
        Model file path or name, or None.
    problems
        Every error and warning, in the order found.
    process
        Process file path, or None (the data layer does not read it; the
        command line adds its problems).
    runs, hplc_values, log_readings
        Counts of what was imported (0 when the import failed, ``imported``
        False); log readings are pH, temperature and titrant readings together.
    compounds
        HPLC compound name -> model molecule, from the Compounds sheet (empty when the import failed).
    """

    source: str
    model: str | None = None
    process: str | None = None
    problems: list[Problem] = field(default_factory=list)
    runs: int = 0
    #: True when the workbook imported (the counts are of what it holds)
    imported: bool = False
    hplc_values: int = 0
    log_readings: int = 0
    compounds: dict[str, str] = field(default_factory=dict)
    #: compound name -> number of values, for the peaks marked not modelled (they count in their samples'
    #: totals and are not fitted)
    not_modelled: dict[str, int] = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        return not self.errors

    @property
    def fit_errors(self) -> list[Problem]:
        """The errors that stop a fit: all but the process file's (those stop only the pH window)."""
        return [p for p in self.errors if not self.process or p.location.file != self.process]

    @property
    def exit_code(self) -> int:
        """0 without errors, :data:`CHECK_FAILED` with errors (exit code of ``speciakin check``)."""
        return 0 if self.ok else CHECK_FAILED

    def report(self) -> str:
        lines = ["Campaign check", "==============", f"Campaign: {self.source}",
                 f"Model: {self.model or '(none)'}",
                 *([f"Process: {self.process}"] if self.process else []),
                 (f"Runs: {self.runs}   HPLC values: {self.hplc_values}   log readings: {self.log_readings}"
                  if self.imported else "Runs: not counted (the workbook did not import: see the errors)"),
                 *([f"Not modelled (count in their samples' totals, not fitted): "
                    + ", ".join(f"{name} ({n} values)" for name, n in self.not_modelled.items())]
                   if self.not_modelled else []),
                 "", "Errors", "------"]
        lines += [f"  - {p.describe()}" for p in self.errors] or ["  none"]
        lines += ["", "Warnings", "--------"]
        lines += [f"  - {p.describe()}" for p in self.warnings] or ["  none"]
        lines += ["", "Result", "------",
                  NOTHING_TO_FIT if self.ok and not (self.hplc_values or self.log_readings) else
                  "OK: ready to fit" if self.ok and not self.warnings else
                  "OK with warnings: review them before fitting" if self.ok else
                  f"FAILED: {len(self.errors)} error(s); nothing can be fitted until they are fixed"
                  if self.fit_errors else
                  f"FAILED: {len(self.errors)} error(s) in the process file; the fit can run, "
                  "the pH window cannot until they are fixed"]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        return {"source": self.source, "model": self.model, "process": self.process, "ok": self.ok,
                "imported": self.imported,
                "counts": {"errors": len(self.errors), "warnings": len(self.warnings), "runs": self.runs,
                           "hplc_values": self.hplc_values, "log_readings": self.log_readings,
                           "not_modelled": dict(self.not_modelled)},
                "problems": [p.to_dict() for p in self.problems]}


def check_campaign(path: str | Path, model=None) -> CheckReport:
    """Import and check a campaign; never raises for problems in the data.

    Parameters
    ----------
    path
        Campaign folder, workbook or CSV folder.
    model
        None, a :class:`speciakin.chemistry.model.Model`, or the path of a
        model file (read with ``speciakin.chemistry.modelfile.load_model``).

    Returns
    -------
    CheckReport
        Every error and warning with its location.
    """
    c = ProblemCollector()  # the model file's problems
    report = CheckReport(source=str(path))
    model_obj = None
    if model is not None:
        if isinstance(model, (str, Path)):
            report.model = str(model)
            try:
                from speciakin.chemistry.modelfile import load_model
            except ImportError:
                c.error("model files cannot be read by this installation", Location(file=str(model)),
                        code="model_unavailable")
            else:
                try:
                    model_obj = load_model(model)
                except InputError as exc:  # the model reader's own findings, reported with ours
                    c.problems.extend(exc.problems)
        else:
            model_obj = model
            report.model = getattr(model, "source", "") or getattr(model, "name", "model")
        if model_obj is not None:  # the model file's warnings (pKa range, moiety balance, ...)
            c.problems.extend(getattr(model_obj, "warnings", ()))
            _model_runs_unused(model_obj, c)
    # the workbook is imported on its own collector (a model file with errors must not stop it), after
    # the model file's problems in the report
    model_file_problems, c = c.problems, ProblemCollector()
    try:
        campaign = import_campaign(path, c)
    except DataError as exc:
        c.problems.extend(exc.problems)
        campaign = None
    c.problems[:0] = model_file_problems
    if campaign is not None:
        units_map = model_problems(campaign, model_obj, c) if model_obj is not None else None
        campaign_warnings(campaign, c, units_map)
        report.imported = True
        report.runs = len(campaign.runs)
        report.compounds = {c.name: c.molecule for c in campaign.compounds}
        report.hplc_values = sum(len(r.hplc) for r in campaign.runs)
        others = [name for r in campaign.runs if r.hplc.other is not None for name in r.hplc.other.compound]
        report.not_modelled = {c.name: others.count(c.name) for c in campaign.other_compounds}
        report.log_readings = sum(len(x.time) for r in campaign.runs
                                  for x in (r.ph_log, r.temperature_log, r.titrant) if x is not None)
    report.problems = list(c.problems)
    return report


def _model_runs_unused(model, c: ProblemCollector) -> None:
    """A warning when the model file declares runs: a campaign's runs are its workbook's, so ``check``,
    ``fit`` and ``run`` do not read them (``speciakin simulate MODEL.toml`` does)."""
    runs = [r.name for r in getattr(model, "runs", ())]
    if not runs:
        return
    from speciakin.chemistry.modelfile.paths import KeyLines, format_path

    source = getattr(model, "source", "") or ""
    try:
        text = Path(source).read_text(encoding="utf-8") if source else ""
    except OSError:
        text = ""
    line = KeyLines(text).line(format_path("run", runs[0]))
    c.warning(f"the model file declares {len(runs)} run(s) ({', '.join(runs)}); a campaign's runs come from "
              "its workbook, so check, fit and run do not use them (speciakin simulate does)",
              Location(file=source or None, key=f"run.{runs[0]}", line=line), runs[0],
              "runs in the workbook's Runs sheet; delete the [run] sections or keep them for simulate",
              code="model_runs_unused")
