"""The campaign object: lab runs, HPLC observations and logs in internal units.

This is the contract between the spreadsheet import and the estimation layer.
Arrays are numpy arrays in internal units (time [s], amount [mol], volume [L],
concentration [mol/L], temperature [K]).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from speciakin.chemistry.model import PhControl, Run
from speciakin.data.reader import SourceFile
from speciakin.errors import Location, Problem

__all__ = [
    "Compound",
    "HplcData",
    "TitrantLog",
    "TimeSeries",
    "CampaignRun",
    "Campaign",
    "SourceFile",
    "mole_fractions_from_signals",
    "resample",
    "NOT_MODELLED",
    "NOT_MODELLED_WORDS",
]

#: The Compounds sheet's ``model molecule`` of a peak the model does not describe; the words read as it.
NOT_MODELLED = "not modelled"
NOT_MODELLED_WORDS = frozenset({"not modelled", "not modeled", "unmodelled", "unmodeled", "none", "-",
                                "not in model"})


def mole_fractions_from_signals(signals: np.ndarray, rrf: np.ndarray) -> np.ndarray:
    """Mole fractions of the compounds of one HPLC sample.

    ``x_i = (A_i / RRF_i) / sum_j (A_j / RRF_j)``

    Parameters
    ----------
    signals
        Area% or peak areas of one sample [-]; censored values should be
        passed as 0 (or another documented substitute).
    rrf
        Relative response factors [-] (> 0).

    Returns
    -------
    numpy.ndarray
        Mole fractions [-], summing to 1 (NaN when every signal is 0).

    References
    ----------
    Relative response factor correction of chromatographic peak areas:
    ICH Q2(R2) "Validation of analytical procedures" (2023) and Snyder, Kirkland
    and Dolan, "Introduction to Modern Liquid Chromatography", 3rd ed., Wiley
    2010, ch. 11 (quantitation with response factors).
    """
    s = np.asarray(signals, dtype=float)
    r = np.asarray(rrf, dtype=float)
    moles = s / r
    total = moles.sum()
    if not np.isfinite(total) or total <= 0:
        return np.full_like(moles, np.nan)
    return moles / total


def resample(times: np.ndarray, values: np.ndarray, new_times: np.ndarray) -> np.ndarray:
    """Linear interpolation of a log onto ``new_times`` (held constant beyond its ends).

    Parameters
    ----------
    times
        Log times [s], increasing (repeated times are averaged first).
    values
        Logged values (pH [-], temperature [K], ...); NaN entries are ignored.
    new_times
        Times [s] to evaluate at.

    Returns
    -------
    numpy.ndarray
        Interpolated values at ``new_times``.

    References
    ----------
    Piecewise-linear interpolation as in numpy.interp.
    """
    t = np.asarray(times, dtype=float)
    v = np.asarray(values, dtype=float)
    keep = np.isfinite(t) & np.isfinite(v)
    t, v = t[keep], v[keep]
    if t.size == 0:
        raise ValueError("cannot resample an empty log")
    order = np.argsort(t, kind="stable")
    t, v = t[order], v[order]
    unique, inverse = np.unique(t, return_inverse=True)
    if unique.size != t.size:
        v = np.bincount(inverse, weights=v) / np.bincount(inverse)
        t = unique
    return np.interp(np.asarray(new_times, dtype=float), t, v)


@dataclass(frozen=True)
class Compound:
    """A compound of the HPLC method and the model molecule it is.

    Attributes
    ----------
    name
        Name used in the HPLC results.
    molecule
        Model molecule name.
    rrf
        Relative response factor [-] (1 when not given).
    molar_mass
        [g/mol] or None.
    loq
        Limit of quantitation on the scale of the HPLC values as imported
        (area%, area, or [mol/L]); None when not given.
    substrate_units
        Substrate cores per molecule for mass balances, or None.
    row
        Spreadsheet row in the compounds sheet.
    modelled
        False for a peak marked :data:`NOT_MODELLED` (``molecule`` ""): counted in its samples' totals.
    """

    name: str
    molecule: str
    rrf: float = 1.0
    molar_mass: float | None = None
    loq: float | None = None
    substrate_units: float | None = None
    row: int | None = None
    modelled: bool = True

    def to_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class TimeSeries:
    """A logged quantity: ``time`` [s], ``value`` (internal units), spreadsheet ``rows``."""

    time: np.ndarray
    value: np.ndarray
    rows: np.ndarray

    def __len__(self) -> int:
        return int(self.time.size)

    def resample(self, new_times: np.ndarray) -> np.ndarray:
        """Values at ``new_times`` [s] by :func:`resample`."""
        return resample(self.time, self.value, new_times)

    def to_dict(self) -> dict[str, Any]:
        return {"time": self.time.tolist(), "value": self.value.tolist(), "rows": self.rows.tolist()}


@dataclass(frozen=True)
class TitrantLog:
    """Titrant consumed by a held-pH run.

    Attributes
    ----------
    time
        [s].
    amount
        Cumulative titrant amount [mol] (volume x concentration when the
        sheet gives volumes).
    rows
        Spreadsheet rows.
    volume
        Cumulative volume [L] when given, else None.
    """

    time: np.ndarray
    amount: np.ndarray
    rows: np.ndarray
    volume: np.ndarray | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"time": self.time.tolist(), "amount": self.amount.tolist(), "rows": self.rows.tolist(),
                "volume": None if self.volume is None else self.volume.tolist()}


@dataclass(frozen=True)
class HplcData:
    """HPLC observations of one run, one entry per reported value.

    Attributes
    ----------
    time
        Sampling time [s].
    compound
        Compound names (HPLC method names).
    molecule
        Model molecule names.
    kind
        ``"area_percent"``, ``"area"`` or ``"concentration"`` per value.
    value
        Area% as given, peak area as given, or concentration [mol/L];
        NaN where censored.
    censored
        True where the value was reported below the LOQ ("<LOQ", "<0.05" or
        a blank cell in a sampled row).
    loq
        LOQ on the scale of ``value`` (NaN when unknown).
    rrf
        Relative response factor [-] of each compound.
    rows
        Spreadsheet row of each value.
    basis
        ``"area_percent"``, ``"area"``, ``"concentration"``, ``"mixed"`` or
        ``"none"`` (no values): what the numbers are, for reports.
    other
        The values of the peaks marked :data:`NOT_MODELLED` (``molecule`` ""),
        or None: they count in their sample's total area (``pipeline.objective``).
    """

    time: np.ndarray
    compound: np.ndarray
    molecule: np.ndarray
    kind: np.ndarray
    value: np.ndarray
    censored: np.ndarray
    loq: np.ndarray
    rrf: np.ndarray
    rows: np.ndarray
    basis: str = "none"
    other: "HplcData | None" = None

    def __len__(self) -> int:
        return int(self.time.size)

    @property
    def sample_times(self) -> np.ndarray:
        """Distinct sampling times [s], increasing."""
        return np.unique(self.time)

    def sample(self, sample: int | float) -> np.ndarray:
        """Indices of the values of one sample: ``sample`` is an index into
        :attr:`sample_times` (int) or a sampling time [s] (float)."""
        if isinstance(sample, (int, np.integer)) and not isinstance(sample, bool):
            t = self.sample_times[int(sample)]
        else:
            t = float(sample)
        return np.flatnonzero(self.time == t)

    def mole_fractions(self, sample: int | float) -> dict[str, float]:
        """Mole fraction of each compound in one sample.

        Area% and peak areas are divided by the RRF and normalised over the
        compounds of the sample (:func:`mole_fractions_from_signals`);
        concentrations are normalised directly.  Censored values count as 0.

        Returns
        -------
        dict
            compound name -> mole fraction [-].
        """
        idx = self.sample(sample)
        signals = np.where(self.censored[idx], 0.0, self.value[idx])
        if np.all(self.kind[idx] == "concentration"):
            rrf = np.ones(idx.size)
        else:
            rrf = self.rrf[idx]
        x = mole_fractions_from_signals(signals, rrf)
        return {str(c): float(v) for c, v in zip(self.compound[idx], x)}

    def to_dict(self) -> dict[str, Any]:
        return {
            "basis": self.basis,
            "time": self.time.tolist(), "compound": self.compound.tolist(),
            "molecule": self.molecule.tolist(), "kind": self.kind.tolist(),
            "value": [None if not np.isfinite(v) else float(v) for v in self.value],
            "censored": self.censored.tolist(),
            "loq": [None if not np.isfinite(v) else float(v) for v in self.loq],
            "rrf": self.rrf.tolist(), "rows": self.rows.tolist(),
            **({"not_modelled": self.other.to_dict()} if self.other is not None else {}),
        }

    def other_share(self, time: float) -> tuple[float, np.ndarray]:
        """(sum of the quantified not-modelled values, their indices into :attr:`other`) of the sample
        taken at ``time`` [s]: area% or peak areas as given; (0, empty) when there are none."""
        if self.other is None:
            return 0.0, np.zeros(0, np.int64)
        idx = np.flatnonzero(self.other.time == time)
        o = self.other
        return float(np.sum(np.where(o.censored[idx], 0.0, o.value[idx]))), idx


def basis_of(kinds: np.ndarray) -> str:
    """Campaign/run basis label from the kinds of its values."""
    distinct = sorted(set(str(k) for k in kinds))
    if not distinct:
        return "none"
    return distinct[0] if len(distinct) == 1 else "mixed"


@dataclass(frozen=True)
class CampaignRun:
    """One lab run as imported.

    Attributes
    ----------
    recipe
        :class:`speciakin.chemistry.model.Run` ready for the simulator.
    hplc
        HPLC observations.
    titrant
        Titrant consumption of a held run, or None.
    ph_log, temperature_log
        Probe readings (pH [-], temperature [K]) or None.
    row
        Row of the run in the runs sheet.
    dose_rows
        Row in the Dosing sheet of each of ``recipe.doses`` (empty when
        built in code).
    """

    recipe: Run
    hplc: HplcData
    titrant: TitrantLog | None = None
    ph_log: TimeSeries | None = None
    temperature_log: TimeSeries | None = None
    row: int | None = None
    dose_rows: tuple[int, ...] = ()

    @property
    def name(self) -> str:
        return self.recipe.name

    def with_resampled_ph_log(self, new_times: np.ndarray) -> "CampaignRun":
        """A copy whose recipe's pH log is resampled onto ``new_times`` [s]
        (the raw ``ph_log`` is kept unchanged)."""
        if self.ph_log is None or len(self.ph_log) == 0:
            return self
        t = np.asarray(new_times, dtype=float)
        ph = self.ph_log.resample(t)
        control = replace(self.recipe.ph, log_times=tuple(t.tolist()), log_ph=tuple(ph.tolist()))
        return replace(self, recipe=replace(self.recipe, ph=control))

    def to_dict(self) -> dict[str, Any]:
        r = self.recipe
        return {
            "name": r.name, "row": self.row,
            "recipe": {
                "charges": dict(r.charges), "volume": r.volume, "end_time": r.end_time,
                "temperature": {"times": list(r.temperature.times),
                                "temperatures": list(r.temperature.temperatures)},
                "ph": _ph_dict(r.ph),
                "doses": [dataclasses.asdict(d) for d in r.doses],
                "withdrawals": [dataclasses.asdict(w) for w in r.withdrawals],
                "note": r.note,
            },
            "hplc": self.hplc.to_dict(),
            "titrant": None if self.titrant is None else self.titrant.to_dict(),
            "ph_log": None if self.ph_log is None else self.ph_log.to_dict(),
            "temperature_log": None if self.temperature_log is None else self.temperature_log.to_dict(),
        }


def _ph_dict(ph: PhControl) -> dict[str, Any]:
    return {"mode": ph.mode, "setpoint": ph.setpoint, "titrant": ph.titrant,
            "titrant_concentration": ph.titrant_concentration,
            "log_points": len(ph.log_times)}


@dataclass(frozen=True)
class Campaign:
    """Every run of a campaign with its observations.

    Attributes
    ----------
    runs
        Runs in sheet order.
    compounds
        The HPLC compounds and their model molecules.
    other_compounds
        The compounds marked :data:`NOT_MODELLED` in the Compounds sheet.
    provenance
        Every file read (path, sheets, SHA-256, size).
    problems
        Warnings found on import (errors stop the import).
    source
        The path given to :func:`speciakin.data.load_campaign`.
    basis
        What the HPLC numbers are over the campaign (see :class:`HplcData`).
    """

    runs: tuple[CampaignRun, ...]
    compounds: tuple[Compound, ...]
    provenance: tuple[SourceFile, ...] = ()
    problems: tuple[Problem, ...] = ()
    source: str = ""
    basis: str = "none"
    layout: str = "long"
    extra: dict[str, Any] = field(default_factory=dict)
    other_compounds: tuple[Compound, ...] = ()

    def run(self, name: str) -> CampaignRun:
        for r in self.runs:
            if r.name == name:
                return r
        raise KeyError(f"no run {name!r}; runs: {', '.join(r.name for r in self.runs)}")

    def locate(self, sheet: str, row: int | None = None, column: str | None = None) -> Location:
        """Location of a cell: ``sheet`` and ``column`` are registry keys
        (``"runs"``, ``"start_volume"``); the column reads as in messages,
        letter and header as written (``"G (start volume [mL])"``)."""
        info = self.extra.get("sheets", {}).get(sheet, {})
        label = info.get("columns", {}).get(column, column) if column else None
        return Location(file=info.get("file"), sheet=info.get("sheet"), row=row, column=label)

    def time_unit(self, sheet: str, column: str = "time"):
        """The time unit (``units.Unit``) of a column's header, in which its cells are written; minutes
        when the header names none (clock times, a column made by hand).  Messages name a time as the
        cell shows it: ``seconds / unit.factor``, with ``unit.symbol``."""
        from speciakin import units

        label = self.extra.get("sheets", {}).get(sheet, {}).get("columns", {}).get(column, "")
        header = label.split(" (", 1)[1][:-1] if " (" in label and label.endswith(")") else label
        symbol = units.split_header(header)[1] if header else None
        try:
            return units.lookup(symbol or "min", "time")
        except KeyError:
            return units.lookup("min", "time")

    def compound(self, name: str) -> Compound:
        for c in self.compounds:
            if c.name == name:
                return c
        raise KeyError(name)

    def observations_frame(self):
        """All HPLC observations as one long pandas DataFrame.

        Columns: run, time_s, compound, molecule, kind, value, censored, loq,
        rrf, row.
        """
        import pandas as pd

        frames = []
        for r in self.runs:
            h = r.hplc
            frames.append(pd.DataFrame({
                "run": np.full(len(h), r.name, dtype=object), "time_s": h.time,
                "compound": h.compound, "molecule": h.molecule, "kind": h.kind,
                "value": h.value, "censored": h.censored, "loq": h.loq, "rrf": h.rrf, "row": h.rows,
            }))
        if not frames:
            return pd.DataFrame(columns=["run", "time_s", "compound", "molecule", "kind", "value",
                                         "censored", "loq", "rrf", "row"])
        return pd.concat(frames, ignore_index=True)

    def report(self) -> str:
        """Plain-text summary with stable headings: Campaign, Sources, Runs,
        Compounds, Warnings."""
        lines = ["Campaign", "========", f"Source: {self.source}",
                 f"HPLC basis: {self.basis}   layout: {self.layout}", "", "Sources", "-------"]
        lines += [f"  {p.path}  sheets: {', '.join(p.sheets)}  sha256: {p.sha256[:16]}...  {p.size} bytes"
                  for p in self.provenance] or ["  none"]
        lines += ["", "Runs", "----",
                  f"  {'run':<12}{'pH mode':<9}{'setpoint':>9}{'T [C]':>8}{'V0 [mL]':>9}{'end [min]':>10}"
                  f"{'HPLC values':>12}{'censored':>10}{'pH log':>8}"]
        for r in self.runs:
            rec = r.recipe
            sp = f"{rec.ph.setpoint:.2f}" if rec.ph.setpoint is not None else "-"
            t0 = rec.temperature.temperatures[0] - 273.15
            lines.append(f"  {r.name:<12}{rec.ph.mode:<9}{sp:>9}{t0:>8.1f}{rec.volume * 1e3:>9.2f}"
                         f"{rec.end_time / 60.0:>10.1f}{len(r.hplc):>12}{int(r.hplc.censored.sum()):>10}"
                         f"{len(r.ph_log) if r.ph_log is not None else 0:>8}")
        lines += ["", "Compounds", "---------"]
        lines += [f"  {c.name} -> {c.molecule}  RRF {c.rrf:g}" + (f"  LOQ {c.loq:g}" if c.loq is not None else "")
                  for c in self.compounds] or ["  none"]
        lines += [f"  {c.name} -> {NOT_MODELLED} (counts in its samples' totals)" for c in self.other_compounds]
        lines += ["", "Warnings", "--------"]
        lines += [f"  - {p.describe()}" for p in self.problems] or ["  none"]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": self.source, "basis": self.basis, "layout": self.layout,
            "runs": [r.to_dict() for r in self.runs],
            "compounds": [c.to_dict() for c in self.compounds],
            "other_compounds": [c.to_dict() for c in self.other_compounds],
            "provenance": [p.to_dict() for p in self.provenance],
            "problems": [p.to_dict() for p in self.problems],
        }
