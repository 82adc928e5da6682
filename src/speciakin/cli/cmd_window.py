"""``speciakin window``: the pH window where every specification is met."""

from __future__ import annotations

NAME = "window"
HELP = "predict the pH window where the planned process meets every specification"

EPILOG = """example:
  speciakin window my-campaign --process my-campaign/process.toml

uses the posterior in the output folder when there is one, otherwise draws from the
least-squares covariance of fit.json (and says which); writes window.json,
window.txt and figures/window_*.png."""


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments

    parser.epilog = EPILOG
    add_campaign_arguments(parser, process=True)
    parser.add_argument("--draws", type=int, default=None, help="parameter draws (default: the process file's)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the draws")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.pipeline import outputs
    from speciakin.cli._common import StageProgress, default_out

    inputs = pipeline.resolve_inputs(args.campaign, args.model, args.process, need_process=True)
    model, campaign, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    out = default_out(args, "window")
    posterior = outputs.load_posterior(out)
    fit = outputs.load_fit(out)
    if posterior is not None and list(posterior.parameter_names) != objective.names:
        posterior = None
    if posterior is None and (fit is None or fit.names != objective.names):
        print("no matching fit.json in the output folder: fitting first")
        fit = pipeline.fit_step(objective, out, profiles=False)
    progress = StageProgress(not args.quiet)
    try:
        result = pipeline.window_step(objective, process, out, fit=fit, posterior=posterior, draws=args.draws,
                                      seed=args.seed, progress=progress)
    finally:
        progress.close()
    print(result.report())
    print(f"\n{pipeline.window_text(result)}")
    print(f"written: {out / 'window.json'}, {out / 'figures'}")
    return 0
