"""``speciakin report OUTDIR``: the tech-transfer report from the results in a folder."""

from __future__ import annotations

import argparse

NAME = "report"
HELP = "write the tech-transfer report from the results in an output folder"

EPILOG = """\
example:
  speciakin report my-campaign                       # the newest complete result
  speciakin report my-campaign/results/20261203T130501Z-3fa2c1 --formats html,pdf

reads from RESULT (a result folder, or a campaign folder: its newest complete
result) whatever exists: fit.json (least-squares fit), posterior.h5 (posterior
sample), window.json (pH window); a missing piece is reported as "not run". The
model and campaign paths come from fit.json (relative to the folder) unless given.
writes report.<suffix> for each format into a new result folder under
<campaign>/results/ with a copy of the results it renders (or --out DIR, refused
when it already holds a report). A folder made by hand or by an older version
(no status.json) is rendered in place when it holds no report yet.
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from speciakin.report.render import REPORT_FORMATS

    parser.epilog = EPILOG
    parser.add_argument("outdir", metavar="RESULT",
                        help="result folder of a previous run / fit / sample / window, or a campaign folder")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="output folder (default: a new result folder under <campaign>/results/)")
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


def _command(args, source, folder) -> str:
    """The command, with paths relative to the folder the report is written into."""
    import shlex

    from speciakin.pipeline.outputs import relative

    parts = ["speciakin", "report", relative(source, folder)]
    for option in ("campaign", "model", "process", "formats", "author", "reviewer"):
        value = getattr(args, option)
        if value:
            plain = option in ("formats", "author", "reviewer")
            parts += [f"--{option}", str(value) if plain else relative(value, folder)]
    if args.invented:
        parts.append("--invented")
    return shlex.join(parts)


#: Results a new report folder copies from the folder it renders (so it stands alone).
CARRIED = ("check", "fit", "fit_text", "posterior", "posterior_summary", "posterior_text", "window",
           "window_text", "suggest", "suggest_text", "timings")


def _source(given: str):
    """The folder to render: a result folder, or the newest complete result of a campaign folder."""
    from pathlib import Path

    from speciakin.pipeline import folders, outputs
    from speciakin.pipeline.record import find_result

    p = Path(given)
    if p.is_dir() and not outputs.result_path(p, "fit").exists() and folders.results_root(p).is_dir():
        return find_result(p, having="fit")
    return p


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.cli._common import print_notes
    from speciakin.pipeline import folders, outputs
    from speciakin.pipeline.record import Recording
    from speciakin.report.results import write_report

    formats = _formats(args.formats)
    source = _source(args.outdir)
    results = pipeline.load_results(source, campaign=args.campaign, model=args.model, process=args.process)
    invented = bool(args.invented) or pipeline.says_invented(results.model)
    out = args.out
    if out is None and not (source / folders.STATUS_FILE).exists() \
            and not list(source.glob(outputs.RESULT_FILES["report"] + ".*")):
        out = source                                  # a folder made by hand or an older version: in place
    same = out is not None and source.resolve() == type(source)(out).resolve()
    with Recording(results.inputs, step="report", out=out, writes=("report",), built_on=source,
                   carry=() if same else CARRIED, command=lambda folder: _command(args, source, folder)) as rec:
        paths = write_report(rec.folder, pipeline.for_report(results, rec.folder), invented=invented,
                             formats=formats, command=rec.command, author=args.author, reviewer=args.reviewer)
    for path in paths.values():
        print(f"wrote {path}")
    if results.missing:
        print("not run (reported as such): " + ", ".join(results.missing))
        if "window" in results.missing:
            print("  next: compute the pH window ('speciakin window <campaign folder>'), then run "
                  "'speciakin report' again")
    print_notes(rec)
    return 0
