"""``speciakin contrast CAMPAIGN A B``: two recorded results side by side."""

from __future__ import annotations

NAME = "contrast"
HELP = "show two recorded results side by side: inputs changed, parameters and intervals, pH window"

EPILOG = """example:
  speciakin history my-campaign                     # the ids
  speciakin contrast my-campaign 3fa2c1 91b0de      # an id, or its first or last characters

A and B are ids listed by 'speciakin history'. Input files are compared by SHA-256."""


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", help="campaign folder (or its workbook)")
    parser.add_argument("a", metavar="A", help="id of the first run")
    parser.add_argument("b", metavar="B", help="id of the second run")


def run(args) -> int:
    from speciakin.cli._common import existing_file
    from speciakin.pipeline import folders
    from speciakin.pipeline.contrast import contrast, contrast_text

    existing_file(args.campaign, "campaign")
    print(contrast_text(contrast(folders.results_root(args.campaign), args.a, args.b)))
    return 0
