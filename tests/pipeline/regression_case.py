"""The regression case of the pipeline: a reduced copy of the bundled (invented) demo.

Reduced = the first three runs held at constant pH, two least-squares starts
with profiles, 16 window draws from the fit's covariance on a coarse pH grid.
:func:`produce` runs ``speciakin fit``, ``speciakin window`` and ``speciakin
report`` on it and returns ``fit.json`` and ``window.json`` without the
entries that change from run to run (wall times, paths, command line,
software version), and the report's numbers: every table sheet of
``report.xlsx`` (parameters, intervals, correlation, observations, window).

The stored copy lives in ``tests/pipeline/baseline/``; regenerate it after an
intended change of numbers with::

    python scripts/regenerate_pipeline_baseline.py

The case runs in a subprocess whose instruction set is pinned
(``tests/pinned_numbers.py``), so that the copy is compared to the last bit on
any x86-64 machine.
"""

from __future__ import annotations

import dataclasses
import json
import re
from pathlib import Path

BASELINE = Path(__file__).resolve().parent / "baseline"
RESULT_FILES = ("fit.json", "window.json", "report_tables.json")
# entries that depend on the machine, the folder or the clock, not on the numbers
VOLATILE = {"elapsed_s", "command", "software_version", "model", "campaign", "elapsed", "timings",
            "process_file"}


def build_reduced_demo(folder: Path) -> Path:
    """Write the reduced demo campaign (workbook, model file, process file) into ``folder``."""
    from speciakin.data import load_campaign, write_campaign
    from speciakin.demo import demo_dir

    folder.mkdir(parents=True, exist_ok=True)
    demo = demo_dir()
    campaign = load_campaign(demo)
    keep = [r for r in campaign.runs if r.recipe.ph.mode == "held"][:3]
    write_campaign(dataclasses.replace(campaign, runs=tuple(keep)), folder / "campaign.xlsx")
    (folder / "model.toml").write_text((demo / "model.toml").read_text())
    process = (demo / "process.toml").read_text()
    process = re.sub(r"ph_step = [0-9.]+", "ph_step = 0.5", process)
    process = re.sub(r"draws = [0-9]+", "draws = 16", process)
    process = re.sub(r"\[scan\.second_factor\]\n(?:[a-z_]+ = [^\n]*\n)+", "", process)
    (folder / "process.toml").write_text(process)
    return folder


def strip_volatile(value):
    """The JSON value without the entries named in ``VOLATILE`` (at any depth)."""
    if isinstance(value, dict):
        return {k: strip_volatile(v) for k, v in value.items() if k not in VOLATILE}
    if isinstance(value, list):
        return [strip_volatile(v) for v in value]
    return value


def fit_and_window(work: Path) -> Path:
    """Run ``speciakin fit`` and ``speciakin window`` on the reduced demo in ``work/case``; the output folder.

    The case is in ``work / "case"``, the output folder ``work / "out"`` (fit.json, window.json and the
    files beside them, no report yet).
    """
    from speciakin.cli.main import main

    case = build_reduced_demo(work / "case")
    out = work / "out"
    for argv in (["fit", str(case), "--out", str(out), "--starts", "2", "--seed", "3", "--quiet"],
                 ["window", str(case), "--out", str(out), "--seed", "5", "--quiet"]):
        code = main(argv)
        if code != 0:
            raise RuntimeError(f"speciakin {argv[0]} failed with exit code {code}")
    return out


def read_results(out: Path) -> dict[str, object]:
    """``speciakin report`` (xlsx) into ``out``; {file name: JSON without volatile entries}."""
    from speciakin.cli.main import main

    code = main(["report", str(out), "--out", str(out), "--formats", "xlsx"])
    if code != 0:
        raise RuntimeError(f"speciakin report failed with exit code {code}")
    found = {name: strip_volatile(json.loads((out / name).read_text())) for name in RESULT_FILES[:2]}
    found["report_tables.json"] = report_tables(out / "report.xlsx")
    return found


def produce(work: Path) -> dict[str, object]:
    """Run fit, window and report on the reduced demo in ``work``; {file name: JSON without volatile entries}."""
    return read_results(fit_and_window(work))


def report_tables(path: Path) -> dict[str, list[list[object]]]:
    """Every table sheet of a report workbook (the summary sheet, with dates and hashes, left out)."""
    from openpyxl import load_workbook

    workbook = load_workbook(path, read_only=True)
    return {name: [list(row) for row in workbook[name].iter_rows(values_only=True)]
            for name in workbook.sheetnames[1:]}


def write_results(work: Path, folder: Path = BASELINE) -> list[Path]:
    """Run the case in ``work`` and write its results into ``folder`` (default: the stored copy)."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, data in produce(work).items():
        path = folder / name
        path.write_text(json.dumps(data, indent=1, sort_keys=True) + "\n")
        paths.append(path)
    return paths


if __name__ == "__main__":
    # python regression_case.py FOLDER: the case's results into FOLDER (run by the regression test and by
    # scripts/regenerate_pipeline_baseline.py in the pinned environment of tests/pinned_numbers.py)
    import sys
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        for written in write_results(Path(tmp), Path(sys.argv[1])):
            print(f"wrote {written}")
