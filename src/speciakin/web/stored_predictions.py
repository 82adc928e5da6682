"""The fitted curves and bands of a result, computed once and kept in the result folder for the page.

The curves over the data (and their 5-95 % posterior band) are the
pipeline's predictions (:func:`speciakin.pipeline.predict_step`): for the demo
one simulation per run at the fitted parameters plus one per band draw,
seconds of work.  The page's jobs compute them as their last stage and write
them into the result folder as ``.page-predictions.json`` (hidden: not a
result file, neither listed nor downloadable); a result made otherwise (the
command line) gets the file the first time the page shows it.  Opening the
results tab is then a file read.

The file names what it was computed from: the SHA-256 of the result's
``fit.json`` and ``posterior.h5`` and of the campaign's input files (workbook,
CSV, model and process files), and the speciakin version.  When any of these
differs it is not used: the curves are computed again, exactly as
:func:`speciakin.pipeline.load_results` does, and the file rewritten
(atomically).  The page never writes outside the result folder.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Any, Callable

import numpy as np

from speciakin._json import dumps, format_tag, nan_from_null

__all__ = ["STORE_NAME", "FORMAT", "input_files", "fingerprint", "to_data", "from_data", "save", "load", "carry", "predictions_of"]

#: The file in a result folder (hidden: the page's store, not a result file).
STORE_NAME = ".page-predictions.json"
#: Version tag of the file.
FORMAT = format_tag("page-predictions", 1)
_RESULT_FILES = ("fit.json", "posterior.h5")
_ARRAYS = ("time", "titrant", "titrant_low", "titrant_high")
_MAPS = ("values", "low", "high")


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def input_files(campaign: Path) -> list[Path]:
    """The campaign's input files the curves may depend on (workbooks, CSV files, model and process files)."""
    from speciakin.web.paths import campaign_inputs

    return sorted(p for p in campaign_inputs(campaign) if p.is_file())


def fingerprint(result: Path, campaign: Path) -> dict[str, Any]:
    """What a result's curves are computed from: speciakin version and SHA-256 of every file they read."""
    from speciakin import __version__

    files = {f"result/{name}": _sha256(Path(result) / name) for name in _RESULT_FILES
             if (Path(result) / name).is_file()}
    files.update({f"campaign/{p.relative_to(campaign).as_posix()}": _sha256(p) for p in input_files(campaign)})
    return {"speciakin": __version__, "files": files}


# ------------------------------------------------------------------ PredictionSet <-> JSON data
def _array(value) -> np.ndarray | None:
    return None if value is None else np.asarray(nan_from_null(value), dtype=float)


def to_data(predictions) -> dict[str, Any]:
    """A :class:`~speciakin.pipeline.predictions.PredictionSet` as plain data (arrays as lists)."""
    import dataclasses

    return {"theta": predictions.theta, "source": predictions.source, "band_draws": predictions.band_draws,
            "band_quantiles": list(predictions.band_quantiles), "notes": list(predictions.notes),
            "runs": [dataclasses.asdict(r) for r in predictions.runs],
            "observations": [dataclasses.asdict(o) for o in predictions.observations]}


def from_data(data: dict[str, Any]):
    """The :class:`~speciakin.pipeline.predictions.PredictionSet` of :func:`to_data`'s data."""
    from speciakin.pipeline.predictions import Observation, PredictionSet, RunPrediction

    runs = []
    for r in data["runs"]:
        fields = dict(r)
        for key in _ARRAYS:
            fields[key] = _array(r.get(key))
        for key in _MAPS:
            fields[key] = None if r.get(key) is None else {k: _array(v) for k, v in r[key].items()}
        runs.append(RunPrediction(**fields))
    return PredictionSet(_array(data["theta"]), data["source"], runs,
                         [Observation(**o) for o in data["observations"]], band_draws=int(data["band_draws"]),
                         band_quantiles=tuple(data["band_quantiles"]), notes=list(data["notes"]))


# ------------------------------------------------------------------ the file
def save(result: Path, campaign: Path, predictions, stamp: dict[str, Any] | None = None) -> Path:
    """Write the curves of ``result`` (atomically) with the fingerprint of what they were computed from."""
    from speciakin._io import atomic_write_text

    stamp = stamp if stamp is not None else fingerprint(result, campaign)
    text = dumps({"format": FORMAT, "computed_from": stamp, "predictions": to_data(predictions)}, indent=None)
    return atomic_write_text(Path(result) / STORE_NAME, text)


def _read(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) and data.get("format") == FORMAT else None


def load(result: Path, campaign: Path, stamp: dict[str, Any] | None = None):
    """The stored curves of ``result``, or None when there are none or they were computed from other files."""
    data = _read(Path(result) / STORE_NAME)
    stamp = stamp if stamp is not None else fingerprint(result, campaign)
    if data is None or data.get("computed_from") != stamp:
        return None
    try:
        return from_data(data["predictions"])
    except (KeyError, TypeError, ValueError):
        return None


def carry(source: Path, result: Path, campaign: Path) -> bool:
    """Copy the stored curves of ``source`` into ``result`` when they hold for it too (the same fit and
    posterior files, the same inputs); True when copied."""
    data = _read(Path(source) / STORE_NAME)
    if data is None or data.get("computed_from") != fingerprint(result, campaign):
        return False
    from speciakin._io import atomic_write_bytes

    atomic_write_bytes(Path(result) / STORE_NAME, (Path(source) / STORE_NAME).read_bytes())
    return True


def predictions_of(result: Path, campaign: Path, compute: Callable[[], Any]):
    """The curves of ``result``: the stored ones when they hold, else ``compute()``, then stored.

    A store that cannot be written (a read-only folder) is skipped: the curves are still returned.
    """
    stamp = fingerprint(result, campaign)
    found = load(result, campaign, stamp)
    if found is not None:
        return found
    predictions = compute()
    try:
        save(result, campaign, predictions, stamp)
    except OSError:
        pass  # shown all the same; computed again next time
    return predictions
