"""``speciakin sample``: Bayesian posterior with emcee, checkpointed."""

from __future__ import annotations

NAME = "sample"
HELP = "sample the Bayesian posterior of the fitted parameters (emcee), with checkpoints"

EPILOG = """example:
  speciakin sample my-campaign --jobs 2                 # until converged (checked every 200 steps, cap 5000)
  speciakin sample my-campaign --steps 4000             # exactly 4000 steps per walker
  speciakin sample my-campaign --resume                 # continue an interrupted run
  speciakin sample my-campaign --scheduler tcp://10.0.0.5:8786   # an existing Dask cluster
  speciakin sample my-campaign --proposal stretch       # the stretch move only (no fit covariance used)

starts from the fit of the newest complete result folder (or --from RESULT; fits first
when there is none) and writes posterior.h5 (checkpoint), posterior.json, posterior.txt
and figures/ into a new result folder with a copy of that fit; --resume continues the
newest interrupted folder (or --from / --out) in place."""


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments, add_sampler_options, add_source_argument

    parser.epilog = EPILOG
    add_campaign_arguments(parser)
    add_source_argument(parser)
    add_sampler_options(parser)
    parser.add_argument("--resume", action="store_true",
                        help="continue the newest interrupted sample (or the folder of --from / --out) in place")
    parser.add_argument("--proposal", metavar="NAME", default=None,
                        help="move choice (default: 'adaptive' = independence Student-t from the fit "
                             "covariance, refitted to the chain during warm-up, + differential evolution "
                             "when fit.json has a usable covariance, else 'stretch'); the names are listed "
                             "in docs/sampling.md")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.cli._common import earlier_result, print_notes, recording
    from speciakin.pipeline import outputs
    from speciakin.report.results import posterior_figures
    from speciakin.errors import InputError, Location

    for key, value, minimum in (("--steps", args.steps, 10), ("--jobs", args.jobs, 1)):
        if value is not None and value < minimum:
            raise InputError(f"{key} is too small", Location(key=key), value, f"an integer >= {minimum}")
    if args.proposal is not None:
        from speciakin.estimation.proposals import PROPOSALS

        if args.proposal not in PROPOSALS:
            raise InputError("unknown move choice", Location(key="--proposal"), args.proposal,
                             "one of " + ", ".join(PROPOSALS))
    inputs = pipeline.resolve_inputs(args.campaign, args.model)
    model, campaign, _ = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    writes = ("posterior", "posterior_summary", "posterior_text")
    if args.resume:
        folder = _interrupted(args, inputs)
        source, rec = folder, recording(args, inputs, "sample", resume=folder, seeds={"seed": args.seed})
    else:
        source = earlier_result(args, inputs, "fit")
        rec = recording(args, inputs, "sample", writes=writes, built_on=source, carry=("fit", "fit_text"),
                        seeds={"seed": args.seed})
    with rec:
        out = rec.folder
        fit = outputs.load_fit(out)
        if fit is None or fit.names != objective.names:
            print("no matching fit to start from: fitting first (with profiles, which shape the moves)")
            fit = pipeline.fit_step(objective, out, profiles=True)
        result = pipeline.sample_step(objective, fit, out, n_steps=args.steps, n_walkers=args.walkers,
                                      seed=args.seed, resume=args.resume, jobs=args.jobs,
                                      scheduler=args.scheduler, progress=not args.quiet,
                                      proposal=args.proposal)
        posterior_figures(result, out)
    print(result.report())
    print_notes(rec)
    print(f"\nwritten: {out / 'posterior.json'}, {out / 'posterior.h5'}, {out / 'figures'}")
    return 0


def _interrupted(args, inputs):
    """The folder ``--resume`` continues: --from, else --out, else the newest interrupted one with a checkpoint."""
    from pathlib import Path

    from speciakin.errors import InputError, Location
    from speciakin.pipeline import outputs
    from speciakin.pipeline.record import find_result

    if args.source or not args.out:
        return find_result(inputs.campaign, args.source, having="posterior", statuses=("interrupted", "failed"),
                           what="interrupted sample")
    folder = Path(args.out)
    if not outputs.result_path(folder, "posterior").is_file():
        raise InputError("nothing to resume: no posterior checkpoint in the folder",
                         Location(file=str(outputs.result_path(folder, "posterior"))),
                         expected="the folder of an interrupted sample")
    return folder
