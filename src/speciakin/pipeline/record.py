"""One recorded piece of work: a result folder, its lock and status, and its row in the index.

Every command that writes results (``run``, ``fit``, ``sample``, ``window``,
``report``, ``suggest``) and any other front end wraps its work in
:class:`Recording`::

    from speciakin import pipeline

    inputs = pipeline.resolve_inputs("my-campaign")
    with pipeline.Recording(inputs, step="run", command="web: run") as rec:   # new folder, lock, index row
        pipeline.run_all(inputs, rec.folder, renderer=renderer)
    print(rec.folder, rec.status)                                             # ... complete

The folder is chosen and proven writable on entry, before any computation:
a new ``results/<UTC time stamp>-<short id>/`` of the campaign (default), an
explicit folder (refused when it already holds a file of the step), or an
interrupted folder to continue (``resume``).
"""

from __future__ import annotations

import os
import sqlite3
import time
from pathlib import Path
from typing import Any, Iterable

from speciakin.errors import InputError, Location
from speciakin.pipeline import folders, history, outputs

__all__ = ["Recording", "find_result", "key_results"]


def key_results(folder: Path) -> dict[str, Any]:
    """The key results of a folder for the index: window and its status, chi-square, convergence."""
    found: dict[str, Any] = {}
    for role, keys in (("window", ("primary_window", "status", "level")),
                       ("fit", ("statistics",)), ("posterior_summary", ("converged",))):
        path = outputs.result_path(folder, role)
        if not path.is_file():
            continue
        try:
            data = outputs.read_json(path, role)
        except InputError:
            continue
        for key in keys:
            value = data.get(key)
            if key == "statistics" and isinstance(value, dict):
                found["reduced_chi_square"] = value.get("reduced_chi_square")
            elif key != "statistics":
                found[("window_" if role == "window" and key != "primary_window" else "") + key] = value
    if "primary_window" in found:
        found["window"] = found.pop("primary_window")
    return found


def find_result(campaign: str | os.PathLike, given: str | os.PathLike | None = None, *,
                having: str | None = None, statuses: Iterable[str] = ("complete",), what: str = "result") -> Path:
    """An earlier result folder: the one given (a path, or a folder name / id prefix under the
    campaign's results folder), else the newest with one of ``statuses`` that holds ``having``.

    Raises
    ------
    InputError
        Nothing found (names the results folder and what was looked for).
    """
    root = folders.results_root(campaign)
    if given:
        p = Path(given)
        if p.is_dir():
            return p
        matches = [f for f in folders.result_folders(root) if f.name == str(given) or f.name.startswith(str(given))
                   or f.name.endswith(str(given))]
        if len(matches) == 1:
            return matches[0]
        raise InputError(f"no single earlier {what} of that name", Location(file=str(root)), str(given),
                         "a result folder, or the id of one listed by 'speciakin history'")
    found = folders.latest_result(root, statuses, having)
    if found is None:
        need = f" with {outputs.RESULT_FILES[having]}" if having else ""
        raise InputError(f"no {'/'.join(statuses)} result folder{need} to build on", Location(file=str(root)),
                         expected=f"run the earlier step first (or name a result folder)")
    return found


class Recording:
    """A result folder being written, with its lock, ``status.json`` and index row.

    Parameters
    ----------
    inputs
        :class:`~speciakin.pipeline.inputs.Inputs` (hashed into the index; the
        campaign's folder holds the index).
    step
        What is run: "run", "fit", "sample", "window", "report", "suggest".
    command
        The command line, or a function of the chosen folder that returns it
        (default: ``sys.argv`` with paths relative to the folder).
    out
        An explicit result folder (refused when it already holds one of ``writes``).
    resume
        An interrupted folder to continue (its stale lock is taken over).
    built_on
        The earlier result folder the work starts from; its files of
        ``carry`` are copied in so the new folder stands alone.
    seeds
        Seeds of the work, recorded in the index.
    writes, carry
        Result roles (keys of :data:`~speciakin.pipeline.outputs.RESULT_FILES`).
    """

    def __init__(self, inputs: Any, *, step: str, command: str | None = None, out: str | os.PathLike | None = None,
                 resume: str | os.PathLike | None = None, built_on: Path | None = None,
                 seeds: dict[str, Any] | None = None, writes: Iterable[str] = (), carry: Iterable[str] = ()) -> None:
        self.inputs = inputs
        self.step = step
        self.command = command
        self.out = out
        self.resume = resume
        self.built_on = Path(built_on) if built_on is not None else None
        self.seeds = seeds or {}
        self.writes = tuple(writes)
        self.carry = tuple(carry)
        self.root = folders.results_root(inputs.campaign)
        self.folder: Path = Path()
        self.id = ""
        self.status = "running"
        #: Plain-words notes (the index could not be written, ...).
        self.notes: list[str] = []
        self.timings: dict[str, float] = {}
        self._writer: folders.ResultWriter | None = None
        self._t0 = 0.0

    def _choose(self) -> tuple[Path, str]:
        """The folder and the run id (the folder's name when the folder is new)."""
        if self.resume is not None:
            folder = Path(self.resume)
            try:
                found = history.run_of_folder(self.root, folder)
            except (OSError, sqlite3.Error):
                found = None
            return folder, found or folders.new_id()
        if self.out is not None:
            folder = Path(self.out)
            folders.check_writable(folder)
            folders.check_free(folder, self.writes)
            return folder, folders.new_id()
        folder = folders.new_result_folder(self.root)
        return folder, folder.name

    def _index(self, call, *args, **kwargs) -> None:
        if self.root.resolve().is_relative_to(folders.PACKAGED_DEMO):  # results given --out; the package stays
            return                                                      # as shipped, so no index there
        try:
            call(*args, **kwargs)
        except (OSError, sqlite3.Error, InputError) as exc:
            self.notes.append(f"the run index {self.root / history.INDEX_FILE} was not updated: {exc}")

    def __enter__(self) -> "Recording":
        self.folder, self.id = self._choose()
        if callable(self.command):
            self.command = self.command(self.folder)
        command = self.command if self.command is not None else outputs.command_line(self.folder)
        self.command = command
        self._writer = folders.ResultWriter(self.folder, command, self.step, self.built_on,
                                            resume=self.resume is not None)
        self._writer.__enter__()
        self._t0 = time.perf_counter()
        if self.built_on is not None and self.carry:
            folders.carry_over(self.built_on, self.folder, self.carry)
        self._index(history.record_start, self.root, self.id, self.folder, step=self.step, command=command,
                    started=self._writer.status["started"], inputs=self.inputs, seeds=self.seeds,
                    built_on=self.built_on)
        return self

    def __exit__(self, kind, exc, tb) -> bool:
        if self._writer is None:
            return False
        self._writer.__exit__(kind, exc, tb)
        self.status = self._writer.status["status"]
        summary = key_results(self.folder)
        if not self.timings and outputs.result_path(self.folder, "timings").is_file():
            try:
                self.timings = dict(outputs.read_json(outputs.result_path(self.folder, "timings"), "timings"))
            except InputError:
                pass
        if self._writer.error:
            summary["error"] = self._writer.error
        self._index(history.record_end, self.root, self.id, status=self.status,
                    finished=self._writer.status["finished"], elapsed_s=time.perf_counter() - self._t0,
                    result_files=self._writer.files(), summary=summary, timings=self.timings)
        return False
