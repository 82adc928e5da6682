"""Two recorded results side by side: inputs, parameters with intervals, window and its status.

:func:`runs_listing` is what ``speciakin history`` prints, :func:`contrast`
what ``speciakin contrast`` prints; both read the index
(:mod:`speciakin.pipeline.history`) and the result files of each folder.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Any

from speciakin.errors import InputError, Location
from speciakin.pipeline import folders, history, outputs

__all__ = ["live_runs", "runs_listing", "contrast", "contrast_text", "default_pair", "window_label"]


def _folder(root: Path, run: dict[str, Any]) -> Path:
    return Path(root) / run["folder"]


def live_runs(root: str | os.PathLike) -> list[dict[str, Any]]:
    """The index's runs, newest first, with ``status`` as the folder reads now
    (a "running" row whose process is gone reads as interrupted)."""
    runs = history.list_runs(root)
    for run in runs:
        if run["status"] == "running":
            state = folders.read_status(_folder(Path(root), run))["status"]
            run["status"] = state if state != "unknown" else "interrupted"
    return runs


def window_label(summary: dict[str, Any]) -> str:
    """``pH 5.10-6.40 (trusted)`` from a run's key results; "" without a window."""
    if "window" not in summary and "window_status" not in summary:
        return ""
    window = summary.get("window")
    text = "no window" if not window else f"pH {window[0]:.2f}-{window[1]:.2f}"
    status = summary.get("window_status")
    return text + (f" ({status})" if status else "")


def runs_listing(root: str | os.PathLike) -> str:
    """One line per run, newest first: time, id, step, status, window (and its status), command."""
    runs = live_runs(root)
    if not runs:
        return f"no runs recorded in {Path(root) / history.INDEX_FILE}"
    header = ["started (UTC)", "id", "step", "status", "window", "command"]
    rows = [[r["started"], r["id"], r["step"], r["status"], window_label(r["summary"]), r["command"]] for r in runs]
    return _table(header, rows)


def _table(header: list[str], rows: list[list[Any]]) -> str:
    cells = [[str(c) for c in header]] + [["" if c is None else str(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(header))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def _number(x: Any) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return f"{x:.4g}" if isinstance(x, (int, float)) else str(x)


def _interval(pair: Any) -> str:
    if not isinstance(pair, (list, tuple)) or len(pair) != 2:
        return "-"
    return f"[{_number(pair[0])}, {_number(pair[1])}]"


def _parameters(folder: Path) -> dict[str, str]:
    """``name -> "value [interval]"`` from the fit, then the posterior (median [2.5 %, 97.5 %])."""
    found: dict[str, str] = {}
    fit_path = outputs.result_path(folder, "fit")
    if fit_path.is_file():
        for p in outputs.read_json(fit_path, "fit result").get("parameters", []):
            profile = p.get("profile_interval")
            usable = isinstance(profile, list) and any(x is not None for x in profile)
            interval = profile if usable else p.get("covariance_interval")
            found[p["name"]] = f"{_number(p.get('value'))} {_interval(interval)}"
    post_path = outputs.result_path(folder, "posterior_summary")
    if post_path.is_file():
        for s in outputs.read_json(post_path, "posterior summary").get("summary", []):
            text = f"median {_number(s.get('median'))} {_interval([s.get('lower_95'), s.get('upper_95')])}"
            found[s["name"]] = found.get(s["name"], "-") + "; " + text
    return found


def _resolve(root: Path, key: str) -> dict[str, Any]:
    run = history.find_run(root, key)
    if run is None:
        raise InputError("no single recorded run with this id", Location(file=str(root / history.INDEX_FILE)), key,
                         "an id (or its first or last characters) listed by 'speciakin history'")
    return run


def default_pair(root: str | os.PathLike, a: str | None = None) -> tuple[str, str]:
    """The ids to contrast when not all are named: without ``a`` the two newest complete runs (the
    older as A); with ``a`` that run and the newest complete run other than it.  A ``report`` step
    renders the result it is built on and adds no number of its own, so reports are passed over while
    two other runs are there."""
    root = Path(root)
    live = [r for r in live_runs(root) if r["status"] == "complete"]
    analyses = [r["id"] for r in live if r.get("step") != "report"]
    complete = analyses if len(analyses) >= 2 else [r["id"] for r in live]
    if a is not None:
        first = _resolve(root, a)["id"]
        others = [i for i in complete if i != first]
        if not others:
            raise InputError("no other complete run recorded to set beside it", Location(
                file=str(root / history.INDEX_FILE)), a, "a second complete run ('speciakin history' lists them)")
        return first, others[0]
    if len(complete) < 2:
        raise InputError("fewer than two complete runs recorded", Location(file=str(root / history.INDEX_FILE)),
                         len(complete), "two complete runs ('speciakin history' lists them), or name A and B")
    return complete[1], complete[0]


def contrast(root: str | os.PathLike, a: str, b: str) -> dict[str, Any]:
    """Two runs side by side: {"runs", "inputs", "parameters", "window"} rows of (what, A, B, note)."""
    root = Path(root)
    runs = [_resolve(root, a), _resolve(root, b)]
    live = {r["id"]: r["status"] for r in live_runs(root)}
    general = [[key, *(live.get(r["id"], r["status"]) if key == "status" else r.get(key) for r in runs)]
               for key in ("id", "step", "status", "started", "command", "built_on")]
    general.insert(4, ["wall time [s]", *(_number(r.get("elapsed_s")) for r in runs)])
    general.append(["seeds", *(", ".join(f"{k} {v}" for k, v in r["seeds"].items() if v is not None) or "-"
                               for r in runs)])
    for package in history.PACKAGES:
        versions = [r["versions"].get(package) for r in runs]
        if versions[0] != versions[1]:
            general.append([f"{package} version", *versions])
    files = [{i["path"]: i for i in r["inputs"]} for r in runs]
    inputs = []
    for path in sorted(set(files[0]) | set(files[1])):
        x, y = files[0].get(path), files[1].get(path)
        note = ("only in B" if x is None else "only in A" if y is None
                else "same" if x["sha256"] == y["sha256"] else "CHANGED")
        inputs.append([path, *(None if f is None else f["sha256"][:12] for f in (x, y)), note])
    params = [_parameters(_folder(root, r)) for r in runs]
    parameters = [[name, params[0].get(name, "-"), params[1].get(name, "-")]
                  for name in dict.fromkeys([*params[0], *params[1]])]
    window = [["window", *(window_label(r["summary"]) or "not run" for r in runs)],
              ["probability level", *(_number(r["summary"].get("window_level")) for r in runs)],
              ["reduced chi-square", *(_number(r["summary"].get("reduced_chi_square")) for r in runs)],
              ["posterior converged", *(_number(r["summary"].get("converged")) for r in runs)]]
    return {"runs": general, "inputs": inputs, "parameters": parameters, "window": window}


def contrast_text(data: dict[str, Any]) -> str:
    """The side-by-side view as plain text (A = first run, B = second)."""
    parts = [_table(["", "A", "B"], data["runs"]), "",
             "Input files (SHA-256, first 12 hex digits):",
             _table(["file", "A", "B", ""], data["inputs"]) if data["inputs"] else "  none recorded", "",
             "Parameters (fit value [profile or covariance 95 % interval]; posterior median [2.5 %, 97.5 %]):",
             _table(["parameter", "A", "B"], data["parameters"]) if data["parameters"] else "  none", "",
             _table(["", "A", "B"], data["window"])]
    return "\n".join(parts)
