"""``speciakin speciate``: microstate and site fractions of one molecule over pH.

Also holds the option parsing shared with ``speciakin titrate`` (site
specifications, model file, output table and plot helpers).
"""

from __future__ import annotations

import argparse
import io
from pathlib import Path

from speciakin._cells import frame_csv_text, frame_xlsx_bytes
from speciakin.cli._common import atomic_write_bytes, atomic_write_text, existing_file, new_file
from speciakin.errors import InputError, Location

NAME = "speciate"
HELP = "microstate and site fractions of a molecule against pH"

EPILOG = """\
example (invented compound with an alkyl amine and an aryl amine):
  speciakin speciate --site N1:base:9.3 --site N2:base:4.6 --interaction N1:N2:0.4 \\
      --ph-range 0:14:0.1 --out table.csv --plot plot.png

  site:        NAME:KIND:PKA or NAME:KIND:PKA:DH  (KIND: {kinds}; DH = ionization
               enthalpy [kJ/mol] for the van 't Hoff shift at --temperature)
  interaction: SITE:SITE:W  (W [pK units] >= 0: penalty for protonating both)
  a pH range starting below zero needs the '=' form: --ph-range=-2:16:0.1
"""

#: Table formats by file suffix.
TABLE_SUFFIXES = (".csv", ".xlsx")


def _kinds_text() -> str:
    from speciakin.chemistry.model import SITE_KINDS

    return ", ".join(SITE_KINDS)


def add_molecule_arguments(parser: argparse.ArgumentParser) -> None:
    """Options that describe one molecule (shared with ``titrate``)."""
    g = parser.add_argument_group("molecule (give sites, or a model file and a molecule name)")
    g.add_argument("--site", action="append", default=[], metavar="NAME:KIND:PKA[:DH]",
                   help="an ionizable site; repeat for each site")
    g.add_argument("--interaction", action="append", default=[], metavar="SITE:SITE:W",
                   help="pairwise penalty W [pK units] between two sites; repeatable")
    g.add_argument("--model", metavar="FILE", help="model file (TOML) to read the molecule from")
    g.add_argument("--molecule", metavar="NAME",
                   help="molecule of the model file (default: the model's substrate)")
    g.add_argument("--temperature", metavar="TEMP",
                   help="working temperature, e.g. '40 C' (pKa moved by van 't Hoff)")
    g.add_argument("--reference-temperature", metavar="TEMP", default=None,
                   help="temperature of the given pKa values (default 25 C, or the model's)")


def add_output_arguments(parser: argparse.ArgumentParser) -> None:
    g = parser.add_argument_group("output")
    g.add_argument("--out", metavar="FILE", help="table file, .csv or .xlsx")
    g.add_argument("--plot", metavar="FILE", help="plot file, .png")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.epilog = EPILOG.format(kinds=_kinds_text())
    add_molecule_arguments(parser)
    parser.add_argument("--ph-range", default="0:14:0.1", metavar="START:STOP:STEP",
                        help="pH grid (default 0:14:0.1)")
    add_output_arguments(parser)


def parse_number(text: str, key: str, expected: str = "a number") -> float:
    """Read a finite float or raise InputError naming ``key``."""
    try:
        value = float(text)
    except (TypeError, ValueError):
        raise InputError("not a number", Location(key=key), text, expected) from None
    if value != value or value in (float("inf"), float("-inf")):
        raise InputError("not a finite number", Location(key=key), text, expected)
    return value


def parse_temperature(text: str | None, key: str) -> float | None:
    from speciakin.units import parse_quantity

    if text is None:
        return None
    try:
        t = parse_quantity(text, "temperature")
    except ValueError as exc:
        raise InputError(str(exc), Location(key=key), text, "a temperature such as '40 C' or '313.15 K'") from None
    if not t > 0:
        raise InputError("temperature must be above absolute zero", Location(key=key), text, "> 0 K")
    return t


def parse_ph_range(text: str) -> "object":
    """``START:STOP:STEP`` -> numpy grid including STOP (within STEP/1000)."""
    import numpy as np

    parts = str(text).split(":")
    if len(parts) != 3:
        raise InputError("pH range needs three numbers", Location(key="--ph-range"), text, "START:STOP:STEP")
    start, stop, step = (parse_number(p, "--ph-range", "START:STOP:STEP numbers") for p in parts)
    if not stop > start:
        raise InputError("pH range is in the wrong order", Location(key="--ph-range"), text,
                         "START below STOP")
    if not step > 0:
        raise InputError("pH step must be positive", Location(key="--ph-range"), text, "STEP > 0")
    count = int(np.floor((stop - start) / step + 1e-9)) + 1
    if count > 1_000_000:
        raise InputError("pH grid too fine", Location(key="--ph-range"), text, "at most 1,000,000 points")
    return start + step * np.arange(count)


def molecule_from_sites(site_specs: list[str], interaction_specs: list[str], name: str = "compound"):
    """Build a :class:`~speciakin.chemistry.model.Molecule` from option text."""
    from speciakin.chemistry.model import SITE_KINDS, Interaction, Molecule, Quantity, Site

    sites, seen = [], set()
    for spec in site_specs:
        parts = spec.split(":")
        if len(parts) not in (3, 4):
            raise InputError("site needs NAME:KIND:PKA or NAME:KIND:PKA:DH", Location(key="--site"), spec,
                             "for example N1:base:9.3")
        site_name, kind = parts[0].strip(), parts[1].strip()
        if not site_name:
            raise InputError("site name is empty", Location(key="--site"), spec, "a name such as N1")
        if site_name in seen:
            raise InputError("duplicate site name", Location(key="--site"), site_name, "unique site names")
        seen.add(site_name)
        if kind not in SITE_KINDS:
            raise InputError("unknown site kind", Location(key="--site"), kind, "one of " + ", ".join(SITE_KINDS))
        pka = parse_number(parts[2], "--site", f"a pKa number in {spec!r}")
        dh = parse_number(parts[3], "--site", "an ionization enthalpy [kJ/mol]") if len(parts) == 4 else 0.0
        sites.append(Site(site_name, kind, Quantity(pka, "", f"pKa.{name}.{site_name}"),
                          Quantity(dh, "kJ/mol", f"dH.{name}.{site_name}")))
    if not sites:
        raise InputError("no site given", Location(key="--site"), None, "at least one --site NAME:KIND:PKA")
    interactions = []
    for spec in interaction_specs:
        parts = spec.split(":")
        if len(parts) != 3:
            raise InputError("interaction needs SITE:SITE:W", Location(key="--interaction"), spec,
                             "for example N1:N2:0.4")
        a, b = parts[0].strip(), parts[1].strip()
        for s in (a, b):
            if s not in seen:
                raise InputError("interaction names an unknown site", Location(key="--interaction"), s,
                                 ", ".join(seen))
        if a == b:
            raise InputError("interaction of a site with itself", Location(key="--interaction"), spec,
                             "two different sites")
        w = parse_number(parts[2], "--interaction", "W [pK units] >= 0")
        if w < 0:
            raise InputError("interaction W must not be negative", Location(key="--interaction"), spec, "W >= 0")
        interactions.append(Interaction(a, b, Quantity(w, "pK", f"W.{name}.{a}.{b}")))
    return Molecule(name, tuple(sites), tuple(interactions))


def molecule_from_args(args) -> tuple:
    """(molecule, reference temperature [K], working temperature [K] or None)."""
    temperature = parse_temperature(args.temperature, "--temperature")
    reference = parse_temperature(args.reference_temperature, "--reference-temperature")
    if args.model:
        if args.site or args.interaction:
            raise InputError("give either --site options or --model, not both", Location(key="--model"),
                             args.model, "one source for the molecule")
        from speciakin.chemistry.modelfile import load_model

        model = load_model(existing_file(args.model, "model file"))
        if not args.molecule:
            args.molecule = default_molecule(model, args.model)
            print(f"molecule: {args.molecule} (the model's substrate; --molecule NAME for another)")
        try:
            molecule = model.molecule(args.molecule)
        except KeyError:
            raise InputError("molecule not in the model", Location(file=str(args.model), key="--molecule"),
                             args.molecule, ", ".join(m.name for m in model.molecules)) from None
        if reference is None:
            reference = model.reference_temperature
    else:
        molecule = molecule_from_sites(args.site, args.interaction, args.molecule or "compound")
    return molecule, (298.15 if reference is None else reference), temperature


def default_molecule(model, path) -> str:
    """The model's one substrate (the molecule ``--model`` without ``--molecule`` means)."""
    substrates = [m.name for m in model.molecules if getattr(m, "role", "") == "substrate"]
    if len(substrates) != 1:
        raise InputError("--model without --molecule needs a model with one substrate",
                         Location(file=str(path), key="--molecule"),
                         ", ".join(substrates) or "no substrate",
                         "a molecule name: " + ", ".join(m.name for m in model.molecules))
    return substrates[0]


def check_output_paths(args) -> None:
    """Check suffixes, and that no file would be overwritten, before any work is done."""
    if args.out and Path(args.out).suffix.lower() not in TABLE_SUFFIXES:
        raise InputError("unknown table format", Location(file=args.out), Path(args.out).suffix,
                         " or ".join(TABLE_SUFFIXES))
    if args.plot and Path(args.plot).suffix.lower() != ".png":
        raise InputError("unknown plot format", Location(file=args.plot), Path(args.plot).suffix, ".png")
    for path in (args.out, args.plot):
        if path:
            new_file(path)


def print_output_hint(args) -> None:
    """Say how to get the table and the plot when neither was asked for."""
    if not args.out and not args.plot:
        print("no file written: add --plot FILE.png for the curves, --out FILE.csv (or .xlsx) for the table")


def write_table(frame, path: str) -> None:
    """Write a DataFrame as CSV or XLSX (by suffix), atomically."""
    if Path(path).suffix.lower() == ".xlsx":
        atomic_write_bytes(path, frame_xlsx_bytes(frame))
    else:
        atomic_write_text(path, frame_csv_text(frame))


def line_style(index: int) -> dict:
    """Colour and line style of curve ``index`` (:func:`speciakin.palette.cycle_style`)."""
    from speciakin.palette import cycle_style

    color, line = cycle_style(index)
    return {"color": color, "linestyle": line}


def visible_microstates(populations, threshold: float = 0.01, limit: int = 16) -> list[int]:
    """Indices of microstates whose largest share reaches ``threshold`` (at most ``limit``)."""
    import numpy as np

    peak = populations.max(axis=0)
    order = [int(k) for k in np.argsort(-peak) if peak[k] >= threshold]
    return sorted(order[:limit])


def save_figure(fig, path: str) -> None:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=120, bbox_inches="tight")
    atomic_write_bytes(path, buffer.getvalue())


def _plot(result, path: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(7.5, 7.5), sharex=True)
    shown = visible_microstates(result.populations)
    for j, k in enumerate(shown):
        ax1.plot(result.ph, result.populations[:, k], label=result.labels[k], **line_style(j))
    ax1.set_ylabel("microstate fraction [-]")
    ax1.set_title(f"{result.molecule}: microstates (those reaching 1 %)")
    ax1.legend(fontsize=8, loc="center left", bbox_to_anchor=(1.01, 0.5))
    for i, name in enumerate(result.site_names):
        ax2.plot(result.ph, result.site_protonated[:, i], label=f"{name} protonated", **line_style(i))
    ax2.set_xlabel("pH")
    ax2.set_ylabel("site fraction protonated [-]")
    ax2.legend(fontsize=8, loc="center left", bbox_to_anchor=(1.01, 0.5))
    for ax in (ax1, ax2):
        ax.set_ylim(-0.02, 1.02)
        ax.grid(alpha=0.3)
    try:
        save_figure(fig, path)
    finally:
        plt.close(fig)


def run(args) -> int:
    from speciakin.chemistry.speciation import speciate

    check_output_paths(args)
    molecule, reference, temperature = molecule_from_args(args)
    grid = parse_ph_range(args.ph_range)
    cells = grid.size * 2 ** len(molecule.sites)
    if cells > 20_000_000:
        raise InputError("pH grid too fine for this many sites", Location(key="--ph-range"), args.ph_range,
                         f"at most {20_000_000 // 2 ** len(molecule.sites)} pH points for "
                         f"{len(molecule.sites)} sites")
    result = speciate(molecule, grid, temperature, reference)
    pkas = ", ".join(f"{v:.2f}" for v in result.macroscopic_pka)
    print(f"{result.molecule}: {len(result.site_names)} site(s), {len(result.labels)} microstates, "
          f"pH {grid[0]:g} to {grid[-1]:g} ({grid.size} points)")
    if temperature is not None:
        print(f"temperature {temperature - 273.15:.2f} C; site pKa "
              + ", ".join(f"{n} {p:.2f}" for n, p in zip(result.site_names, result.site_pka)))
    print(f"macroscopic pKa: {pkas}")
    if args.out:
        write_table(result.to_frame(), args.out)
        print(f"table written to {args.out}")
    if args.plot:
        _plot(result, args.plot)
        print(f"plot written to {args.plot}")
    print_output_hint(args)
    return 0
