"""``speciakin report OUTDIR``: the tech-transfer report from the results in a folder."""

from __future__ import annotations

import argparse

NAME = "report"
HELP = "write the tech-transfer report from the results in an output folder"

EPILOG = """\
example:
  speciakin report results/ --formats html,pdf

reads from OUTDIR whatever exists: fit.json (least-squares fit),
posterior.h5 (posterior sample), window.json (pH window); a missing piece is reported as
"not run". The model and campaign paths come from fit.json unless given.
writes OUTDIR/report.<suffix> for each format (each file replaced atomically).
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from speciakin.report.render import REPORT_FORMATS

    parser.epilog = EPILOG
    parser.add_argument("outdir", metavar="OUTDIR", help="output folder of a previous fit / sample / window")
    parser.add_argument("--campaign", metavar="CAMPAIGN", default=None,
                        help="campaign folder or workbook (default: the one named in fit.json)")
    parser.add_argument("--model", metavar="MODEL.toml", default=None,
                        help="model file (default: the one named in fit.json)")
    parser.add_argument("--process", metavar="PROCESS.toml", default=None,
                        help="process file used for the pH window (listed with its SHA-256)")
    parser.add_argument("--formats", metavar="LIST", default=None,
                        help="comma-separated formats among " + ", ".join(REPORT_FORMATS) + " (default: all)")
    parser.add_argument("--invented", action="store_true",
                        help="label the report as based on invented demonstration data")
    add_people_arguments(parser)


def add_people_arguments(parser: argparse.ArgumentParser) -> None:
    """``--author`` and ``--reviewer`` for the report's QA block (shared with ``run``)."""
    parser.add_argument("--author", default="", help="author named in the report's QA block "
                        "(default: [report] author in the process file)")
    parser.add_argument("--reviewer", default="", help="reviewer named in the report's QA block "
                        "(default: [report] reviewer in the process file)")


def _formats(text: str | None) -> tuple[str, ...] | None:
    from speciakin.errors import InputError, Location
    from speciakin.report.render import REPORT_FORMATS

    if text is None:
        return None
    names = tuple(dict.fromkeys(t.strip().lower() for t in text.split(",") if t.strip()))
    unknown = [n for n in names if n not in REPORT_FORMATS]
    if not names or unknown:
        raise InputError("unknown report format", Location(key="--formats"), ", ".join(unknown) or text,
                         "a comma-separated list of " + ", ".join(REPORT_FORMATS))
    return names


def _command(args) -> str:
    import shlex

    parts = ["speciakin", "report", str(args.outdir)]
    for option in ("campaign", "model", "process", "formats", "author", "reviewer"):
        value = getattr(args, option)
        if value:
            parts += [f"--{option}", str(value)]
    if args.invented:
        parts.append("--invented")
    return shlex.join(parts)


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.report.results import write_report

    formats = _formats(args.formats)
    results = pipeline.load_results(args.outdir, campaign=args.campaign, model=args.model, process=args.process)
    invented = bool(args.invented) or results.model.description.lower().startswith("invented")
    paths = write_report(args.outdir, results, invented=invented, formats=formats, command=_command(args),
                         author=args.author, reviewer=args.reviewer)
    for path in paths.values():
        print(f"wrote {path}")
    if results.missing:
        print("not run (reported as such): " + ", ".join(results.missing))
    return 0
