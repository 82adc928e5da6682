"""``speciakin compare``: fit several model files to one campaign and rank them."""

from __future__ import annotations

NAME = "compare"
HELP = "rank two or more model files on the same campaign by AIC/BIC with Akaike weights"

EPILOG = """example:
  speciakin compare my-campaign --models with_double.toml without_double.toml --out results/compare"""


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", help="campaign folder or workbook (.xlsx)")
    parser.add_argument("--models", nargs="+", required=True, metavar="MODEL.toml", help="model files to compare")
    parser.add_argument("--out", metavar="DIR", help="output folder (default: <campaign>/results/compare)")
    parser.add_argument("--starts", type=int, default=None, help="starting points per fit")
    parser.add_argument("--seed", type=int, default=None, help="seed of the starting points")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def run(args) -> int:
    from pathlib import Path

    from speciakin.chemistry.modelfile import load_model
    from speciakin.cli._common import StageProgress, output_dir
    from speciakin.data import load_campaign
    from speciakin.errors import InputError, Location
    from speciakin.pipeline import make_objective
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.outputs import write_json, write_text
    from speciakin.estimation.comparison import compare_models

    if len(args.models) < 2:
        raise InputError("name at least two model files", Location(key="--models"), len(args.models), ">= 2")
    campaign = load_campaign(args.campaign)
    c = Path(args.campaign)
    out = output_dir(args.out or ((c if c.is_dir() else c.parent) / "results" / "compare"))
    fits = {}
    for path in args.models:
        model = load_model(path)
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
    print(f"\nwritten: {out / 'compare.json'}")
    return 0
