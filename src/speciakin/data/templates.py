"""The blank campaign workbook, its CSV equivalents and new campaign folders.

Every sheet, header and explanation comes from :data:`speciakin.data.sheets.SHEETS`.
:func:`write_tables` is shared with :func:`speciakin.data.writer.write_campaign`,
so a filled-in campaign and the blank template have exactly the same layout.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Iterable, Sequence

from speciakin import units
from speciakin._cells import csv_text, guard_workbook, has_carriage_return
from speciakin.data._files import write_bytes_atomically
from speciakin.data.sheets import HPLC_KINDS, INITIAL_PREFIX, PH_MODE_WORDS, SHEETS, START_ADJUSTMENT_WORDS
from speciakin.errors import DataError, Location

__all__ = ["GUIDE_TITLE", "WORKBOOK_NAME", "guide_lines", "write_tables", "write_template",
           "write_template_csv", "new_folder", "new_campaign", "blank_tables", "regenerate_data_templates"]

GUIDE_TITLE = "Read me"
WORKBOOK_NAME = "campaign.xlsx"
#: The species names of the model skeleton (chemistry/templates/model_skeleton.toml), so that the
#: three templates of a new folder agree.
EXAMPLE_INITIAL_COLUMNS = (f"{INITIAL_PREFIX}SUB [mmol]", f"{INITIAL_PREFIX}REA [mmol]")

Tables = dict[str, tuple[list[str], list[Sequence]]]


def guide_lines() -> list[tuple[str, str]]:
    """(heading or header, explanation) lines of the guide sheet."""
    lines: list[tuple[str, str]] = [
        ("speciakin campaign workbook", ""),
        ("", "Fill in one workbook per campaign (a set of lab runs of one reaction). Row 1 of every sheet "
             "holds the column headers; do not rename them, but you may reorder columns and add your own "
             "(they are ignored with a note). Units go in square brackets in the header, e.g. 'time [min]', "
             "and you may change them to any accepted unit (list at the end). Then run "
             "'speciakin check <folder>' to find mistakes; every message names the sheet, row and column."),
        ("", ""),
    ]
    for spec in SHEETS.values():
        lines.append((f"Sheet '{spec.title}'", ("required. " if spec.required else "optional. ") + spec.purpose))
        for col in spec.columns:
            lines.append((f"    {col.header}", ("required. " if col.required else "") + col.description))
        if spec.key == "runs":
            lines.append((f"    {INITIAL_PREFIX}<name> [mmol]",
                          "One column per species present at time zero, named as in the model file "
                          f"(the template shows {' and '.join(repr(c) for c in EXAMPLE_INITIAL_COLUMNS)}; "
                          "rename or add columns). Blank = none."))
        if spec.key == "hplc":
            lines.append(("    <compound> (wide layout)",
                          "Instead of 'compound' and 'value': one column per compound, headed by its name "
                          "(add a concentration unit for concentration results, e.g. 'S [mmol/L]')."))
        lines.append(("", ""))
    lines += [
        ("pH mode words", ", ".join(PH_MODE_WORDS)),
        ("Start adjustment words", ", ".join(START_ADJUSTMENT_WORDS)),
        ("HPLC kinds", ", ".join(HPLC_KINDS)),
        ("Below the LOQ", "'<LOQ' uses the LOQ of the Compounds sheet; '<0.05' states the limit; 'n.d.' (not "
                          "detected) and a blank cell in a sampled row count as below the LOQ. Such values are kept as censored "
                          "observations, never read as zero."),
        ("Area% and RRF", "mole fraction_i = (area_i / RRF_i) / sum_j (area_j / RRF_j) over one sample."),
        ("", ""),
        ("Accepted units", ""),
    ]
    for dim in ("time", "volume", "amount", "temperature", "concentration", "molar_mass"):
        lines.append((f"    {dim}", ", ".join(units.DIMENSIONS[dim])))
    return lines


def blank_tables() -> Tables:
    """Headers of every sheet and no rows (the blank template)."""
    out: Tables = {}
    for spec in SHEETS.values():
        headers = [c.header for c in spec.columns]
        if spec.key == "runs":
            headers += list(EXAMPLE_INITIAL_COLUMNS)
        out[spec.key] = (headers, [])
    return out


def _workbook_bytes(tables: Tables) -> bytes:
    import openpyxl
    from openpyxl.styles import Alignment, Font
    from openpyxl.worksheet.datavalidation import DataValidation

    wb = openpyxl.Workbook()
    guide = wb.active
    guide.title = GUIDE_TITLE
    for a, b in guide_lines():
        guide.append([a, b])
        if a and not a.startswith(" "):
            guide.cell(guide.max_row, 1).font = Font(bold=True)
    guide.column_dimensions["A"].width = 34
    guide.column_dimensions["B"].width = 110
    for row in guide.iter_rows(min_col=2, max_col=2):
        for cell in row:
            cell.alignment = Alignment(wrap_text=True, vertical="top")
    for key, spec in SHEETS.items():
        headers, rows = tables.get(key, ([c.header for c in spec.columns], []))
        ws = wb.create_sheet(spec.title)
        ws.append(list(headers))
        for cell in ws[1]:
            cell.font = Font(bold=True)
        for r in rows:
            ws.append(list(r))
        ws.freeze_panes = "A2"
        for i, h in enumerate(headers, start=1):
            ws.column_dimensions[openpyxl.utils.get_column_letter(i)].width = max(10, len(str(h)) + 2)
        if key == "runs":
            dv = DataValidation(type="list", formula1='"held,logged,free"', allow_blank=True)
            ws.add_data_validation(dv)
            dv.add("B2:B1000")
            start = SHEETS["runs"].column("start_adjustment").header
            if start in headers:
                letter = openpyxl.utils.get_column_letter(list(headers).index(start) + 1)
                dv = DataValidation(type="list", formula1='"computed,given,titrant"', allow_blank=True)
                ws.add_data_validation(dv)
                dv.add(f"{letter}2:{letter}1000")
    guard_workbook(wb)  # names such as '=1+2' stay text
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _csv_bytes(headers: Sequence[str], rows: Iterable[Sequence]) -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    quoted = csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_ALL)  # rows with a carriage return
    for r in [headers, *rows]:
        cells = ["" if v is None else (repr(float(v)) if isinstance(v, float) else csv_text(v)) for v in r]
        (quoted if has_carriage_return(cells) else w).writerow(cells)
    return buf.getvalue().encode("utf-8")


def write_tables(tables: Tables, path: str | Path) -> list[Path]:
    """Write sheets to ``path``: an .xlsx workbook (guide sheet first) when the
    name ends in .xlsx, else a folder with one CSV file per sheet.

    Returns the files written.
    """
    p = Path(path)
    if p.suffix.lower() == ".xlsx":
        write_bytes_atomically(p, _workbook_bytes(tables))
        return [p]
    written = []
    for key, spec in SHEETS.items():
        headers, rows = tables.get(key, ([c.header for c in spec.columns], []))
        target = p / spec.csv_name
        write_bytes_atomically(target, _csv_bytes(headers, rows))
        written.append(target)
    return written


def write_template(path: str | Path) -> Path:
    """Write the blank campaign workbook to ``path`` (.xlsx)."""
    write_tables(blank_tables(), path)
    return Path(path)


def write_template_csv(folder: str | Path) -> list[Path]:
    """Write the blank template as one CSV file per sheet into ``folder``."""
    return write_tables(blank_tables(), folder)


def _skeleton(relative: str) -> Path | None:
    import speciakin

    p = Path(speciakin.__file__).parent / relative
    return p if p.is_file() else None


_README = """# Campaign folder

Files here:

- `{workbook}`: the campaign workbook. Its first sheet ('{guide}') explains every sheet,
  column and unit. Fill in the runs, the HPLC compounds and results, and (if you have them)
  the dosing, the probe log and the titrant log.
{model_line}
{process_line}

Then:

1. `speciakin check {name}` lists every mistake with its sheet, row and column, and
   checks the names against `model.toml` and `process.toml` when they are in this folder.
2. `speciakin look {name}` draws each run's raw data (HPLC, pH and temperature, titrant)
   into `look/`, before any fit.
3. `speciakin run {name} --quick` gives a first, provisional fit and pH window (no
   posterior); `speciakin run {name}` does the whole job (fit, posterior, pH window) and
   writes the report into a new folder under `results/`, which it names when it ends.

`speciakin web`, started in the folder that holds this one, does the same on a local page.
{notes}"""


def new_folder(folder: str | Path) -> Path:
    """Create ``folder`` for a new campaign (it may exist when empty).

    Raises
    ------
    DataError
        When ``folder`` exists and is not empty, or cannot be created.
    """
    p = Path(folder)
    if p.exists() and (not p.is_dir() or any(p.iterdir())):
        raise DataError("folder already exists and is not empty; nothing was written", Location(file=str(p)),
                        expected="a new or empty folder")
    try:
        p.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DataError(f"cannot create folder: {exc.strerror}", Location(file=str(p))) from None
    return p


def new_campaign(folder: str | Path) -> list[Path]:
    """Create a campaign folder from the templates.

    Writes the workbook, the model and process skeletons when the installation
    provides them, and a README for the chemist.  (The INVENTED example folder:
    :func:`speciakin.data.example.new_example`.)

    Raises
    ------
    DataError
        When ``folder`` exists and is not empty.
    """
    p = new_folder(folder)
    written = [write_template(p / WORKBOOK_NAME)]
    notes = []
    lines = {}
    for key, rel, target, what in (
        ("model_line", "chemistry/templates/model_skeleton.toml", "model.toml", "the reaction model"),
        ("process_line", "decision/templates/process_skeleton.toml", "process.toml",
         "the process to decide on (specifications, pH range, plant tolerance)"),
    ):
        src = _skeleton(rel)
        if src is None:
            lines[key] = ""
            notes.append(f"- No {target} skeleton is available in this installation; write {what} "
                         f"as {target} by hand.")
            continue
        data = src.read_bytes()
        write_bytes_atomically(p / target, data)
        written.append(p / target)
        lines[key] = f"- `{target}`: {what}; edit the names and numbers."
    readme = _README.format(workbook=WORKBOOK_NAME, guide=GUIDE_TITLE, name=str(folder),
                            model_line=lines["model_line"], process_line=lines["process_line"],
                            notes=("\nNotes:\n\n" + "\n".join(notes) + "\n") if notes else "")
    write_bytes_atomically(p / "README.md", readme.replace("\n\n\n", "\n\n").encode("utf-8"))
    written.append(p / "README.md")
    return written


def regenerate_data_templates(target: str | Path) -> list[Path]:
    """Rewrite the blank workbook and its csv/ folder at ``target`` (the
    repository's data_templates/ folder is made this way)."""
    t = Path(target)
    return [write_template(t / WORKBOOK_NAME)] + write_template_csv(t / "csv")
