"""``speciakin simulate MODEL.toml``: simulate the runs a model file declares."""

from __future__ import annotations

import re

NAME = "simulate"
HELP = "simulate the runs of a model file; write a table and plots of concentrations, pH and titrant"

_TIMES = re.compile(r"^\s*([0-9.eE+-]+)\s*:\s*([0-9.eE+-]+)\s*:\s*([0-9.eE+-]+)\s*([A-Za-z]*)\s*$")


def add_arguments(parser) -> None:
    parser.add_argument("model", metavar="MODEL.toml", help="model file with [run.<name>] sections")
    parser.add_argument("--run", dest="runs", action="append", metavar="NAME", default=None,
                        help="simulate only this run (repeat for several; default: every run)")
    parser.add_argument("--times", metavar='"START:STOP:STEP UNIT"', default=None,
                        help='output times, e.g. "0:180:5 min" (default: 201 points over each run)')
    parser.add_argument("--out", metavar="DIR", required=True, help="output folder, new or empty (nothing is overwritten)")
    parser.add_argument("--table", metavar="NAME", default="simulation.csv",
                        help="table file name; .csv or .xlsx (default simulation.csv)")
    parser.add_argument("--microstates", action="store_true", help="also write every protonation microstate")
    parser.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    parser.epilog = ('example:\n  speciakin simulate examples/two_amines.toml --times "0:180:5 min" --out sim\n'
                     "exit code 0: done; 2: the model file or an option is wrong; 3: the integrator failed")


def parse_times(text: str, end_time: float):
    """``"0:180:5 min"`` -> output times [s] (inclusive of STOP when it falls on the grid)."""
    import numpy as np

    from speciakin.errors import InputError, Location
    from speciakin.units import DIMENSIONS, to_internal

    m = _TIMES.match(text)
    if not m:
        raise InputError("cannot read the output times", Location(key="--times"), text,
                         '"START:STOP:STEP UNIT", e.g. "0:180:5 min"')
    try:
        start, stop, step = (float(m.group(i)) for i in (1, 2, 3))
        unit = m.group(4) or "s"
        factor = to_internal(1.0, unit, "time")
    except (ValueError, KeyError):
        raise InputError("cannot read the output times", Location(key="--times"), text,
                         "numbers and a time unit: " + ", ".join(DIMENSIONS["time"])) from None
    if not (step > 0 and stop >= start >= 0):
        raise InputError("output times need 0 <= START <= STOP and STEP > 0", Location(key="--times"), text)
    n = int(np.floor((stop - start) / step + 1e-9)) + 1
    times = (start + step * np.arange(n)) * factor
    return times[times <= end_time * (1 + 1e-12)]


def run(args) -> int:
    from pathlib import Path

    from speciakin._cells import frame_csv_text, frame_xlsx_bytes
    from speciakin.chemistry.modelfile import load_model
    from speciakin.cli._common import atomic_write_bytes, atomic_write_text, existing_file, new_or_empty_dir
    from speciakin.errors import InputError, Location
    from speciakin.simulation import compile_model, simulate

    model = load_model(existing_file(args.model, "model file"))
    runs = list(model.runs)
    if not runs:
        raise InputError("the model file declares no runs", Location(file=str(args.model), key="run"),
                         expected="at least one [run.<name>] section (docs/model-file.md); a campaign's runs are "
                         "in its workbook: 'speciakin look' draws them, 'speciakin fit' fits the model to them")
    if args.runs:
        known = [r.name for r in runs]
        missing = [n for n in args.runs if n not in known]
        if missing:
            raise InputError("unknown run", Location(file=str(args.model), key="--run"), ", ".join(missing),
                             "one of " + ", ".join(known))
        runs = [r for r in runs if r.name in args.runs]
    table = Path(args.table).name
    if Path(table).suffix.lower() not in (".csv", ".xlsx"):
        raise InputError("table must be .csv or .xlsx", Location(key="--table"), args.table, "a .csv or .xlsx name")
    out = new_or_empty_dir(args.out)
    compiled = compile_model(model)
    results = []
    for r in runs:
        times = None if args.times is None else parse_times(args.times, r.end_time)
        results.append(simulate(compiled, r, times=times, microstates=args.microstates))
    import pandas as pd

    frame = pd.concat([res.to_frame() for res in results], ignore_index=True)
    if table.lower().endswith(".xlsx"):
        atomic_write_bytes(out / table, frame_xlsx_bytes(frame, "simulation"))
    else:
        atomic_write_text(out / table, frame_csv_text(frame))
    written = [out / table]
    if not args.no_plots:
        from speciakin.simulation.plots import plot_ph, plot_run, plot_titrant

        for res in results:
            safe = re.sub(r"[^A-Za-z0-9_.-]+", "_", res.run_name)
            written.append(plot_run(res, out / f"concentrations_{safe}.png"))
        written.append(plot_ph(results, out / "ph.png"))
        if any(res.ph_mode == "held" for res in results):
            written.append(plot_titrant(results, out / "titrant.png"))
    for res in results:
        print(f"run {res.run_name}: {len(res.times)} outputs, {res.steps} steps, final pH {res.ph[-1]:.3f}, "
              f"titrant {res.titrant[-1] * 1e3:.4g} mmol")
    print("wrote " + ", ".join(str(p) for p in written))
    return 0
