"""``speciakin run``: the whole job, check -> fit -> sample -> window -> report."""

from __future__ import annotations

NAME = "run"
HELP = "the whole job: check, fit, sample, pH window and report, in one command"

EPILOG = """example:
  speciakin run my-campaign                      # model.toml and process.toml inside the folder
  speciakin run my-campaign --quick              # provisional first look: fit + covariance window
  speciakin run runs.xlsx --model model.toml --process process.toml --out results --jobs 2

stops with a clear message at the first step that fails; every earlier step's
output stays in the output folder. Open report.html (or report.pdf) when done."""


def add_pipeline_options(parser) -> None:
    parser.add_argument("--steps", type=int, default=None,
                        help="fixed posterior steps per walker (default: until converged, at most 5000)")
    parser.add_argument("--walkers", type=int, default=None, help="walkers (default max(32, 4 x parameters))")
    parser.add_argument("--starts", type=int, default=None, help="least-squares starting points")
    parser.add_argument("--draws", type=int, default=None, help="parameter draws for the window")
    parser.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    parser.add_argument("--jobs", type=int, default=1, help="local worker processes for the posterior")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="an existing Dask distributed scheduler")
    parser.add_argument("--resume", action="store_true", help="continue an interrupted posterior run")
    parser.add_argument("--no-profiles", action="store_true", help="skip profile-likelihood intervals")
    parser.add_argument("--quiet", action="store_true", help="no progress bars")


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments

    parser.epilog = EPILOG
    add_campaign_arguments(parser, process=True)
    add_pipeline_options(parser)
    from speciakin.cli._overrides import add_override_options
    from speciakin.cli._quick import add_quick_option
    add_quick_option(parser)
    add_override_options(parser)


def execute(inputs, out, args, invented: bool = False) -> int:
    """Run the pipeline for resolved inputs; shared with ``speciakin demo``."""
    import sys
    import time

    from speciakin import pipeline
    from speciakin.cli._common import StageProgress
    from speciakin.errors import SpeciakinError
    from speciakin.report import results as renderer

    step = {"name": "?"}
    progress = StageProgress(not args.quiet)
    t0 = time.perf_counter()
    try:
        result = pipeline.run_all(
            inputs, out, renderer=renderer, starts=args.starts, seed=args.seed, n_steps=args.steps,
            n_walkers=args.walkers, jobs=args.jobs, scheduler=args.scheduler, resume=args.resume,
            profiles=not args.no_profiles, draws=args.draws, invented=invented, say=print,
            progress=None if args.quiet else progress, on_step=lambda name: step.update(name=name))
    except SpeciakinError as exc:
        progress.close()
        print(f"speciakin: stopped at step '{step['name']}': {exc}", file=sys.stderr)
        print(f"speciakin: the output of earlier steps is kept in {out}", file=sys.stderr)
        return exc.exit_code
    progress.close()
    print(f"\ndone in {time.perf_counter() - t0:.1f} s; open {result.report.get('html', out)}")
    return 0


def run(args) -> int:
    from speciakin import pipeline
    from speciakin.cli._common import default_out

    from speciakin.cli._overrides import apply_overrides

    inputs, out = pipeline.resolve_inputs(args.campaign, args.model, args.process), default_out(args, "run")
    if args.quick:
        from speciakin.cli._quick import run_quick
        return run_quick(inputs, out, args)
    return execute(apply_overrides(inputs, args, out)[0], out, args)
