"""``speciakin new DIR``: start a campaign folder from the templates."""

from __future__ import annotations

NAME = "new"
HELP = "create a campaign folder: blank workbook, model and process skeletons, README"


def add_arguments(parser) -> None:
    parser.add_argument("folder", metavar="DIR", help="folder to create (must not exist or be empty)")
    parser.add_argument("--example", action="store_true",
                        help="write a small INVENTED example campaign (three runs, model and process files) "
                             "on which check and run work as written")
    parser.epilog = ("example:\n  speciakin new amine-acylation-2026\n"
                     "then fill in campaign.xlsx and run: speciakin check amine-acylation-2026\n"
                     "  speciakin new try-it --example && speciakin run try-it --quick")


def run(args) -> int:
    if args.example:
        from speciakin.data.example import new_example as make
    else:
        from speciakin.data.templates import new_campaign as make

    written = make(args.folder)
    print(f"created {args.folder}:")
    for path in written:
        print(f"  {path.name}")
    if args.example:
        print(f"INVENTED example campaign. next:  speciakin check {args.folder}  then  "
              f"speciakin run {args.folder} --quick")
    else:
        print(f"next: fill in the workbook, then  speciakin check {args.folder}")
    return 0
