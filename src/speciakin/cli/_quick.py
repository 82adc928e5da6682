"""``run --quick``: the provisional first look (:mod:`speciakin.pipeline.quick`) on the command line."""

from __future__ import annotations


def add_quick_option(parser) -> None:
    """The ``--quick`` option of ``speciakin run``."""
    parser.add_argument("--quick", action="store_true",
                        help="provisional first look: fit (2 starts, no profiles) and a pH window from the "
                             "fit's covariance (at most 200 draws); no posterior, no report. Outputs are labelled PROVISIONAL")


def run_quick(inputs, out, args) -> int:
    """Run the quick mode for ``speciakin run --quick``; returns the exit code."""
    import time

    from speciakin.cli._common import StageProgress
    from speciakin.cli._overrides import apply_overrides, model_hook
    from speciakin.pipeline import predict_step
    from speciakin.pipeline.quick import QUICK_NOTE, quick_run
    from speciakin.report.results import fit_figures

    inputs, overrides = apply_overrides(inputs, args)
    progress = StageProgress(not args.quiet)
    t0 = time.perf_counter()
    try:
        result = quick_run(inputs, out, starts=args.starts, seed=args.seed, draws=args.draws,
                           progress=None if args.quiet else progress, say=print,
                           fit_options=model_hook(inputs, overrides))
    finally:
        progress.close()
    fit_figures(result["objective"].model, predict_step(result["objective"], result["fit"]), result["fit"], out)
    print(f"\n{QUICK_NOTE}")
    print(f"done in {time.perf_counter() - t0:.1f} s; see {out / 'fit.txt'}"
          + (f" and {out / 'window.txt'}" if result["window"] is not None else ""))
    return 0
