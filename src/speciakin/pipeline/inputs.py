"""Input files of a campaign: where they are, and loading them through the layers below."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from speciakin.errors import InputError, Location

__all__ = ["Inputs", "resolve_inputs", "load_inputs", "check_inputs", "MODEL_FILE", "PROCESS_FILE"]

#: Default names of the model and process files inside a campaign folder (made by ``speciakin new``).
MODEL_FILE = "model.toml"
PROCESS_FILE = "process.toml"


@dataclass
class Inputs:
    """Resolved input paths of a campaign (process may be None)."""

    campaign: Path
    model: Path
    process: Path | None = None

    def labelled(self) -> list[tuple[str, os.PathLike]]:
        """``(label, path)`` of the model and process files, for the report's input list
        (the path objects themselves: ``str()`` is what the report prints, ``os.fspath()`` what it reads)."""
        out: list[tuple[str, os.PathLike]] = [("model file", self.model)]
        if self.process:
            out.append(("process file", self.process))
        return out


def resolve_inputs(campaign: str | os.PathLike, model: str | os.PathLike | None = None,
                   process: str | os.PathLike | None = None, need_process: bool = False) -> Inputs:
    """Find the model and process files: given explicitly, or ``model.toml`` /
    ``process.toml`` inside the campaign folder (what ``speciakin new`` creates).

    Raises
    ------
    InputError
        A named file does not exist, or the process file is needed and missing.
    """
    c = Path(campaign)
    if not c.exists():
        raise InputError("campaign not found", Location(file=str(c)),
                         expected="a campaign folder (made by 'speciakin new') or a workbook (.xlsx)")
    folder = c if c.is_dir() else c.parent
    m = Path(model) if model else folder / MODEL_FILE
    if not m.exists():
        raise InputError("model file not found", Location(file=str(m)),
                         expected="--model MODEL.toml, or model.toml inside the campaign folder")
    p = Path(process) if process else (folder / PROCESS_FILE if (folder / PROCESS_FILE).exists() else None)
    if p is not None and not p.exists():
        raise InputError("process file not found", Location(file=str(p)), expected="an existing process file")
    if need_process and p is None:
        raise InputError("no process file", Location(file=str(folder / PROCESS_FILE)),
                         expected="--process PROCESS.toml, or process.toml inside the campaign folder")
    return Inputs(c, m, p)


def load_inputs(inputs: Inputs):
    """(model, campaign, process or None) from resolved paths; raises the layers' input errors."""
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import load_campaign
    from speciakin.decision import load_process

    model = load_model(inputs.model)
    campaign = load_campaign(inputs.campaign, model=model)  # names, titrants, reachable set points (docs/data.md)
    process = load_process(inputs.process, model) if inputs.process else None
    if process is not None:
        from speciakin.decision.process import area_spec_problems
        from speciakin.errors import ModelFileError

        found = area_spec_problems(process, {c.name: c.molecule for c in campaign.compounds})
        if found:
            raise ModelFileError(problems=found)
    return model, campaign, process


def check_inputs(campaign: str | os.PathLike, model: str | os.PathLike | None = None,
                 process: str | os.PathLike | None = None):
    """Every problem of a campaign's workbook, model file and process file, each where it is
    (``speciakin check`` and the workbench page show this report).

    Returns
    -------
    speciakin.data.CheckReport
        The workbook's and model file's problems (``speciakin.data.check_campaign``), then the process
        file's, checked against the model when it could be read; a process value that is an HPLC
        compound's name where a model molecule is wanted is told the molecule.
    """
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import check_campaign
    from speciakin.decision import load_process

    model_obj = None
    if model is not None:
        try:  # read once, for the workbook's check and the process file's
            model_obj = load_model(model)
        except InputError:  # the workbook's check reads the file again and reports its problems
            pass
    report = check_campaign(campaign, model=model if model_obj is None else model_obj)
    if process is None:
        return report
    report.process = str(process)
    try:
        plan = load_process(process, model_obj)
    except InputError as exc:
        report.problems.extend(_named_in_workbook(p, report.compounds) for p in exc.problems)
    else:
        if report.imported:  # area% specifications name HPLC compounds of the workbook
            from speciakin.decision.process import area_spec_problems

            report.problems.extend(area_spec_problems(plan, report.compounds))
    return report


def _named_in_workbook(problem, compounds: dict[str, str]):
    """``problem`` with a hint when its value is an HPLC compound's name (the Compounds sheet's) where the
    process file wants the model molecule it maps to."""
    from dataclasses import replace

    molecule = compounds.get(problem.value) if isinstance(problem.value, str) else None
    if not molecule or molecule == problem.value:
        return problem
    hint = f"'{problem.value}' is the Compounds sheet's name of model molecule {molecule}: write {molecule}"
    return replace(problem, expected=f"{problem.expected}; {hint}" if problem.expected else hint)
