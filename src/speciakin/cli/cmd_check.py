"""``speciakin check CAMPAIGN``: list every problem of a campaign's spreadsheets,
its model file and its process file."""

from __future__ import annotations

NAME = "check"
HELP = "check a campaign's spreadsheets, model and process files; every problem names where it is"


def add_arguments(parser) -> None:
    parser.add_argument("campaign", metavar="CAMPAIGN",
                        help="campaign folder, workbook (.xlsx) or folder of CSV files")
    parser.add_argument("--model", metavar="MODEL.toml", default=None,
                        help="also check compound and species names against this model file "
                             "(default: model.toml in the campaign folder, when there is one)")
    parser.add_argument("--process", metavar="PROCESS.toml", default=None,
                        help="also check this process file against the model "
                             "(default: process.toml in the campaign folder, when there is one)")
    parser.add_argument("--format", choices=("text", "json"), default="text",
                        help="text for people (default) or json for machines")
    parser.epilog = ("example:\n  speciakin check my-campaign --model my-campaign/model.toml\n"
                     "exit code 0: no errors (warnings are listed with their text); "
                     "1: errors, nothing can be fitted")


def _beside(campaign: str, given: str | None, name: str) -> str | None:
    """``given``, else ``name`` in the campaign folder when it exists."""
    from pathlib import Path

    if given is not None:
        return given
    folder = Path(campaign) if Path(campaign).is_dir() else Path(campaign).parent
    return str(folder / name) if (folder / name).exists() else None


def check_process(report, process: str, model) -> None:
    """Add the problems of the process file (checked against ``model`` when
    it could be read) to ``report``."""
    from speciakin.decision.process import load_process
    from speciakin.errors import InputError

    report.process = process
    try:
        load_process(process, model)
    except InputError as exc:
        report.problems.extend(_named_in_workbook(p, report.compounds) for p in exc.problems)


def _named_in_workbook(problem, compounds: dict[str, str]):
    """``problem`` with a hint when its value is an HPLC compound's name (the Compounds sheet's) where the
    process file wants the model molecule it maps to."""
    from dataclasses import replace

    molecule = compounds.get(problem.value) if isinstance(problem.value, str) else None
    if not molecule or molecule == problem.value:
        return problem
    hint = f"'{problem.value}' is the Compounds sheet's name of model molecule {molecule}: write {molecule}"
    return replace(problem, expected=f"{problem.expected}; {hint}" if problem.expected else hint)


def run(args) -> int:
    import json

    from speciakin.data import check_campaign
    from speciakin.errors import InputError
    from speciakin.pipeline.inputs import MODEL_FILE, PROCESS_FILE

    model = _beside(args.campaign, args.model, MODEL_FILE)
    process = _beside(args.campaign, args.process, PROCESS_FILE)
    report = check_campaign(args.campaign, model=model)
    if process is not None:
        model_obj = None
        if model is not None:
            from speciakin.chemistry.modelfile import load_model
            try:
                model_obj = load_model(model)
            except InputError:  # its problems are in the report already
                model_obj = None
        check_process(report, process, model_obj)
    if args.format == "json":
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print(report.report())
    return report.exit_code
