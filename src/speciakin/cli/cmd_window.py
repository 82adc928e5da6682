"""``speciakin window``: the pH window where every specification is met."""

from __future__ import annotations

NAME = "window"
HELP = "predict the pH window where the planned process meets every specification"

EPILOG = """example:
  speciakin window my-campaign --process my-campaign/process.toml

builds on the newest complete result folder with a fit (or --from RESULT): uses its
posterior when there is one, otherwise draws from the least-squares covariance of
fit.json (and says which); writes window.json, window.txt and figures/window_*.png
into a new result folder, with a copy of the fit and posterior it used."""


#: Results of the folder a window builds on, copied into its own folder.
CARRIED = ("fit", "fit_text", "posterior", "posterior_summary", "posterior_text")


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments, add_source_argument

    parser.epilog = EPILOG
    add_campaign_arguments(parser, process=True)
    add_source_argument(parser, "fit (and posterior)")
    parser.add_argument("--draws", type=int, default=None, help="parameter draws (default: the process file's)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the draws")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.pipeline import outputs
    from speciakin.cli._common import StageProgress, earlier_result, print_notes, recording

    inputs = pipeline.resolve_inputs(args.campaign, args.model, args.process, need_process=True)
    model, campaign, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    source = earlier_result(args, inputs, "fit")
    with recording(args, inputs, "window", writes=("window", "window_text"), built_on=source,
                   carry=CARRIED, seeds={"seed": args.seed}) as rec:
        out = rec.folder
        posterior = outputs.load_posterior(out)
        fit = outputs.load_fit(out)
        if posterior is not None and list(posterior.parameter_names) != objective.names:
            posterior = None
        if posterior is None and (fit is None or fit.names != objective.names):
            print("no matching fit to start from: fitting first")
            fit = pipeline.fit_step(objective, out, profiles=False)
        progress = StageProgress(not args.quiet)
        try:
            result = pipeline.window_step(objective, process, out, fit=fit, posterior=posterior, draws=args.draws,
                                          seed=args.seed, progress=progress)
        finally:
            progress.close()
    print(result.report())
    print_notes(rec)
    print(f"\n{pipeline.window_text(result)}")
    print(f"written: {out / 'window.json'}, {out / 'figures'}")
    return 0
