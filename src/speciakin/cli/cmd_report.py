"""``speciakin report OUTDIR``: the tech-transfer report from the results in a folder."""

from __future__ import annotations

import argparse

NAME = "report"
HELP = "write the tech-transfer report from the results in an output folder"

EPILOG = """\
example:
  speciakin report results/ --formats html,pdf

reads from OUTDIR whatever exists: fit.json (least-squares fit),
posterior_samples.h5 (posterior sample), window.json (pH window); a missing piece is reported as
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
    for option in ("campaign", "model", "process", "formats"):
        value = getattr(args, option)
        if value is not None:
            parts += [f"--{option}", str(value)]
    if args.invented:
        parts.append("--invented")
    return shlex.join(parts)


def run(args) -> int:
    from pathlib import Path

    from speciakin import __version__
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import check_campaign, load_campaign
    from speciakin.errors import InputError, Location
    from speciakin.pipeline.objective import CampaignObjective
    from speciakin.report.assemble import ReportInputs, build_report
    from speciakin.pipeline.outputs import read_fit, read_posterior, read_window, resolve_input
    from speciakin.report.render import render_all

    formats = _formats(args.formats)
    folder = Path(args.outdir)
    if not folder.is_dir():
        raise InputError("output folder not found", Location(file=str(folder)),
                         expected="the folder a previous fit, sample or window command wrote")
    fit_entry = read_fit(folder)
    fit, fit_data = fit_entry if fit_entry is not None else (None, {})
    model_path = resolve_input(args.model, fit_data.get("model"), folder, "model file", "model")
    campaign_path = resolve_input(args.campaign, fit_data.get("campaign"), folder, "campaign", "campaign")
    model = load_model(model_path)
    campaign = load_campaign(campaign_path)
    objective = CampaignObjective(model, campaign)
    if fit is not None and list(fit.names) != list(objective.names):
        raise InputError("fit.json does not belong to this model: its fitted parameters differ",
                         Location(file=str(folder / "fit.json"), key="parameters"), ", ".join(fit.names),
                         "the model's fitted parameters " + ", ".join(objective.names))
    posterior = read_posterior(folder)
    window = read_window(folder)
    process = None
    extra = [("model file", str(model_path))]
    if args.process:
        from speciakin.decision.process import load_process

        process_path = resolve_input(args.process, None, folder, "process file", "process")
        process = load_process(process_path, model)
        extra.append(("process file", str(process_path)))
    check = check_campaign(campaign_path, model=model)
    invented = bool(args.invented) or model.description.lower().startswith("invented")
    doc = build_report(ReportInputs(
        model=model, campaign=campaign, objective=objective, fit=fit, posterior=posterior, window=window,
        process=process, check=check, command=_command(args), software_version=__version__,
        extra_inputs=extra, invented=invented))
    paths = render_all(doc, folder, formats=formats)
    missing = [what for what, value in (("fit", fit), ("posterior", posterior), ("window", window))
               if value is None]
    for fmt, path in paths.items():
        print(f"wrote {path}")
    if missing:
        print("not run (reported as such): " + ", ".join(missing))
    return 0
