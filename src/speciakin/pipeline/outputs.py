"""The output folder: the one list of result files, and save / load of every result.

Every step writes its results through this module and every reader (the
``report``, ``window`` and ``sample`` commands, a Python caller) reads them
back through it, so a file name or a format is spelled in one place.  JSON
files are strict (NaN -> null, numpy -> Python; :mod:`speciakin._json`); every
file is written atomically (:mod:`speciakin._io`).  A loader returns None when
its file is absent (the report then says "not run") and raises
:class:`~speciakin.errors.InputError` naming the file when it is present but
unreadable.

The posterior is one HDF5 file, ``posterior.h5``: the sampler's checkpoint
(continued by ``--resume``) that also holds the finished result
(:mod:`speciakin.estimation.checkpoint` describes the layout).
"""

from __future__ import annotations

import json
import os
import shlex
import sys
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from speciakin import __version__
from speciakin._io import atomic_write_text
from speciakin._json import dumps
from speciakin.errors import InputError, Location

__all__ = ["RESULT_FILES", "FIGURES_FOLDER", "result_path", "write_json", "write_text", "read_json",
           "command_line", "save_check", "save_fit", "load_fit", "load_fit_data", "save_posterior",
           "load_posterior", "save_window", "load_window", "save_timings", "resolve_input"]

#: Every file a step writes into the output folder, by role (docs/workflow.md lists them).
RESULT_FILES: Mapping[str, str] = MappingProxyType({
    "check": "check.json",
    "fit": "fit.json",
    "fit_text": "fit.txt",
    "posterior": "posterior.h5",
    "posterior_summary": "posterior.json",
    "posterior_text": "posterior.txt",
    "window": "window.json",
    "window_text": "window.txt",
    "suggest": "suggest.json",
    "suggest_text": "suggest.txt",
    "timings": "timings.json",
    "report": "report",            # report.html, report.pdf, report.xlsx
})
#: Sub-folder of the figures of each step.
FIGURES_FOLDER = "figures"


def result_path(folder: str | os.PathLike, role: str) -> Path:
    """Path of the file of ``role`` (a key of :data:`RESULT_FILES`) in ``folder``."""
    return Path(folder) / RESULT_FILES[role]


def command_line() -> str:
    """The command that produced an output, for reproduction."""
    return "speciakin " + " ".join(shlex.quote(a) for a in sys.argv[1:])


def write_text(path: str | os.PathLike, text: str) -> Path:
    """Write UTF-8 text atomically."""
    return atomic_write_text(path, text)


def write_json(path: str | os.PathLike, data: Any) -> Path:
    """Write strict JSON atomically (NaN -> null, numpy -> Python)."""
    return atomic_write_text(path, dumps(data))


def read_json(path: Path, what: str) -> dict[str, Any]:
    """A JSON object from ``path``; InputError naming the file when it cannot be read."""
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"cannot read the {what}: {exc.strerror or exc}", Location(file=str(path)),
                         expected=f"a readable {what}") from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        line = getattr(exc, "lineno", None)
        raise InputError(f"the {what} is not valid JSON: {getattr(exc, 'msg', exc)}",
                         Location(file=str(path), line=line), expected=f"the {what} as written by speciakin") from None
    if not isinstance(data, dict):
        raise InputError(f"the {what} does not hold a JSON object", Location(file=str(path)),
                         type(data).__name__, "a JSON object")
    return data


def _provenance(data: dict[str, Any], command: str | None) -> dict[str, Any]:
    data["software_version"] = __version__
    data["command"] = command if command is not None else command_line()
    return data


def _save_json_and_text(folder: Path, json_role: str, text_role: str, result: Any, command: str | None) -> None:
    write_json(result_path(folder, json_role), _provenance(result.to_dict(), command))
    write_text(result_path(folder, text_role), result.report() + "\n")


def _malformed(path: Path, what: str, exc: Exception, expected: str) -> InputError:
    return InputError(f"the {what} is incomplete or malformed ({type(exc).__name__}: {exc})",
                      Location(file=str(path)), expected=expected)


# ------------------------------------------------------------------ check
def save_check(folder: Path, check: Any) -> Path:
    """``check.json`` of a :class:`~speciakin.data.validate.CheckReport`."""
    return write_json(result_path(folder, "check"), check.to_dict())


# ------------------------------------------------------------------ fit
def save_fit(folder: Path, fit: Any, command: str | None = None) -> None:
    """``fit.json`` (schema in docs/workflow.md) and ``fit.txt`` of a CampaignFitResult."""
    _save_json_and_text(Path(folder), "fit", "fit_text", fit, command)


def load_fit_data(folder: Path) -> tuple[Any, dict[str, Any]] | None:
    """The :class:`~speciakin.pipeline.fit.CampaignFitResult` of ``folder`` and its raw JSON, or None."""
    path = result_path(folder, "fit")
    if not path.is_file():
        return None
    from speciakin.pipeline.fit import CampaignFitResult

    data = read_json(path, "fit result")
    try:
        return CampaignFitResult.from_dict(data), data
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise _malformed(path, "fit result", exc, "fit.json as written by the fit command") from None


def load_fit(folder: Path) -> Any | None:
    """The CampaignFitResult of ``folder``, or None."""
    entry = load_fit_data(folder)
    return None if entry is None else entry[0]


# ------------------------------------------------------------------ posterior
def save_posterior(folder: Path, posterior: Any, command: str | None = None) -> None:
    """Add the finished result to the sampler's ``posterior.h5``; write ``posterior.json`` / ``.txt``.

    The chain in the file is the sampler's checkpoint (written at the end of
    the run); only the result's metadata and acceptance fractions are added.
    """
    from speciakin.estimation.checkpoint import read_checkpoint, write_checkpoint

    folder = Path(folder)
    path = result_path(folder, "posterior")
    stored = read_checkpoint(path)
    # the metadata keeps NaN (Python's JSON reads it back); only the .json files are strict
    stored.result = {"metadata": posterior._metadata(), "acceptance_fraction": posterior.acceptance_fraction}
    write_checkpoint(path, stored)
    _save_json_and_text(folder, "posterior_summary", "posterior_text", posterior, command)


def load_posterior(folder: Path) -> Any | None:
    """The PosteriorResult of ``folder``'s ``posterior.h5``, or None (no file, or a run not finished)."""
    path = result_path(folder, "posterior")
    if not path.is_file():
        return None
    from speciakin.estimation.checkpoint import read_checkpoint
    from speciakin.estimation.diagnostics import ConvergenceDiagnostics
    from speciakin.estimation.sampling import ParameterSummary, PosteriorResult

    stored = read_checkpoint(path)
    if stored.result is None:
        return None
    try:
        meta = dict(stored.result["metadata"])
        chain = stored.chain
        samples = chain[meta["burn_in"]::meta["thin"]].reshape(-1, chain.shape[2])
        return PosteriorResult(chain=chain, log_prob=stored.log_prob,
                               acceptance_fraction=stored.result["acceptance_fraction"], samples=samples,
                               summary=[ParameterSummary(**s) for s in meta.pop("summary")],
                               diagnostics=ConvergenceDiagnostics(**meta.pop("diagnostics")), **meta)
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise _malformed(path, "posterior file", exc, "posterior.h5 as written by the sample command") from None


# ------------------------------------------------------------------ suggestion
def save_suggestion(folder: Path, suggestion: Any, inputs: Any = None, command: str | None = None) -> None:
    """``suggest.json`` and ``suggest.txt`` of a SuggestResult (with the input paths when given)."""
    data = _provenance(suggestion.to_dict(), command)
    if inputs is not None:
        data["inputs"] = {"campaign": str(inputs.campaign), "model": str(inputs.model),
                          "process": None if inputs.process is None else str(inputs.process)}
    write_json(result_path(folder, "suggest"), data)
    write_text(result_path(folder, "suggest_text"), suggestion.report() + "\n")


# ------------------------------------------------------------------ window
def save_window(folder: Path, window: Any, command: str | None = None) -> None:
    """``window.json`` and ``window.txt`` of a WindowResult."""
    _save_json_and_text(Path(folder), "window", "window_text", window, command)


def load_window(folder: Path) -> Any | None:
    """The :class:`~speciakin.decision.result.WindowResult` of ``folder``, or None
    (a ``{"window": {...}}`` wrapper is accepted)."""
    path = result_path(folder, "window")
    if not path.is_file():
        return None
    from speciakin.decision.result import WindowResult

    data = read_json(path, "window result")
    if "level" not in data and isinstance(data.get("window"), dict):  # a {"window": {...}} wrapper
        data = data["window"]
    try:
        return WindowResult.from_dict(data)
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise _malformed(path, "window result", exc, "window.json as written by the window command") from None


def save_timings(folder: Path, timings: Mapping[str, float]) -> Path:
    """``timings.json``: wall time of each step [s]."""
    return write_json(result_path(folder, "timings"), dict(timings))


# ------------------------------------------------------------------ inputs named by a result
def resolve_input(given: str | None, recorded: str | None, folder: Path, what: str, key: str) -> Path:
    """Path of an input file: the one given, else the one recorded in fit.json
    (as written, then relative to the output folder).

    Raises
    ------
    InputError
        Neither given nor recorded, or the file does not exist.
    """
    if given:
        p = Path(given)
        if not p.exists():
            raise InputError(f"{what} not found", Location(file=str(p)), expected="an existing file or folder")
        return p
    if not recorded:
        raise InputError(f"no {what} given and none recorded in fit.json", Location(key=key),
                         expected=f"--{key} PATH, or a fit.json in the output folder that names the {what}")
    for p in (Path(recorded), Path(folder) / recorded):
        if p.exists():
            return p
    raise InputError(f"the {what} named in fit.json no longer exists",
                     Location(file=str(result_path(folder, "fit")), key=key), recorded,
                     f"an existing path (or give --{key})")


def load_suggestion(folder: Path) -> dict[str, Any] | None:
    """The ``suggest.json`` body of ``folder`` as a dict (SuggestResult.to_dict()), or None when absent."""
    path = result_path(folder, "suggest")
    if not path.is_file():
        return None
    data = read_json(path, "suggestion result")
    if not isinstance(data.get("candidates"), list):
        raise _malformed(path, "suggestion result", KeyError("candidates"),
                         "suggest.json as written by the suggest command")
    return data
