"""``speciakin check CAMPAIGN``: list every problem of a campaign's spreadsheets."""

from __future__ import annotations

NAME = "check"
HELP = "check a campaign's spreadsheets; every problem names its sheet, row and column"


def add_arguments(parser) -> None:
    parser.add_argument("campaign", metavar="CAMPAIGN",
                        help="campaign folder, workbook (.xlsx) or folder of CSV files")
    parser.add_argument("--model", metavar="MODEL.toml", default=None,
                        help="also check compound and species names against this model file "
                             "(default: model.toml in the campaign folder, when there is one)")
    parser.add_argument("--format", choices=("text", "json"), default="text",
                        help="text for people (default) or json for machines")
    parser.epilog = ("example:\n  speciakin check my-campaign --model my-campaign/model.toml\n"
                     "exit code 0: no errors (warnings may be listed); 1: errors, nothing can be fitted")


def run(args) -> int:
    import json

    from speciakin.data import check_campaign

    model = args.model
    if model is None:
        from pathlib import Path

        folder = Path(args.campaign) if Path(args.campaign).is_dir() else Path(args.campaign).parent
        if (folder / "model.toml").exists():
            model = str(folder / "model.toml")
    report = check_campaign(args.campaign, model=model)
    if args.format == "json":
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print(report.report())
    return report.exit_code
