"""``speciakin run``: the whole job, check -> fit -> sample -> window -> report."""

from __future__ import annotations

NAME = "run"
HELP = "the whole job: check, fit, sample, pH window and report, in one command"

EPILOG = """example:
  speciakin run my-campaign                      # model.toml and process.toml inside the folder
  speciakin run my-campaign --quick              # provisional first look: fit + covariance window
  speciakin run runs.xlsx --model model.toml --process process.toml --out results --jobs 2

writes into a new result folder <campaign>/results/<UTC time>-<id>/ (or --out DIR, refused
when it already holds results); 'speciakin history CAMPAIGN' lists every run. Stops with
a clear message at the first step that fails; every earlier step's output stays in the
folder, marked failed. --resume continues the newest interrupted run (or --out DIR) in
place. Open report.html (or report.pdf) when done."""


class _Reported(Exception):
    """A step's error, already printed: marks the result folder failed, then becomes the exit code."""

    def __init__(self, code: int, error: Exception) -> None:
        super().__init__(str(error))
        self.code = code


def add_pipeline_options(parser) -> None:
    from speciakin.cli._common import add_sampler_options

    add_sampler_options(parser)
    parser.add_argument("--starts", type=int, default=None, help="least-squares starting points")
    parser.add_argument("--draws", type=int, default=None, help="parameter draws for the window")
    parser.add_argument("--resume", action="store_true",
                        help="continue an interrupted run (the newest, or the folder of --out) in place")
    parser.add_argument("--no-profiles", action="store_true", help="skip profile-likelihood intervals")
    parser.add_argument("--quiet", action="store_true", help="no progress bars")


def add_arguments(parser) -> None:
    from speciakin.cli._common import add_campaign_arguments

    parser.epilog = EPILOG
    from speciakin.cli.cmd_report import add_people_arguments

    add_campaign_arguments(parser, process=True)
    add_pipeline_options(parser)
    add_people_arguments(parser)
    from speciakin.cli._overrides import add_override_options
    from speciakin.cli._quick import add_quick_option
    add_quick_option(parser)
    add_override_options(parser)


def execute(inputs, out, args, invented: bool = False, raise_errors: bool = False) -> int:
    """Run the pipeline for resolved inputs; shared with ``speciakin demo``.

    With ``raise_errors`` a step's error is printed and raised again (so that
    the result folder around the call is marked failed)."""
    import sys
    import time

    from speciakin import pipeline
    from speciakin.cli._common import StageProgress
    from speciakin.errors import SpeciakinError
    from speciakin.report import results as renderer

    if getattr(args, "author", "") or getattr(args, "reviewer", ""):
        import functools
        import types

        renderer = types.SimpleNamespace(
            fit_figures=renderer.fit_figures, posterior_figures=renderer.posterior_figures,
            suggest_figures=renderer.suggest_figures,
            write_report=functools.partial(renderer.write_report, author=args.author, reviewer=args.reviewer))
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
        if raise_errors:
            raise _Reported(exc.exit_code, exc) from None
        return exc.exit_code
    progress.close()
    print(f"\ndone in {time.perf_counter() - t0:.1f} s; open {result.report.get('html', out)}")
    return 0


#: What a run writes (an explicit --out must hold none of it).
WRITES = ("check", "fit", "fit_text", "posterior", "posterior_summary", "window", "window_text", "suggest",
          "suggest_text", "report", "timings")


def run(args) -> int:
    from pathlib import Path

    from speciakin import pipeline
    from speciakin.cli._common import print_notes, recording

    from speciakin.cli._overrides import apply_overrides

    inputs = pipeline.resolve_inputs(args.campaign, args.model, args.process)
    resume = None
    if args.resume:
        resume = Path(args.out) if args.out else pipeline.find_result(
            inputs.campaign, having="posterior", statuses=("interrupted", "failed"), what="interrupted run")
    seeds = {"seed": args.seed}
    rec = recording(args, inputs, "run", writes=WRITES, resume=resume, seeds=seeds)
    try:
        with rec:
            if args.quick:
                from speciakin.cli._quick import run_quick
                code = run_quick(inputs, rec.folder, args)
            else:
                code = execute(apply_overrides(inputs, args, rec.folder)[0], rec.folder, args, raise_errors=True)
    except _Reported as reported:
        code = reported.code
    print_notes(rec)
    return code
