"""``speciakin look CAMPAIGN``: plots of the raw data of every run, before any fit."""

from __future__ import annotations

import re

NAME = "look"
HELP = "plot the raw data of every run (HPLC, pH and temperature, titrant) before any fit"

EPILOG = """example:
  speciakin look my-campaign                 # writes my-campaign/look/<run>.png
  speciakin look runs.xlsx --model model.toml --out plots

one PNG per run: HPLC results against time, pH and temperature, titrant used.
Colours are those of the report (speciakin.palette); legends show the compound
names of the Compounds sheet with the model's label beside them."""

_KIND_AXIS = {"area_percent": ("HPLC [area%]", 1.0), "area": ("HPLC peak area [-]", 1.0),
              "concentration": ("HPLC concentration [mmol/L]", 1e3)}


def add_arguments(parser) -> None:
    parser.epilog = EPILOG
    parser.add_argument("campaign", metavar="CAMPAIGN", help="campaign folder, workbook (.xlsx) or CSV folder")
    parser.add_argument("--model", metavar="MODEL.toml", default=None,
                        help="model file for the compound labels and colours "
                             "(default: model.toml in the campaign folder, when there is one)")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="folder of the PNGs, new or empty (default: <campaign folder>/look, or look-2, "
                             "look-3, ... when that one holds an earlier call's plots)")


def _file_name(run: str) -> str:
    return (re.sub(r"[^A-Za-z0-9._-]+", "_", run).strip("._") or "run") + ".png"


def _legend_text(name: str, label: str) -> str:
    """The HPLC name, with the model's label when it says more."""
    if not label or label == name:
        return name
    return label if name in label else f"{name} ({label})"


def plot_run(run, compounds, labels: dict, colors, path) -> None:
    """One figure of a run's raw data (three panels stacked over one time axis [min]).

    Parameters
    ----------
    run
        :class:`speciakin.data.campaign.CampaignRun`.
    compounds
        The campaign's :class:`~speciakin.data.campaign.Compound` list.
    labels
        Model molecule name -> label (empty without a model).
    colors
        :class:`speciakin.palette.SpeciesColors` keyed by model molecule name.
    path
        PNG to write (atomically).
    """
    import io

    import matplotlib
    import numpy as np

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from speciakin._io import atomic_write_bytes
    from speciakin.palette import NEUTRAL, OKABE_ITO

    fig, (ax_h, ax_p, ax_t) = plt.subplots(3, 1, figsize=(10.0, 9.0), sharex=True,
                                           gridspec_kw={"height_ratios": [2.2, 1.2, 1.2]})
    h = run.hplc
    molecule_of = {c.name: c.molecule for c in compounds}
    kinds = list(dict.fromkeys(h.kind.tolist())) or ["area_percent"]
    axis_label, scale = _KIND_AXIS.get(kinds[0], (f"HPLC [{kinds[0]}]", 1.0))
    for name in dict.fromkeys(h.compound.tolist()):
        sel = h.compound == name
        molecule = molecule_of.get(name, name)
        style = colors.style(molecule)
        t = h.time[sel] / 60.0
        v = h.value[sel] * scale
        text = _legend_text(name, labels.get(molecule, ""))
        ax_h.plot(t, v, marker=style.marker, linestyle=style.line_style, color=style.color, label=text, ms=4)
        cens = h.censored[sel]
        if cens.any():
            ax_h.plot(t[cens], np.zeros(int(cens.sum())), linestyle="none", marker="v", mfc="none",
                      color=style.color, ms=5)
    other = h.other
    for name in dict.fromkeys(other.compound.tolist() if other is not None else []):
        sel = (other.compound == name) & ~other.censored
        ax_h.plot(other.time[sel] / 60.0, other.value[sel] * scale, marker="x", linestyle=":", color=NEUTRAL,
                  label=f"{name} (not modelled)", ms=4)
    ax_h.set_ylabel(axis_label)
    if h.censored.any():
        ax_h.plot([], [], linestyle="none", marker="v", mfc="none", color=NEUTRAL, label="below LOQ (drawn at 0)")
    ax_h.legend(loc="upper left", bbox_to_anchor=(1.15, 1.0), fontsize=8, frameon=False)
    ax_h.set_title(f"run {run.name}: raw data" + (f"\n{run.recipe.note}" if run.recipe.note else ""), fontsize=9)

    ph_color, temp_color = OKABE_ITO["blue"], OKABE_ITO["vermillion"]
    if run.ph_log is not None and len(run.ph_log):
        ax_p.plot(run.ph_log.time / 60.0, run.ph_log.value, color=ph_color, lw=1.2, label="pH (probe)")
    if run.recipe.ph.setpoint is not None:
        ax_p.axhline(run.recipe.ph.setpoint, color=NEUTRAL, lw=0.8, ls="--", label="set point")
    ax_p.set_ylabel("pH [-]", color=ph_color)
    ax_temp = ax_p.twinx()
    if run.temperature_log is not None and len(run.temperature_log):
        ax_temp.plot(run.temperature_log.time / 60.0, run.temperature_log.value - 273.15, color=temp_color,
                     lw=1.2, ls="-.", label="temperature")
    ax_temp.set_ylabel("temperature [C]", color=temp_color, labelpad=2)
    handles = ax_p.get_legend_handles_labels()[0] + ax_temp.get_legend_handles_labels()[0]
    if handles:
        ax_p.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.15, 1.0), fontsize=8, frameon=False)
    else:
        ax_p.text(0.5, 0.5, "no pH or temperature log", transform=ax_p.transAxes, ha="center", color=NEUTRAL)

    tit = run.titrant
    if tit is not None and len(tit.time):
        if tit.volume is not None:
            ax_t.plot(tit.time / 60.0, tit.volume * 1e3, color=OKABE_ITO["bluish green"], lw=1.2)
            ax_t.set_ylabel("titrant [mL]")
        else:
            ax_t.plot(tit.time / 60.0, tit.amount * 1e3, color=OKABE_ITO["bluish green"], lw=1.2)
            ax_t.set_ylabel("titrant [mmol]")
    else:
        ax_t.text(0.5, 0.5, "no titrant log", transform=ax_t.transAxes, ha="center", color=NEUTRAL)
        ax_t.set_ylabel("titrant")
    ax_t.set_xlabel("time [min]")
    for ax in (ax_h, ax_p, ax_t):
        ax.grid(alpha=0.3)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    plt.close(fig)
    atomic_write_bytes(path, buf.getvalue())


def run(args) -> int:
    from pathlib import Path

    from speciakin.cli._common import new_or_empty_dir, next_free_dir
    from speciakin.data import load_campaign
    from speciakin.palette import SpeciesColors

    source = Path(args.campaign)
    folder = source if source.is_dir() else source.parent
    model_path = Path(args.model) if args.model else folder / "model.toml"
    campaign = load_campaign(source)
    labels: dict = {}
    order = [c.molecule for c in campaign.compounds]
    if args.model or model_path.exists():
        from speciakin.chemistry.modelfile import load_model

        model = load_model(model_path)
        labels = {m.name: m.label for m in model.molecules if getattr(m, "label", "")}
        order = [m.name for m in model.molecules]  # the report's order, hence its colours
    colors = SpeciesColors(order)
    # nothing is overwritten: an explicit folder must be new or empty; the default is <campaign>/look,
    # or look-2, look-3, ... when an earlier call filled it
    out = new_or_empty_dir(args.out) if args.out else next_free_dir(folder / "look")
    written = []
    for r in campaign.runs:
        path = out / _file_name(r.name)
        plot_run(r, campaign.compounds, labels, colors, path)
        written.append(path)
    print(f"{len(written)} run plots written to {out}:")
    for p in written:
        print(f"  {p.name}")
    return 0
