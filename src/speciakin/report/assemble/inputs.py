"""Report sections "Inputs" and "The model": provenance and the reaction scheme.

Every input file is listed with its SHA-256 digest (FIPS 180-4, "Secure Hash
Standard", NIST 2015) so that a reader can prove which files made the numbers.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any, Sequence

from speciakin.errors import InputError, Location
from speciakin.report.document import BulletList, KeyValues, Paragraph, Section, Table

__all__ = [
    "activity_words",
    "pkw_words",
    "file_sha256",
    "input_file_rows",
    "inputs_section",
    "model_section",
    "scheme_lines",
]

_CHUNK = 1 << 20


def file_sha256(path: str | os.PathLike) -> tuple[str, int]:
    """SHA-256 hex digest and size [bytes] of a file (read-only, in chunks).

    Raises
    ------
    InputError
        The file is missing or unreadable.

    References
    ----------
    NIST FIPS 180-4, "Secure Hash Standard (SHS)", 2015 (SHA-256).
    """
    p = Path(path)
    digest = hashlib.sha256()
    size = 0
    try:
        with p.open("rb") as fh:
            while True:
                chunk = fh.read(_CHUNK)
                if not chunk:
                    break
                digest.update(chunk)
                size += len(chunk)
    except OSError as exc:
        raise InputError(f"cannot read input file for its SHA-256: {exc.strerror or exc}",
                         Location(file=str(p)), expected="a readable file") from None
    return digest.hexdigest(), size


def input_file_rows(campaign: Any, extra_inputs: Sequence[tuple[str, str]]) -> list[list[Any]]:
    """Rows (role, path, sheets, size [bytes], SHA-256) of every input file."""
    rows: list[list[Any]] = []
    for src in getattr(campaign, "provenance", ()) or ():
        rows.append(["campaign", str(src.path), ", ".join(src.sheets), int(src.size), src.sha256])
    for i, item in enumerate(extra_inputs):
        if not isinstance(item, (tuple, list)) or len(item) != 2:
            raise InputError("an extra input must be a (label, path) pair", Location(key=f"extra_inputs[{i}]"),
                             item, "(label, path)")
        label, path = item
        sha, size = file_sha256(path)
        rows.append([str(label), str(path), None, size, sha])
    return rows


def inputs_section(campaign: Any, extra_inputs: Sequence[tuple[str, str]], software_version: str,
                   command: str, check: Any = None, invented: bool = False, created: str = "") -> Section:
    """The "Inputs" section: files with SHA-256, software version, command, date and check summary."""
    rows = input_file_rows(campaign, extra_inputs)
    blocks: list = []
    if invented:
        blocks.append(Paragraph("Every compound, run and number of this report is invented for "
                                "demonstration; it describes no real substance or process."))
    if rows:
        details = "; ".join(f"{Path(r[1]).name}: {r[3]} bytes" + (f", sheets {r[2]}" if r[2] else "") for r in rows)
        blocks.append(Table("Input files", ["role", "path", "SHA-256"], [[r[0], r[1], r[4]] for r in rows],
                            note=f"SHA-256 of each file's bytes (FIPS 180-4). {details}."))
    else:
        blocks.append(Paragraph("No input file was recorded (the campaign was built in memory)."))
    blocks.append(KeyValues([
        ("Campaign source", getattr(campaign, "source", "") or "(in memory)"),
        ("Runs", len(getattr(campaign, "runs", ()))),
        ("HPLC basis", getattr(campaign, "basis", "")),
        ("Software", f"speciakin {software_version}"),
        ("Command to reproduce", command or "(not recorded)"),
        ("Report date (UTC)", created or None),
    ]))
    if check is None:
        blocks.append(Paragraph("Campaign check: not run for this report."))
    else:
        blocks.append(KeyValues([("Campaign check", "OK" if check.ok else "FAILED"),
                                 ("Errors", len(check.errors)), ("Warnings", len(check.warnings))]))
        if check.problems:
            blocks.append(BulletList([p.describe() for p in check.problems]))
    return Section("Inputs", blocks, anchor="inputs")


def scheme_lines(model: Any) -> list[str]:
    """Reaction steps of ``model`` as readable lines (from ``model_summary``)."""
    from speciakin.chemistry.modelfile import model_summary

    lines = model_summary(model).splitlines()
    out: list[str] = []
    inside = False
    for line in lines:
        if line.strip() == "Steps":
            inside = True
            continue
        if inside:
            if not line.strip():
                break
            out.append(line.strip())
    return [t for t in out if t and t != "(none)"]


def _quantity_rows(model: Any, fitted_values: dict[str, float]) -> list[list[Any]]:
    rows = []
    for q in model.quantities():
        if not q.name:
            continue
        if q.value == 0.0 and not q.fit and q.unit in ("kJ/mol", ""):
            continue  # unused energies and interactions: nothing to say
        estimate = fitted_values.get(q.name)
        if q.fit:
            status = "fitted as a shift from this start" if getattr(q, "shift", False) else "fitted from this start"
        else:
            status = "fixed at this value"
        rows.append([q.name, q.unit or None, float(q.value), status, estimate])
    return rows


def activity_words(model: Any) -> str:
    """The model's activity setting with what it means (the chemistry layer's registry)."""
    from speciakin.chemistry.model import ACTIVITY_MODELS

    return f"{model.activity} ({ACTIVITY_MODELS.get(model.activity, 'as named in the model file')})"


def pkw_words(model: Any) -> str:
    """The ion product of the medium the model uses, in words."""
    pkw = getattr(model, "pkw", None)
    medium = getattr(model, "medium", "") or ""
    if pkw is None:
        return "pure water (IAPWS R11-07, temperature dependent)"
    where = f" of {medium}" if medium else " of the medium"
    how = "fitted as a shift from" if pkw.fit else "fixed at"
    return f"pKw{where} {how} {pkw.value:.2f} at the reference temperature, following water's temperature dependence"


def model_section(model: Any, fit: Any = None) -> Section:
    """The "The model" section: species and sites, reaction scheme, fitted vs fixed quantities."""
    blocks: list = [KeyValues([("Model", model.name), ("Description", model.description or None),
                               ("Reference temperature [C]", round(model.reference_temperature - 273.15, 2)),
                               ("Activity correction", activity_words(model)),
                               ("Ion product of the medium (pKw)", pkw_words(model))])]
    species_rows = []
    for m in model.molecules:
        sites = "; ".join(f"{s.name} ({s.kind}, {'starting ' if s.pka.fit else ''}pKa {s.pka.value:.2f})"
                          for s in m.sites) or None
        species_rows.append([m.label or m.name, m.name, m.role or None, sites])
    blocks.append(Table("Species", ["compound", "short name", "role", "sites"], species_rows,
                        note="Site pKa values as written in the model file: a 'starting' pKa is where the fit "
                             "began, not a result (results: Parameters section)."))
    scheme = scheme_lines(model)
    blocks.append(Paragraph("Reaction scheme (a site in brackets must be in the state named for the "
                            "step to proceed; proton transfers are treated as instantaneous equilibria):"))
    blocks.append(BulletList(scheme) if scheme else Paragraph("The model has no reaction step."))
    implied: dict[str, float] = {}
    if fit is not None:
        for row in fit.rows():
            implied[row["name"]] = row["implied_value"]
    blocks.append(Table("Fitted and fixed quantities",
                        ["quantity", "unit", "starting or fixed value", "status", "estimate"],
                        _quantity_rows(model, implied),
                        note="starting or fixed value: as written in the model file (for a fitted quantity only "
                             "where the fit started); estimate: least-squares result (empty when not fitted or no "
                             "fit). log10 k values are in log10 of the rate-constant unit; a pKa fitted as a shift "
                             "is shown as the absolute pKa it implies."))
    return Section("The model", blocks, anchor="model")
