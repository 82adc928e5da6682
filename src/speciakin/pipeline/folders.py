"""Result folders: one new folder per command, a lock while it is written, a status file after.

Layout (docs/workflow.md, "Result folders")::

    <campaign folder>/results/
        index.sqlite                      the index of every run (pipeline.history)
        20261203T130501.482913Z-3fa2c1/   one folder per run or step started alone
            .lock                         while it is written: pid, host, start time
            status.json                   running / complete / failed / interrupted, built_on
            fit.json, posterior.h5, ...   the results (pipeline.outputs.RESULT_FILES)

:func:`new_result_folder` creates a folder with a free name (``mkdir``
without ``exist_ok``: two processes never get the same folder);
:class:`ResultWriter` takes the lock (an ``O_CREAT | O_EXCL`` file), writes
``status.json`` and marks the folder complete, failed or interrupted when the
work ends.  A folder whose status says running while its lock names a process
that no longer exists on this host reads as interrupted (:func:`read_status`).
"""

from __future__ import annotations

import datetime as _dt
import errno
import json
import os
import re
import secrets
import shutil
import socket
import tempfile
import threading
from pathlib import Path
from typing import Any, Iterable

from speciakin.errors import InputError, Location
from speciakin.pipeline import outputs
from speciakin.pipeline.outputs import relative

__all__ = ["RESULTS_FOLDER", "STATUS_FILE", "LOCK_FILE", "results_root", "new_result_folder", "ResultWriter",
           "read_status", "result_folders", "latest_result", "check_writable", "check_free", "carry_over",
           "new_id", "start_order", "utc_now"]

#: Sub-folder of the campaign folder that holds the result folders and the index.
RESULTS_FOLDER = "results"
STATUS_FILE = "status.json"
LOCK_FILE = ".lock"
#: Statuses a folder can have (``running`` only while its lock is held).
STATUSES = ("running", "complete", "failed", "interrupted")


def utc_now() -> str:
    """The current UTC time, ISO 8601 to the second (``2026-12-03T13:05:01Z``)."""
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def campaign_folder(campaign: str | os.PathLike) -> Path:
    """The folder of a campaign (the campaign itself, or the folder of its workbook)."""
    c = Path(campaign)
    return c if c.is_dir() else c.parent


def results_root(campaign: str | os.PathLike) -> Path:
    """``<campaign folder>/results``: where the result folders and the index live."""
    return campaign_folder(campaign) / RESULTS_FOLDER


#: The demo campaign inside the installed package (speciakin.demo.demo_dir): never written into.
PACKAGED_DEMO = Path(__file__).resolve().parents[1] / "demo_data"


def check_writable(folder: Path) -> None:
    """Create ``folder`` if needed and prove that a file can be written into it.

    Raises
    ------
    InputError
        The folder cannot be created or written (exit code 2), before any work.
    """
    folder = Path(folder)
    if folder.resolve().is_relative_to(PACKAGED_DEMO):
        raise InputError("this folder is inside the demo campaign shipped with the speciakin package, which stays as "
                         "shipped", Location(file=str(folder)),
                         expected="a copy of the demo to work in: `speciakin demo --out DIR` (the whole demo job), "
                                  "or the demo's files copied to a folder of your own")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, probe = tempfile.mkstemp(prefix=".probe-", dir=folder)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise InputError(f"the output folder cannot be written: {exc.strerror or exc}", Location(file=str(folder)),
                         expected="a folder you may write into (or choose another with --out)") from None


def check_free(folder: Path, roles: Iterable[str]) -> None:
    """Refuse an explicit output folder that already holds a file this step would write.

    Raises
    ------
    InputError
        Names the first file that exists (exit code 2).
    """
    for role in roles:
        path = outputs.result_path(folder, role)
        taken = list(Path(folder).glob(path.name + ".*")) if role == "report" else ([path] if path.exists() else [])
        if taken:
            raise InputError("the output folder already holds this result; nothing is overwritten",
                             Location(file=str(taken[0])),
                             expected="a new or empty folder for --out (or leave out --out: every command "
                                      "then writes a new folder under <campaign>/results/)")


def _clock() -> _dt.datetime:
    """The current UTC time (a function of its own so that tests can hold the clock still)."""
    return _dt.datetime.now(_dt.timezone.utc)


_last_stamp: list[_dt.datetime] = []
_stamp_lock = threading.Lock()


def new_id() -> str:
    """``<UTC time stamp to the microsecond>-<6 hex digits>``: the name of a new result folder and the id of a run.

    Within one process the stamps strictly increase (a clock that repeats or
    steps back gives the previous stamp plus 1 microsecond), so the folder
    started last always sorts last, also within one second.
    """
    with _stamp_lock:
        now = _clock()
        if _last_stamp and now <= _last_stamp[0]:
            now = _last_stamp[0] + _dt.timedelta(microseconds=1)
        _last_stamp[:] = [now]
    return now.strftime("%Y%m%dT%H%M%S.%fZ") + "-" + secrets.token_hex(3)


#: ``<date>T<time>[.<microseconds>]Z-``: the start of a result folder's name (older versions wrote no microseconds).
_STAMP = re.compile(r"^(\d{8}T\d{6})(?:\.(\d{1,6}))?Z-")


def start_order(name: str) -> tuple[str, int, str]:
    """Sort key of a result folder name in the order the folders were started.

    Names from older versions (stamp to the second) sort as microsecond 0 of
    their second; names without a stamp (folders made by hand) sort first.
    """
    m = _STAMP.match(name)
    if m is None:
        return ("", 0, name)
    return (m.group(1), int((m.group(2) or "0").ljust(6, "0")), name)


def new_result_folder(root: str | os.PathLike) -> Path:
    """Create and return a new, empty result folder ``<root>/<UTC time stamp>-<short id>``.

    The web front end and any other caller use this to get a folder for
    :func:`speciakin.pipeline.run_all`; the name is taken with ``mkdir`` (no
    ``exist_ok``), so two processes never share a folder.

    Raises
    ------
    InputError
        ``root`` cannot be created or written.
    """
    root = Path(root)
    check_writable(root)
    for _ in range(100):
        folder = root / new_id()
        try:
            folder.mkdir()
        except FileExistsError:
            continue
        return folder
    raise InputError("no free result folder name", Location(file=str(root)), expected="a writable results folder")


# ------------------------------------------------------------------ lock and status
def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    except OSError:
        return False
    return True


def _read_lock(folder: Path) -> dict[str, Any] | None:
    try:
        return json.loads((Path(folder) / LOCK_FILE).read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (OSError, ValueError):
        return {}


def _lock_is_stale(lock: dict[str, Any]) -> bool:
    """A lock of this host whose process is gone (another host's lock is never judged stale)."""
    return lock.get("host") == socket.gethostname() and isinstance(lock.get("pid"), int) \
        and not _pid_alive(lock["pid"])


def read_status(folder: str | os.PathLike) -> dict[str, Any]:
    """The status of a result folder: ``status.json`` with ``status`` as it reads now.

    A folder left "running" whose lock is gone or names a dead process of this
    host reads as ``interrupted``; a folder without ``status.json`` (written
    by an older version, or by hand) reads as ``unknown``.
    """
    folder = Path(folder)
    try:
        data = json.loads((folder / STATUS_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {"status": "unknown"}
    if not isinstance(data, dict):
        return {"status": "unknown"}
    if data.get("status") == "running":
        lock = _read_lock(folder)
        if lock is None or _lock_is_stale(lock):
            data["status"] = "interrupted"
    return data


def result_folders(root: str | os.PathLike) -> list[Path]:
    """Result folders under ``root``, oldest first (in the order they were started: :func:`start_order`)."""
    root = Path(root)
    if not root.is_dir():
        return []
    return sorted((p for p in root.iterdir() if p.is_dir() and (p / STATUS_FILE).exists()),
                  key=lambda p: start_order(p.name))


def latest_result(root: str | os.PathLike, statuses: Iterable[str] = ("complete",),
                  having: str | None = None) -> Path | None:
    """The newest result folder under ``root`` with one of ``statuses`` (and the file of role ``having``)."""
    wanted = set(statuses)
    for folder in reversed(result_folders(root)):
        if read_status(folder)["status"] in wanted and (having is None or outputs.result_path(folder, having).exists()):
            return folder
    return None


def carry_over(source: Path, dest: Path, roles: Iterable[str]) -> list[str]:
    """Copy the result files of ``roles`` from ``source`` into ``dest`` (so ``dest`` stands alone)."""
    copied = []
    for role in roles:
        path = outputs.result_path(source, role)
        if path.is_file() and not outputs.result_path(dest, role).exists():
            shutil.copy2(path, outputs.result_path(dest, role))
            copied.append(path.name)
    return copied


class ResultWriter:
    """The lock and status of a result folder while a command writes it (a context manager).

    Parameters
    ----------
    folder
        The result folder (created if needed).
    command
        The command line, recorded in ``status.json``.
    step
        What writes the folder ("run", "fit", "sample", ...).
    built_on
        The earlier result folder this one builds on (recorded relative to ``folder``).
    resume
        Continue a folder left interrupted (its stale lock is taken over).

    Raises
    ------
    InputError
        The folder cannot be written, or another live process holds its lock.
    """

    def __init__(self, folder: str | os.PathLike, command: str, step: str, built_on: Path | None = None,
                 resume: bool = False) -> None:
        self.folder = Path(folder)
        self.command = command
        self.step = step
        self.built_on = built_on
        self.resume = resume
        self.status: dict[str, Any] = {}
        self.error: str | None = None

    @property
    def name(self) -> str:
        return self.folder.name

    def _take_lock(self) -> None:
        path = self.folder / LOCK_FILE
        text = json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "started": utc_now()})
        for attempt in (0, 1):
            try:
                fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                lock = _read_lock(self.folder) or {}
                if attempt == 0 and _lock_is_stale(lock):
                    path.unlink(missing_ok=True)
                    continue
                raise InputError("the result folder is being written by another process",
                                 Location(file=str(path)),
                                 f"pid {lock.get('pid')} on {lock.get('host')} since {lock.get('started')}",
                                 "wait for it to finish, or use another folder") from None
            except OSError as exc:
                if exc.errno in (errno.EACCES, errno.EROFS, errno.EPERM):
                    raise InputError(f"the output folder cannot be written: {exc.strerror}",
                                     Location(file=str(self.folder)), expected="a folder you may write into") from None
                raise
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(text)
            return

    def _write_status(self) -> None:
        outputs.write_json(self.folder / STATUS_FILE, self.status)

    def __enter__(self) -> "ResultWriter":
        check_writable(self.folder)
        self._take_lock()
        previous = read_status(self.folder) if (self.folder / STATUS_FILE).exists() else {}
        earlier = list(previous.pop("earlier", []))
        if previous and not self.resume:  # another step adds its files to this folder: keep what was there
            earlier.append(previous)
            previous = {}
        self.status = {
            "schema": "speciakin.status/1", "status": "running", "step": self.step,
            "command": self.command, "started": previous.get("started") or utc_now(), "finished": None,
            "built_on": None if self.built_on is None else relative(self.built_on, self.folder),
            "resumed": [*previous.get("resumed", []), utc_now()] if self.resume and previous else [],
            "error": None, "earlier": earlier,
        }
        self._write_status()
        return self

    def __exit__(self, kind, exc, tb) -> bool:
        if kind is None:
            state = "complete"
        elif issubclass(kind, KeyboardInterrupt):
            state = "interrupted"
        else:
            state = "failed"
        self.status.update(status=state, finished=utc_now(),
                           error=None if exc is None else (str(exc) or type(exc).__name__))
        self.error = self.status["error"]
        try:
            self._write_status()
        finally:
            (self.folder / LOCK_FILE).unlink(missing_ok=True)
        return False

    def files(self) -> list[str]:
        """The files in the folder now (relative names, the lock and status left out)."""
        return sorted(p.relative_to(self.folder).as_posix() for p in self.folder.rglob("*")
                      if p.is_file() and p.name not in (LOCK_FILE, STATUS_FILE) and not p.name.startswith(".probe-"))
