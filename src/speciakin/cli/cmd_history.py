"""``speciakin history CAMPAIGN``: every recorded run of a campaign, newest first."""

from __future__ import annotations

NAME = "history"
HELP = "list the recorded runs of a campaign, newest first (time, id, step, status, pH window)"

EPILOG = """example:
  speciakin history my-campaign

reads <campaign>/results/index.sqlite (docs/workflow.md, "The run index"); a run
whose process stopped without finishing shows as interrupted. Compare two runs
with 'speciakin contrast my-campaign ID_A ID_B'."""


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", help="campaign folder (or its workbook)")


def run(args) -> int:
    from speciakin.cli._common import existing_file
    from speciakin.pipeline import folders
    from speciakin.pipeline.contrast import runs_listing

    existing_file(args.campaign, "campaign")
    print(runs_listing(folders.results_root(args.campaign)))
    return 0
