"""``speciakin suggest``: which run to do next to firm up the decision."""

from __future__ import annotations

NAME = "suggest"
HELP = "rank candidate next runs by how much they are expected to firm up the pH window"

EPILOG = """example:
  speciakin suggest my-campaign --plant-ph 4 9 --batch 2

builds on the newest complete result folder with a fit (or --from RESULT; uses its
posterior.h5 when present) and writes into a new result folder; needs,
for the window criteria, the process file; candidates copy the protocol of a
campaign run (--template) with a held pH set point on a grid over the model's
plausible range.  Writes suggest.json, suggest.txt and figures/suggest_shrinkage.png.
Method and thresholds: docs/suggest.md."""


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments, add_source_argument
    from speciakin.decision.suggest.criteria import METHODS

    parser.epilog = EPILOG
    add_campaign_arguments(parser, process=True)
    add_source_argument(parser, "fit (and posterior)")
    parser.add_argument("--ph-range", nargs=2, type=float, metavar=("LOW", "HIGH"),
                        help="candidate set points from LOW to HIGH (default: site pKa values +/- 2 and the "
                             "campaign's set points)")
    parser.add_argument("--ph-step", type=float, default=0.5, help="spacing of the set points (default 0.5)")
    parser.add_argument("--plant-ph", nargs=2, type=float, metavar=("LOW", "HIGH"),
                        help="leave out set points the plant cannot hold")
    parser.add_argument("--temperatures", nargs="+", type=float, metavar="C",
                        help="candidate temperatures [C] (default: the template run's)")
    parser.add_argument("--temperature-limits", nargs=2, type=float, metavar=("LOW", "HIGH"),
                        help="leave out temperatures outside LOW..HIGH [C]")
    parser.add_argument("--equivalents", nargs="+", type=float, metavar="EQ",
                        help="candidate reagent equivalents (default: the template run's)")
    parser.add_argument("--dosing-times", nargs="+", type=float, metavar="MIN",
                        help="candidate reagent dosing times [min] (default: the template run's)")
    parser.add_argument("--sampling", nargs="+", type=float, metavar="MIN",
                        help="sampling schedule of the new run [min] (default: the template run's)")
    parser.add_argument("--template", metavar="RUN", help="campaign run whose protocol the candidates copy "
                                                          "(default: the first held-pH run)")
    parser.add_argument("--method", choices=METHODS, default="fisher",
                        help="local Fisher update at each draw (default), linear-Gaussian update over the "
                             "draws, or pre-posterior simulation")
    parser.add_argument("--check", action="store_true",
                        help="also rank with the other method and record whether they agree")
    parser.add_argument("--batch", type=int, default=1, metavar="K", help="choose K runs together (greedy)")
    parser.add_argument("--draws", type=int, default=400, help="parameter draws (default 400)")
    parser.add_argument("--seed", type=int, default=1, help="seed of the draws and simulated noise")
    parser.add_argument("--min-gain", type=float, default=0.1, metavar="PH",
                        help="expected narrowing [pH] below which no run 'helps much' (default 0.1)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


#: Results of the folder a suggestion builds on, copied into its own folder.
CARRIED = ("fit", "fit_text", "posterior", "posterior_summary", "posterior_text", "window", "window_text")


def _check_counts(args) -> None:
    from speciakin.errors import InputError, Location

    for key, value, low in (("--batch", args.batch, 1), ("--draws", args.draws, 20)):
        if value < low:
            raise InputError(f"{key} is too small", Location(key=key), value, f"an integer >= {low}")
    if not args.min_gain > 0:
        raise InputError("--min-gain must be positive", Location(key="--min-gain"), args.min_gain, "a value > 0")


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.cli._common import earlier_result, print_notes, recording
    from speciakin.errors import InputError, Location
    from speciakin.pipeline import outputs

    _check_counts(args)
    inputs = pipeline.resolve_inputs(args.campaign, args.model, args.process)
    model, campaign, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    source = earlier_result(args, inputs, "fit")
    if source is None:
        raise InputError("no fit or posterior to start from",
                         Location(file=str(pipeline.results_root(inputs.campaign))),
                         expected="run 'speciakin fit' (and optionally 'speciakin sample') first")
    posterior = outputs.load_posterior(source)
    if posterior is not None and list(posterior.parameter_names) != objective.names:
        posterior = None
    fit = outputs.load_fit(source)
    if fit is not None and fit.names != objective.names:
        raise InputError("fit.json was made for other fitted parameters than the model now marks",
                         Location(file=str(outputs.result_path(source, "fit"))), fit.names,
                         f"a fit of {', '.join(objective.names)} (run 'speciakin fit' again)")
    with recording(args, inputs, "suggest", writes=("suggest", "suggest_text"), built_on=source, carry=CARRIED,
                   seeds={"seed": args.seed}) as rec:
        out = rec.folder
        result = _suggest(args, inputs, objective, fit, posterior, process, out)
    print(result.report())
    print(f"\nwritten: {outputs.result_path(out, 'suggest')}, "
          f"{out / outputs.FIGURES_FOLDER / 'suggest_shrinkage.png'}")
    print_notes(rec)
    return 0


def _suggest(args, inputs, objective, fit, posterior, process, out):
    """Rank the candidates and write suggest.json, suggest.txt and the figure into ``out``."""
    from speciakin.cli._common import StageProgress
    from speciakin.pipeline import outputs
    from speciakin.pipeline.suggest import suggest_for_campaign
    from speciakin.report.results import suggest_figures

    progress = StageProgress(enabled=not args.quiet)
    try:
        result = suggest_for_campaign(
            objective, fit=fit, posterior=posterior, process=process, n_draws=args.draws, seed=args.seed,
            ph_range=args.ph_range, ph_step=args.ph_step, plant_ph=args.plant_ph,
            temperatures_c=args.temperatures, temperature_limits_c=args.temperature_limits,
            equivalents=args.equivalents, dosing_times_min=args.dosing_times, sample_times_min=args.sampling,
            template=args.template, method=args.method, batch=args.batch, min_gain=args.min_gain,
            check=args.check, progress=progress)
    finally:
        progress.close()
    outputs.save_suggestion(out, result, inputs)
    suggest_figures(result, out)
    return result
