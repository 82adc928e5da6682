"""``speciakin titrate``: pH and speciation of a molecule titrated with a
strong acid or base."""

from __future__ import annotations

import argparse

from speciakin.cli import cmd_speciate as shared
from speciakin.errors import InputError, Location

NAME = "titrate"
HELP = "titration curve (pH and microstates against titrant volume)"

EPILOG = """\
example (invented compound as its dihydrochloride, 10 mM in 50 mL, titrated with 0.1 M
strong base: two steep steps, at 5 and 10 mL):
  speciakin titrate --site N1:base:9.3 --site N2:base:4.6 --concentration "10 mM" \\
      --volume "50 mL" --start-charge "-20 mM" --titrant base:0.1 --to "15 mL" \\
      --points 201 --out curve.csv --plot curve.png

  --titrant KIND:CONC   KIND base or acid, CONC [mol/L] (or with a unit: "acid:100 mM")
  --start-charge CONC   net charge of spectator ions at the start, e.g. "-20 mM" for
                        a 10 mM dihydrochloride salt (its 2 Cl- per molecule)
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.epilog = EPILOG
    shared.add_molecule_arguments(parser)
    g = parser.add_argument_group("titration")
    g.add_argument("--concentration", required=True, metavar="CONC",
                   help="starting concentration of the molecule, e.g. '10 mM'")
    g.add_argument("--volume", required=True, metavar="VOL", help="starting volume, e.g. '50 mL'")
    g.add_argument("--titrant", required=True, metavar="KIND:CONC", help="e.g. base:0.1")
    g.add_argument("--to", required=True, metavar="VOL", help="last titrant volume, e.g. '20 mL'")
    g.add_argument("--points", type=int, default=201, metavar="N", help="number of points (default 201)")
    g.add_argument("--start-charge", default="0 M", metavar="CONC",
                   help="net spectator-ion charge at the start (default 0)")
    g.add_argument("--activity", default="ideal", metavar="MODEL",
                   help="activity correction: ideal or davies (default ideal)")
    shared.add_output_arguments(parser)


def _quantity(text: str, dimension: str, key: str, example: str, allow_negative: bool = False,
              allow_zero: bool = False) -> float:
    from speciakin.units import parse_quantity

    try:
        value = parse_quantity(text, dimension, default_unit="M" if dimension == "concentration" else None)
    except ValueError as exc:
        raise InputError(str(exc), Location(key=key), text, f"a {dimension} such as {example!r}") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise InputError("not a finite number", Location(key=key), text, f"a {dimension} such as {example!r}")
    if not allow_negative and (value < 0 or (value == 0 and not allow_zero)):
        raise InputError(f"{dimension} must be {'>= 0' if allow_zero else 'positive'}", Location(key=key),
                         text, f"a {dimension} such as {example!r}")
    return value


def _titrant(text: str) -> tuple[str, float]:
    from speciakin.chemistry.titration import TITRANT_KINDS

    kind, sep, conc = str(text).partition(":")
    if not sep:
        raise InputError("titrant needs KIND:CONC", Location(key="--titrant"), text, "for example base:0.1")
    kind = kind.strip()
    if kind not in TITRANT_KINDS:
        raise InputError("unknown titrant kind", Location(key="--titrant"), kind, " or ".join(TITRANT_KINDS))
    return kind, _quantity(conc, "concentration", "--titrant", "base:0.1")


def _plot(result, path: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    volume_ml = result.titrant_volume * 1e3
    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(7.5, 7.5), sharex=True)
    ax1.plot(volume_ml, result.ph, color=shared.line_style(0)["color"])
    for v in result.steepest_points():
        ax1.axvline(v * 1e3, color="0.6", linestyle=":", linewidth=1)
    ax1.set_ylabel("pH")
    ax1.set_title(f"{result.molecules[0]} titrated with {result.titrant_concentration:g} M {result.titrant}")
    pop = result.populations[0]
    labels = result.labels[0] or [str(k) for k in range(pop.shape[1])]
    for j, k in enumerate(shared.visible_microstates(pop)):
        ax2.plot(volume_ml, pop[:, k], label=labels[k], **shared.line_style(j))
    ax2.set_xlabel(f"{result.titrant} titrant added [mL]")
    ax2.set_ylabel("microstate fraction [-]")
    ax2.set_ylim(-0.02, 1.02)
    ax2.legend(fontsize=8, loc="center left", bbox_to_anchor=(1.01, 0.5))
    for ax in (ax1, ax2):
        ax.grid(alpha=0.3)
    try:
        shared.save_figure(fig, path)
    finally:
        plt.close(fig)


def run(args) -> int:
    import numpy as np

    from speciakin.chemistry.equilibrium import ACTIVITY_MODELS, IonizableSpecies
    from speciakin.chemistry.microstates import microstate_labels
    from speciakin.chemistry.titration import titrate

    shared.check_output_paths(args)
    if args.activity not in ACTIVITY_MODELS:
        raise InputError("unknown activity option", Location(key="--activity"), args.activity,
                         " or ".join(ACTIVITY_MODELS))
    if args.points < 2 or args.points > 100_000:
        raise InputError("number of points out of range", Location(key="--points"), args.points, "2 to 100000")
    molecule, reference, temperature = shared.molecule_from_args(args)
    conc = _quantity(args.concentration, "concentration", "--concentration", "10 mM", allow_zero=True)
    volume = _quantity(args.volume, "volume", "--volume", "50 mL")
    kind, titrant_conc = _titrant(args.titrant)
    last = _quantity(args.to, "volume", "--to", "20 mL")
    start_charge = _quantity(args.start_charge, "concentration", "--start-charge", "-20 mM",
                             allow_negative=True)
    work_t = temperature if temperature is not None else reference
    species = IonizableSpecies.from_molecule(molecule, temperature, reference)
    names = [s.name for s in molecule.sites]
    labels = microstate_labels(names, [s.kind for s in molecule.sites])
    result = titrate([species], [conc * volume], volume, kind, titrant_conc, np.linspace(0.0, last, args.points),
                     start_charge, work_t, args.activity, labels=[labels], site_names=[names])
    print(f"{molecule.name}: {conc * 1e3:g} mM in {volume * 1e3:g} mL, {kind} {titrant_conc:g} M, "
          f"0 to {last * 1e3:g} mL in {args.points} points")
    print(f"pH {result.ph[0]:.2f} -> {result.ph[-1]:.2f}")
    steep = result.steepest_points()
    if steep.size:
        print("steepest points (estimated equivalence): "
              + ", ".join(f"{v * 1e3:.3f} mL" for v in steep))
    if args.out:
        shared.write_table(result.to_frame(), args.out)
        print(f"table written to {args.out}")
    if args.plot:
        _plot(result, args.plot)
        print(f"plot written to {args.plot}")
    shared.print_output_hint(args)
    return 0
