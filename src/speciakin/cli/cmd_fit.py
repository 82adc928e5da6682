"""``speciakin fit``: global least-squares fit with confidence intervals."""

from __future__ import annotations

NAME = "fit"
HELP = "fit rate constants and pKa shifts to every run of a campaign at once"

EPILOG = """example:
  speciakin fit my-campaign --out my-campaign/results
  speciakin fit runs.xlsx --model model.toml --starts 12 --no-profiles
  speciakin fit my-campaign --fix 'pKa[S.N_aryl]' --bounds 'log10k[acylation]=-1:3'

writes fit.json (schema in docs/workflow.md), fit.txt and figures/ into a new result folder
<campaign>/results/<UTC time>-<id>/ (or --out DIR, refused when it already holds a fit)."""


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments

    parser.epilog = EPILOG
    add_campaign_arguments(parser)
    parser.add_argument("--starts", type=int, default=None,
                        help="number of starting points (default: [fit] starts of the model file, or 6)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the starting points")
    parser.add_argument("--no-profiles", action="store_true", help="skip the profile-likelihood intervals")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    from speciakin.cli._overrides import add_override_options
    add_override_options(parser)


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.report.results import fit_figures
    from speciakin.cli._common import StageProgress, print_notes, recording
    from speciakin.errors import InputError, Location

    if args.starts is not None and args.starts < 1:
        raise InputError("--starts must be at least 1", Location(key="--starts"), args.starts, "an integer >= 1")
    from speciakin.cli._overrides import apply_overrides, model_hook

    inputs, overrides = apply_overrides(pipeline.resolve_inputs(args.campaign, args.model), args)
    model, campaign, _ = pipeline.load_inputs(inputs)
    model = model_hook(inputs, overrides)(model) if overrides else model
    objective = pipeline.make_objective(model, campaign)
    with recording(args, inputs, "fit", writes=("fit", "fit_text"), seeds={"seed": args.seed}) as rec:
        out = rec.folder
        progress = StageProgress(not args.quiet)
        try:
            result = pipeline.fit_step(objective, out, starts=args.starts, seed=args.seed,
                                       profiles=not args.no_profiles, progress=progress)
        finally:
            progress.close()
        fit_figures(model, pipeline.predict_step(objective, result), result, out)
    print(result.report())
    print_notes(rec)
    print(f"\nwritten: {out / 'fit.json'}, {out / 'fit.txt'}, {out / 'figures'}")
    return 0
