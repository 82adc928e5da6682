"""Runs of the model file (initial amounts, temperature, pH control, dosing, samples)
and the ``[fit]`` table of estimation options.

Bare numbers use the defaults of
:data:`speciakin.chemistry.modelfile.units.BARE_NUMBER_UNITS` (time min, volume
mL, amount mmol, concentration mol/L, temperature C).  An initial or a dosed
amount written as a concentration is multiplied by the run volume (or the
dose volume); one written as a mass ("236 mg") is divided by the molecule's
``molar_mass``; a dosed amount written in equivalents ("1.2 eq") is that many
times the run's initial amount of the substrate (the molecule with role
"substrate").
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

from speciakin.chemistry.model import (PH_MODES, START_ADJUSTMENTS, Dose, PhControl, Run, TemperatureProfile,
                                      Withdrawal)
from speciakin.chemistry.modelfile.keys import FILE_KEYS, RENAMED_KEYS
from speciakin.chemistry.modelfile.paths import format_path, sub_path
from speciakin.chemistry.modelfile.phlog import read_ph_log
from speciakin.chemistry.modelfile.reader import TableReader
from speciakin.chemistry.modelfile.units import is_mass, parse_equivalents
from speciakin.units import parse_quantity

__all__ = ["RunReader"]

_NAN = float("nan")


class RunReader:
    """Read ``[run.<name>]`` and ``[fit]`` tables; problems go to ``reader``."""

    def __init__(self, reader: TableReader, base_dir: Path, molar_masses: dict[str, float | None] | None = None,
                 substrate: str | None = None) -> None:
        self.reader = reader
        self.base_dir = base_dir
        #: Molar mass [g/mol] (or None) of each molecule, for amounts given as masses.
        self.molar_masses = dict(molar_masses or {})
        #: Name of the substrate molecule, for amounts given in equivalents.
        self.substrate = substrate

    def _mass(self, raw: str, path: str, species: str | None) -> float | None:
        """A mass [g] divided by the molar mass [g/mol] of ``species``: [mol]."""
        r = self.reader
        molar_mass = self.molar_masses.get(species) if species else None
        if not molar_mass or not math.isfinite(molar_mass):
            r.error(path, f"a mass needs the molar mass of {species or 'the species'}", raw,
                    f"molar_mass in [molecule.{species}], or an amount such as '1.0 mmol'")
            return None
        mass = r.measure(raw, path, "mass", minimum=0)
        return None if mass is None else mass / molar_mass

    def _amount(self, raw: Any, path: str, volume: float | None, species: str | None = None) -> float | None:
        """An amount, a concentration multiplied by ``volume`` [L], or a mass
        divided by the molar mass of ``species``."""
        r = self.reader
        if is_mass(raw):
            return self._mass(raw, path, species)
        if isinstance(raw, str):
            try:
                parse_quantity(raw, "concentration")
            except ValueError:
                return r.measure(raw, path, "amount", minimum=0)
            concentration = r.measure(raw, path, "concentration", minimum=0)
            if concentration is None:
                return None
            if volume is None or not math.isfinite(volume) or volume <= 0.0:
                r.error(path, "a concentration needs a volume to give an amount", raw,
                        "an amount such as '1.0 mmol', or a volume next to it")
                return None
            return concentration * volume
        return r.measure(raw, path, "amount", minimum=0)

    def run(self, name: str, value: Any) -> Run | None:
        r = self.reader
        path = format_path("run", name)
        table = r.keyed(value, path, FILE_KEYS["run"], required=("volume", "end_time", "ph"),
                        renamed=RENAMED_KEYS["run"])
        if table is None:
            return None
        note = r.string(table, "note", path, default="") or ""
        volume = _NAN
        if "volume" in table:
            volume = r.measure(table["volume"], sub_path(path, "volume"), "volume", positive=True)
        end_time = _NAN
        if "end_time" in table:
            end_time = r.measure(table["end_time"], sub_path(path, "end_time"), "time",
                                 positive=True)
        volume = _NAN if volume is None else volume
        end_time = _NAN if end_time is None else end_time
        charges: dict[str, float] = {}
        for species, raw in (r.table(table, "initial", path) or {}).items():
            amount = self._amount(raw, sub_path(path, "initial", species), volume, species)
            charges[species] = _NAN if amount is None else amount
        temperature = self._temperature(table, path)
        ph = self._ph(table, path)
        doses = []
        for i, item in enumerate(self.reader.array(table, "dosing", path)):
            dose = self._dose(item, sub_path(path, "dosing", i), charges.get(self.substrate or ""))
            if dose is not None:
                doses.append(dose)
        withdrawals = []
        for i, item in enumerate(self.reader.array(table, "withdrawal", path)):
            sub = sub_path(path, "withdrawal", i)
            item = r.keyed(item, sub, FILE_KEYS["withdrawal"], required=("time", "volume"))
            if item is None:
                continue
            if "time" in item and "volume" in item:
                t = r.measure(item["time"], sub_path(sub, "time"), "time")
                v = r.measure(item["volume"], sub_path(sub, "volume"), "volume", minimum=0)
                if t is not None and v is not None:
                    withdrawals.append(Withdrawal(t, v))
        withdrawals += self._samples(table, path)
        offset = 0.0
        if "probe_offset" in table:
            offset = r.number(table["probe_offset"], sub_path(path, "probe_offset")) or 0.0
        factor = 1.0
        if "amount_factor" in table:
            factor = r.number(table["amount_factor"], sub_path(path, "amount_factor"),
                              positive=True) or 1.0
        return Run(name, charges, volume, temperature, ph, end_time, tuple(doses), tuple(withdrawals),
                   offset, factor, note)

    def _samples(self, table: dict, path: str) -> list[Withdrawal]:
        """Compact form ``samples = { times = [...], volume = "0.2 mL" }`` (one volume for all)."""
        r = self.reader
        raw = r.table(table, "samples", path)
        if raw is None:
            return []
        sub = sub_path(path, "samples")
        r.check_keys(raw, sub, FILE_KEYS["samples"], required=("times", "volume"))
        if "times" not in raw or "volume" not in raw:
            return []
        volume = r.measure(raw["volume"], sub_path(sub, "volume"), "volume", minimum=0)
        times = r.typed(raw["times"], sub_path(sub, "times"), list, "an array of times") or []
        out = []
        for i, item in enumerate(times):
            t = r.measure(item, sub_path(sub, "times", i), "time")
            if t is not None and volume is not None:
                out.append(Withdrawal(t, volume))
        return out

    def _temperature(self, table: dict, path: str) -> TemperatureProfile:
        r = self.reader
        sub = sub_path(path, "temperature")
        raw = table.get("temperature", "25 C")
        if not isinstance(raw, dict):
            t = r.measure(raw, sub, "temperature", positive=True)
            return TemperatureProfile((0.0,), (_NAN if t is None else t,))
        r.check_keys(raw, sub, FILE_KEYS["temperature"], required=("times", "values"))
        times = [r.measure(x, sub_path(sub, "times", i), "time")
                 for i, x in enumerate(r.typed(raw.get("times", []), sub_path(sub, "times"), list) or [])]
        temps = [r.measure(x, sub_path(sub, "values", i), "temperature", positive=True)
                 for i, x in enumerate(r.typed(raw.get("values", []), sub_path(sub, "values"), list)
                                       or [])]
        return TemperatureProfile(tuple(_NAN if x is None else x for x in times),
                                  tuple(_NAN if x is None else x for x in temps))

    def _ph(self, table: dict, path: str) -> PhControl:
        r = self.reader
        sub = sub_path(path, "ph")
        raw = r.table(table, "ph", path)
        if raw is None:
            return PhControl("free")
        mode = raw.get("mode")
        if mode not in PH_MODES:
            r.error(sub_path(sub, "mode") if "mode" in raw else sub,
                    "unknown pH mode" if "mode" in raw else "missing key 'mode'", mode,
                    "one of: " + ", ".join(PH_MODES))
            return PhControl("free")
        r.check_keys(raw, sub, FILE_KEYS[f"ph.{mode}"])
        if mode == "held":
            setpoint = r.number(raw["setpoint"], sub_path(sub, "setpoint")) if "setpoint" in raw else None
            return PhControl("held", setpoint, **self._control(raw, sub))
        if mode == "logged":
            times, values = read_ph_log(r, raw, sub, self.base_dir)
            return PhControl("logged", log_times=times, log_ph=values, **self._control(raw, sub))
        return PhControl("free")

    def _control(self, raw: dict, sub: str) -> dict[str, Any]:
        """Titrant, opposite titrant and start adjustment of a held or logged pH table."""
        r = self.reader
        out: dict[str, Any] = {}
        for key in ("titrant", "opposite_titrant"):
            out[key] = r.string(raw, key, sub)
            ckey = f"{key}_concentration"
            out[ckey] = None
            if ckey in raw:
                out[ckey] = r.measure(raw[ckey], sub_path(sub, ckey), "concentration", positive=True)
        out["start_adjustment"] = r.string(raw, "start_adjustment", sub, default="computed",
                                           choices=START_ADJUSTMENTS) or "computed"
        out["start_acid"] = r.string(raw, "start_acid", sub)
        out["start_base"] = r.string(raw, "start_base", sub)
        return out

    def _equivalents(self, raw: Any, path: str, substrate_amount: float | None) -> float | None:
        """``"1.2 eq"`` times the run's initial substrate amount [mol]."""
        r = self.reader
        try:
            eq = parse_equivalents(raw)
        except ValueError as exc:
            r.error(path, str(exc), raw, "a positive number of equivalents such as '1.2 eq'")
            return None
        if substrate_amount is None or not math.isfinite(substrate_amount):
            r.error(path, "equivalents need the run's initial amount of the substrate", raw,
                    f"'initial' of the substrate ({self.substrate or 'a molecule with role substrate'}) in this "
                    "run, or an amount such as '1.0 mmol'")
            return None
        return eq * substrate_amount

    def _dose(self, value: Any, path: str, substrate_amount: float | None = None) -> Dose | None:
        r = self.reader
        table = r.keyed(value, path, FILE_KEYS["dosing"], required=("species", "amount", "start"))
        if table is None:
            return None
        species = r.string(table, "species", path)
        volume = 0.0
        if "volume" in table:
            volume = r.measure(table["volume"], sub_path(path, "volume"), "volume", minimum=0)
        amount = None
        if "amount" in table:
            raw = table["amount"]
            amount = (self._equivalents(raw, sub_path(path, "amount"), substrate_amount)
                      if isinstance(raw, str) and parse_equivalents_safe(raw) else
                      self._amount(raw, sub_path(path, "amount"), volume, species))
        start = r.measure(table["start"], sub_path(path, "start"), "time") if "start" in table else None
        end = start
        if "end" in table:
            end = r.measure(table["end"], sub_path(path, "end"), "time")
        if None in (species, amount, start, end, volume):
            return None
        return Dose(species, amount, start, end, volume)

    def fit_options(self, table: dict) -> dict[str, Any]:
        r = self.reader
        r.check_keys(table, "fit", FILE_KEYS["fit"])
        out: dict[str, Any] = {}
        for key in ("probe_offset", "amount_factor"):
            if key not in table:
                continue
            path = format_path("fit", key)
            raw = table[key]
            if isinstance(raw, bool):
                out[key] = {"runs": "all" if raw else []}
                continue
            raw = r.keyed(raw, path, FILE_KEYS["fit.nuisance"],
                          what="true, false or a table {runs, lower, upper, sd}")
            if raw is None:
                continue
            item: dict[str, Any] = {"runs": "all"}
            runs = raw.get("runs", "all")
            if runs != "all":
                if not (isinstance(runs, list) and all(isinstance(x, str) for x in runs)):
                    r.error(sub_path(path, "runs"), "wrong value", runs, '"all" or an array of run names')
                else:
                    item["runs"] = list(runs)
            for bound in ("lower", "upper"):
                if bound in raw:
                    number = r.number(raw[bound], sub_path(path, bound))
                    if number is not None:
                        item[bound] = number
            if "sd" in raw:
                number = r.number(raw["sd"], sub_path(path, "sd"), positive=True)
                if number is not None:
                    item["sd"] = number
            out[key] = item
        if "error_model" in table:
            path = "fit.error_model"
            raw = r.keyed(table["error_model"], path, FILE_KEYS["fit.error_model"]) or {}
            em = {}
            for key in FILE_KEYS["fit.error_model"]:
                if key in raw:
                    number = r.number(raw[key], sub_path(path, key), minimum=0)
                    if number is not None:
                        em[key] = number
            out["error_model"] = em
        if "log_thinning" in table:
            path = "fit.log_thinning"
            raw = r.keyed(table["log_thinning"], path, FILE_KEYS["fit.log_thinning"],
                          what="a table { titrant = N, ph = M }") or {}
            thin = {}
            for key in FILE_KEYS["fit.log_thinning"]:
                if key in raw:
                    value = r.typed(raw[key], sub_path(path, key), int, "a whole number of readings >= 2")
                    if value is not None and value < 2:
                        r.error(sub_path(path, key), "too few readings", value, "a whole number >= 2")
                    elif value is not None:
                        thin[key] = value
            out["log_thinning"] = thin
        for key in ("starts", "seed"):
            if key in table:
                value = r.typed(table[key], format_path("fit", key), int)
                if value is not None:
                    if key == "starts" and value < 1:
                        r.error(format_path("fit", key), "must be at least 1", value, "an integer >= 1")
                    else:
                        out[key] = value
        return out


def parse_equivalents_safe(text: str) -> bool:
    """True when ``text`` is written in equivalents (valid or not)."""
    try:
        return parse_equivalents(text) is not None
    except ValueError:
        return True
