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

import hashlib
import json
import os
import re
import shlex
import sys
from pathlib import Path
from types import MappingProxyType
from typing import Any, Iterable, Mapping

from speciakin import __version__
from speciakin._io import atomic_write_text
from speciakin._json import dumps
from speciakin.errors import InputError, Location

__all__ = ["RESULT_FILES", "FIGURES_FOLDER", "result_path", "write_json", "write_text", "read_json",
           "command_line", "relative", "recorded_path", "safe_stems", "check_as_recorded", "save_check", "save_fit",
           "load_fit", "load_fit_data", "save_posterior", "load_posterior", "save_window", "load_window",
           "save_timings", "resolve_input", "save_suggestion"]

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


def relative(path: str | os.PathLike, folder: str | os.PathLike) -> str:
    """``path`` written relative to ``folder`` (forward slashes), so that no output names the machine."""
    try:
        rel = os.path.relpath(os.path.abspath(path), os.path.abspath(folder))
    except ValueError:  # another drive (Windows): no relative form exists
        return Path(path).name
    return rel.replace(os.sep, "/")


def recorded_path(path: str, folder: Path) -> str:
    """An input path as an output records it: relative to ``folder`` when it names a file."""
    return relative(path, folder) if path and os.path.exists(path) else path


#: Longest file stem :func:`safe_stems` keeps before it shortens a name (characters).
MAX_STEM = 60


def safe_stems(names: Iterable[str]) -> dict[str, str]:
    """A distinct, safe file stem for each name (figure files of runs named by the chemist).

    Letters, digits, ``_``, ``-`` and ``.`` are kept, every other run of
    characters becomes ``_``; a stem that changed, is longer than
    :data:`MAX_STEM`, or equals another stem ignoring case gets ``-`` and the
    first 8 hex digits of the name's SHA-256, so ``R/1``, ``R_1`` and ``R 1``
    give three files and a 300-character name gives a short one.
    """
    names = list(dict.fromkeys(names))
    plain = {n: re.sub(r"[^A-Za-z0-9_.-]+", "_", n).strip(".") or "_" for n in names}
    counts: dict[str, int] = {}
    for stem in plain.values():
        counts[stem.lower()] = counts.get(stem.lower(), 0) + 1
    out = {}
    for name, stem in plain.items():
        if stem != name or len(stem) > MAX_STEM or counts[stem.lower()] > 1:
            stem = stem[:MAX_STEM] + "-" + hashlib.sha256(name.encode("utf-8")).hexdigest()[:8]
        out[name] = stem
    return out


def command_line(folder: str | os.PathLike | None = None) -> str:
    """The command that produced an output, for reproduction.

    With ``folder``, every argument that names an existing file or folder is
    written relative to ``folder`` (the result folder), so that the command
    names no path of the machine; it then reproduces the result when started
    from inside the result folder. The result folder itself (``--out``) is
    written as :data:`NEW_FOLDER`: outputs never overwrite earlier results, so
    a rerun needs a new folder.
    """
    args = sys.argv[1:]
    if folder is not None:
        args = [_as_recorded(a, folder, before) if a and not a.startswith("-") and os.path.exists(a) else a
                for before, a in zip(["", *args], args)]
    return " ".join(["speciakin", *(shlex.quote(a) for a in args)])


#: How :func:`command_line` writes the output folder it was given (a rerun must name a new one).
NEW_FOLDER = "NEW_FOLDER"


def _as_recorded(arg: str, folder: str | os.PathLike, option: str) -> str:
    rel = relative(arg, folder)
    return NEW_FOLDER if option == "--out" and rel == "." else rel


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


def _provenance(data: dict[str, Any], command: str | None, folder: Path | None = None) -> dict[str, Any]:
    data["software_version"] = __version__
    data["command"] = command if command is not None else command_line(folder)
    return data


def _save_json_and_text(folder: Path, json_role: str, text_role: str, result: Any, command: str | None,
                        extra: Mapping[str, Any] | None = None) -> None:
    write_json(result_path(folder, json_role), {**_provenance(result.to_dict(), command, folder), **(extra or {})})
    write_text(result_path(folder, text_role), result.report() + "\n")


def _malformed(path: Path, what: str, exc: Exception, expected: str) -> InputError:
    return InputError(f"the {what} is incomplete or malformed ({type(exc).__name__}: {exc})",
                      Location(file=str(path)), expected=expected)


# ------------------------------------------------------------------ check
def check_as_recorded(check: Any, folder: Path) -> Any:
    """A copy of a CheckReport whose file paths are written relative to ``folder``."""
    import dataclasses

    def shown(problem):
        loc = problem.location
        if not getattr(loc, "file", None):
            return problem
        return dataclasses.replace(problem, location=dataclasses.replace(loc, file=recorded_path(loc.file, folder)))

    return dataclasses.replace(check, source=recorded_path(str(check.source), folder),
                               model=None if check.model is None else recorded_path(str(check.model), folder),
                               problems=[shown(p) for p in check.problems])


def save_check(folder: Path, check: Any) -> Path:
    """``check.json`` of a :class:`~speciakin.data.validate.CheckReport` (paths relative to ``folder``)."""
    return write_json(result_path(folder, "check"), check_as_recorded(check, Path(folder)).to_dict())


# ------------------------------------------------------------------ fit
def save_fit(folder: Path, fit: Any, command: str | None = None) -> None:
    """``fit.json`` (schema in docs/workflow.md) and ``fit.txt`` of a CampaignFitResult.

    The model and campaign paths are written relative to ``folder`` (the
    folder can be moved together with its inputs and rendered again).
    """
    import dataclasses

    folder = Path(folder)
    shown = dataclasses.replace(
        fit, model_source=recorded_path(fit.model_source, folder),
        campaign_source=recorded_path(fit.campaign_source, folder))
    _save_json_and_text(folder, "fit", "fit_text", shown, command)


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
    the run); :meth:`PosteriorResult.save` adds the result's metadata and
    acceptance fractions to it.
    """
    folder = Path(folder)
    posterior.save(result_path(folder, "posterior"))
    _save_json_and_text(folder, "posterior_summary", "posterior_text", posterior, command)


def load_posterior(folder: Path) -> Any | None:
    """The PosteriorResult of ``folder``'s ``posterior.h5``, or None (no file, or a run not finished)."""
    path = result_path(folder, "posterior")
    if not path.is_file():
        return None
    from speciakin.estimation.checkpoint import read_checkpoint
    from speciakin.estimation.posterior_result import PosteriorResult

    return PosteriorResult.from_store(read_checkpoint(path), path)


# ------------------------------------------------------------------ suggestion
def save_suggestion(folder: Path, suggestion: Any, inputs: Any = None, command: str | None = None) -> None:
    """``suggest.json`` and ``suggest.txt`` of a SuggestResult (with the input paths when given)."""
    folder = Path(folder)
    data = _provenance(suggestion.to_dict(), command, folder)
    if inputs is not None:
        data["inputs"] = {"campaign": relative(inputs.campaign, folder), "model": relative(inputs.model, folder),
                          "process": None if inputs.process is None else relative(inputs.process, folder)}
    write_json(result_path(folder, "suggest"), data)
    write_text(result_path(folder, "suggest_text"), suggestion.report() + "\n")


# ------------------------------------------------------------------ window
def save_window(folder: Path, window: Any, command: str | None = None, process: str | os.PathLike | None = None
                ) -> None:
    """``window.json`` and ``window.txt`` of a WindowResult; with ``process`` (the process file it was
    computed for) its path relative to ``folder`` and its SHA-256, so that a later report names it."""
    folder = Path(folder)
    extra = ({"process": relative(process, folder), "process_sha256": _sha256(process)}
             if process and Path(process).is_file() else None)
    _save_json_and_text(folder, "window", "window_text", window, command, extra)


def window_process(folder: Path) -> Path | None:
    """The process file ``folder``'s ``window.json`` was computed for, when it is still there with the
    same bytes (SHA-256); None otherwise (an older window.json, a moved or edited file)."""
    path = result_path(Path(folder), "window")
    if not path.is_file():
        return None
    data = read_json(path, "window result")
    recorded, digest = data.get("process"), data.get("process_sha256")
    if not recorded or not digest:
        return None
    found = Path(os.path.normpath(Path(folder) / recorded))
    return found if found.is_file() and _sha256(found) == digest else None


def _sha256(path: str | os.PathLike) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


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
    (relative to the output folder, then as written: older files recorded
    paths relative to where the command was started).

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
    for p in (Path(os.path.normpath(Path(folder) / recorded)), Path(recorded)):
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
