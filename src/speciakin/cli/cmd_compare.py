"""``speciakin compare``: fit several model files to one campaign and rank them."""

from __future__ import annotations

NAME = "compare"
HELP = "rank two or more model files on the same campaign by AIC/BIC with Akaike weights"

EPILOG = """example:
  speciakin compare my-campaign --models with_double.toml without_double.toml

writes compare.json and compare.txt into a new result folder <campaign>/results/<UTC time>-<id>/
(or --out DIR, refused when it already holds a comparison); 'speciakin history CAMPAIGN' lists it."""

#: The files a comparison writes (an explicit --out must hold neither).
WRITES = ("compare.json", "compare.txt")


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", help="campaign folder or workbook (.xlsx)")
    parser.add_argument("--models", nargs="+", required=True, metavar="MODEL.toml", help="model files to compare")
    parser.add_argument("--out", metavar="DIR",
                        help="output folder, new or without a comparison (default: a new folder under "
                             "<campaign>/results/)")
    parser.add_argument("--starts", type=int, default=None, help="starting points per fit")
    parser.add_argument("--seed", type=int, default=None, help="seed of the starting points")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def _refuse_taken(out) -> None:
    """An explicit ``--out`` that already holds a comparison is refused (nothing is overwritten)."""
    from pathlib import Path

    from speciakin.errors import InputError, Location

    for name in WRITES:
        if (Path(out) / name).exists():
            raise InputError("the output folder already holds this result; nothing is overwritten",
                             Location(file=str(Path(out) / name)),
                             expected="a new or empty folder for --out (or leave out --out: every comparison "
                                      "then writes a new folder under <campaign>/results/)")


def run(args) -> int:
    import types
    from pathlib import Path

    from speciakin.chemistry.modelfile import load_model
    from speciakin.cli._common import StageProgress, existing_file, print_notes
    from speciakin.data import load_campaign
    from speciakin.errors import InputError, Location
    from speciakin.pipeline import make_objective
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.outputs import write_json, write_text
    from speciakin.pipeline.record import Recording
    from speciakin.estimation.comparison import compare_models

    if len(args.models) < 2:
        raise InputError("name at least two model files", Location(key="--models"), len(args.models), ">= 2")
    campaign = load_campaign(args.campaign)
    models = [(path, load_model(existing_file(path, "model file"))) for path in args.models]
    if args.out:
        _refuse_taken(args.out)
    # every model file is hashed into the run index (history.input_files reads other_models)
    inputs = types.SimpleNamespace(campaign=Path(args.campaign), model=Path(args.models[0]), process=None,
                                   other_models=tuple(Path(m) for m in args.models[1:]))
    with Recording(inputs, step="compare", out=args.out, seeds={"seed": args.seed}) as rec:
        out = rec.folder
        fits = {}
        for path, model in models:
            label = Path(path).stem
            if label in fits:
                label = str(path)
            progress = StageProgress(not args.quiet)
            try:
                fits[label] = fit_campaign(make_objective(model, campaign), starts=args.starts,
                                           seed=args.seed, profiles=False, progress=progress)
            finally:
                progress.close()
        comparison = compare_models({k: v.fit for k, v in fits.items()})
        write_json(out / "compare.json", {"comparison": comparison.to_dict(),
                                          "fits": {k: v.to_dict() for k, v in fits.items()}})
        write_text(out / "compare.txt", comparison.report() + "\n")
    print(comparison.report())
    print_notes(rec)
    print(f"\nwritten: {out / 'compare.json'}")
    return 0
