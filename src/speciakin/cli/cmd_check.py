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
                     "1: errors (in the workbook or model file: nothing can be fitted; "
                     "in the process file alone: the fit can run, the pH window cannot)")


def _beside(campaign: str, given: str | None, name: str) -> str | None:
    """``given``, else ``name`` in the campaign folder when it exists."""
    from pathlib import Path

    if given is not None:
        return given
    folder = Path(campaign) if Path(campaign).is_dir() else Path(campaign).parent
    return str(folder / name) if (folder / name).exists() else None


def run(args) -> int:
    import json

    from speciakin.pipeline.inputs import MODEL_FILE, PROCESS_FILE, check_inputs

    report = check_inputs(args.campaign, _beside(args.campaign, args.model, MODEL_FILE),
                          _beside(args.campaign, args.process, PROCESS_FILE))
    if args.format == "json":
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print(report.report())
    return report.exit_code
