"""Read the result files of an output folder back for a report.

An output folder holds what ``fit``, ``sample`` and ``window`` wrote: the
least-squares result (:data:`RESULT_FILES` ``"fit"``), the posterior (HDF5)
and the pH window (JSON).  Each reader returns None when its file is absent
(the report then says "not run") and raises
:class:`~speciakin.errors.InputError` naming the file when it is present but
unreadable.  Input files are opened read-only.
"""

from __future__ import annotations

import json
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from speciakin.errors import InputError, Location

__all__ = ["RESULT_FILES", "find_result", "read_fit", "read_posterior", "read_window", "resolve_input"]

#: File names looked for in an output folder, per result, in order of preference.
RESULT_FILES: Mapping[str, tuple[str, ...]] = MappingProxyType({
    "fit": ("fit.json",),
    "posterior": ("posterior_samples.h5",),   # posterior.h5 is the sampler's checkpoint, not a result
    "window": ("window.json",),
})


def find_result(folder: Path, kind: str) -> Path | None:
    """The first existing file of ``RESULT_FILES[kind]`` in ``folder``, or None."""
    for name in RESULT_FILES[kind]:
        p = folder / name
        if p.is_file():
            return p
    return None


def _read_json(path: Path, what: str) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
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


def read_fit(folder: Path) -> tuple[Any, dict[str, Any]] | None:
    """The :class:`CampaignFitResult` of ``folder`` and its raw JSON, or None."""
    path = find_result(folder, "fit")
    if path is None:
        return None
    from speciakin.pipeline.fit import CampaignFitResult

    data = _read_json(path, "fit result")
    try:
        return CampaignFitResult.from_dict(data), data
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise InputError(f"the fit result is incomplete or malformed ({type(exc).__name__}: {exc})",
                         Location(file=str(path)), expected="fit.json as written by the fit command") from None


def read_posterior(folder: Path) -> Any | None:
    """The :class:`PosteriorResult` of ``folder``, or None."""
    path = find_result(folder, "posterior")
    if path is None:
        return None
    from speciakin.estimation.sampling import PosteriorResult

    try:
        return PosteriorResult.load(path)
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"the posterior file is incomplete or malformed ({type(exc).__name__}: {exc})",
                         Location(file=str(path)), expected="a file written by PosteriorResult.save") from None


def read_window(folder: Path) -> Any | None:
    """The :class:`WindowResult` of ``folder``, or None (a ``{"window": ...}`` wrapper is accepted)."""
    path = find_result(folder, "window")
    if path is None:
        return None
    from speciakin.decision.result import WindowResult

    data = _read_json(path, "window result")
    if "level" not in data and isinstance(data.get("window"), dict):
        data = data["window"]
    try:
        return WindowResult.from_dict(data)
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        raise InputError(f"the window result is incomplete or malformed ({type(exc).__name__}: {exc})",
                         Location(file=str(path)), expected="window.json as written by the window command") from None


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
    for p in (Path(recorded), folder / recorded):
        if p.exists():
            return p
    raise InputError(f"the {what} named in fit.json no longer exists", Location(file=str(folder / "fit.json"),
                     key=key), recorded, f"an existing path (or give --{key})")
