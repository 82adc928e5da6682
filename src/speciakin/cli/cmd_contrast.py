"""``speciakin contrast CAMPAIGN [A [B]]``: two recorded results side by side."""

from __future__ import annotations

NAME = "contrast"
HELP = "show two recorded results side by side: inputs changed, parameters and intervals, pH window"

EPILOG = """example:
  speciakin history my-campaign                     # the ids
  speciakin contrast my-campaign 3fa2c1 91b0de      # an id, or its first or last characters
  speciakin contrast my-campaign                    # the two newest complete runs
  speciakin contrast my-campaign 3fa2c1             # that run and the newest complete one

A and B are ids listed by 'speciakin history'. Input files are compared by SHA-256."""


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", help="campaign folder (or its workbook)")
    parser.add_argument("a", metavar="A", nargs="?", default=None,
                        help="id of the first run (default: the older of the two newest complete runs)")
    parser.add_argument("b", metavar="B", nargs="?", default=None,
                        help="id of the second run (default: the newest complete run other than A)")


def run(args) -> int:
    from speciakin.cli._common import existing_file
    from speciakin.pipeline import folders
    from speciakin.pipeline.contrast import contrast, contrast_text, default_pair

    existing_file(args.campaign, "campaign")
    root = folders.results_root(args.campaign)
    a, b = (args.a, args.b) if args.b is not None else default_pair(root, args.a)
    print(contrast_text(contrast(root, a, b)))
    return 0
