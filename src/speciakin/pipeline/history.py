"""The index of every run of a campaign: a small SQLite file beside the result folders.

``<campaign folder>/results/index.sqlite`` (standard library :mod:`sqlite3`)
holds one row per result folder in ``runs`` and one row per input file in
``inputs`` (schema in docs/workflow.md, "The index").  Every write is one
short transaction; the database is in WAL mode with a busy timeout, so two
processes that record at once wait for each other instead of failing.  A run
that could not be recorded (a read-only campaign folder) still has its
``status.json``; the index is a convenience for ``speciakin history``, never
the only record.
"""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
import time
from contextlib import closing
from importlib import metadata
from pathlib import Path
from typing import Any, Iterable

from speciakin.pipeline.outputs import relative

__all__ = ["INDEX_FILE", "PACKAGES", "open_index", "record_start", "record_end", "list_runs", "find_run",
           "run_of_folder", "input_files", "file_sha256", "package_versions"]

INDEX_FILE = "index.sqlite"
#: Packages whose versions every run records.
PACKAGES = ("numpy", "scipy", "lmfit", "emcee", "numba", "speciakin")
#: Seconds a writer waits for another process's transaction.
BUSY_TIMEOUT_S = 30.0

_SCHEMA = """
CREATE TABLE IF NOT EXISTS runs (
    id          TEXT PRIMARY KEY,   -- <UTC time>-<hex>: the result folder's name when the run made it
    folder      TEXT NOT NULL,      -- the result folder, relative to the index's folder
    step        TEXT NOT NULL,      -- run, fit, sample, window, report, suggest
    command     TEXT NOT NULL,
    status      TEXT NOT NULL,      -- running, complete, failed, interrupted
    started     TEXT NOT NULL,      -- UTC, ISO 8601
    finished    TEXT,
    elapsed_s   REAL,
    built_on    TEXT,               -- id of the result this one builds on
    seeds       TEXT,               -- JSON object
    versions    TEXT,               -- JSON object {package: version}
    model_sha256   TEXT,
    process_sha256 TEXT,
    result_files   TEXT,            -- JSON list of file names in the folder
    summary     TEXT,               -- JSON object: window, window status, chi-square, error
    timings     TEXT                -- JSON object {step: seconds}
);
CREATE TABLE IF NOT EXISTS inputs (
    run_id  TEXT NOT NULL REFERENCES runs(id),
    role    TEXT NOT NULL,          -- model, process, campaign
    path    TEXT NOT NULL,          -- relative to the index's folder
    sha256  TEXT NOT NULL,
    size    INTEGER NOT NULL,
    PRIMARY KEY (run_id, path)
);
"""


def file_sha256(path: str | os.PathLike) -> tuple[str, int]:
    """SHA-256 hex digest and size [bytes] of a file (NIST FIPS 180-4)."""
    digest = hashlib.sha256()
    size = 0
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            digest.update(chunk)
            size += len(chunk)
    return digest.hexdigest(), size


def package_versions() -> dict[str, str | None]:
    """Installed versions of :data:`PACKAGES` (None when one is not installed)."""
    found: dict[str, str | None] = {}
    for name in PACKAGES:
        try:
            found[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            found[name] = None
    if found.get("speciakin") is None:
        from speciakin import __version__

        found["speciakin"] = __version__
    return found


def input_files(inputs: Any) -> list[tuple[str, Path]]:
    """``(role, path)`` of every input file: the model (and ``other_models`` when given), the process
    and the campaign's files.

    A campaign folder contributes its files (not the ``results`` folder, not
    hidden files, not the model and process files counted above).
    """
    files: list[tuple[str, Path]] = [("model", Path(inputs.model))]
    files += [("model", Path(p)) for p in getattr(inputs, "other_models", ())]  # compare: several model files
    if inputs.process is not None:
        files.append(("process", Path(inputs.process)))
    campaign = Path(inputs.campaign)
    seen = {p.resolve() for _, p in files}
    if campaign.is_dir():
        for p in sorted(campaign.iterdir()):
            if p.is_file() and not p.name.startswith((".", "~$")) and p.resolve() not in seen:
                files.append(("campaign", p))
    elif campaign.is_file():
        files.append(("campaign", campaign))
    return files


def open_index(root: str | os.PathLike) -> sqlite3.Connection:
    """The index in ``root`` (created with its tables if new), WAL mode, busy timeout."""
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    con = sqlite3.connect(root / INDEX_FILE, timeout=BUSY_TIMEOUT_S, isolation_level=None)
    con.execute(f"PRAGMA busy_timeout={int(BUSY_TIMEOUT_S * 1000)}")
    # Switching a new file to WAL takes an exclusive lock, and SQLite answers "database is locked"
    # at once (without its busy wait) when another process opens the same new file at that moment:
    # wait and try again, as the busy timeout would.
    deadline = time.monotonic() + BUSY_TIMEOUT_S
    while True:
        try:
            con.execute("PRAGMA journal_mode=WAL")
            con.executescript("BEGIN IMMEDIATE;" + _SCHEMA + "COMMIT;")
            return con
        except sqlite3.OperationalError as exc:
            if con.in_transaction:
                con.execute("ROLLBACK")
            if "locked" not in str(exc) or time.monotonic() > deadline:
                con.close()
                raise
            time.sleep(0.02)


def _write(root: Path, statements: Iterable[tuple[str, tuple]]) -> None:
    with closing(open_index(root)) as con:
        con.execute("BEGIN IMMEDIATE")
        try:
            for sql, params in statements:
                con.execute(sql, params)
        except BaseException:
            con.execute("ROLLBACK")
            raise
        con.execute("COMMIT")


def record_start(root: Path, run_id: str, folder: Path, *, step: str, command: str, started: str, inputs: Any = None,
                 seeds: dict[str, Any] | None = None, built_on: Path | None = None) -> None:
    """Add (or, on resume, refresh) the row of a result folder, with its input files and their SHA-256."""
    root = Path(root)
    rows = []
    if inputs is not None:
        for role, path in input_files(inputs):
            sha, size = file_sha256(path)
            rows.append((role, relative(path, root), sha, size))
    sha_of = {role: sha for role, _, sha, _ in rows if role in ("model", "process")}
    statements: list[tuple[str, tuple]] = [
        ("INSERT INTO runs (id, folder, step, command, status, started, built_on, seeds, versions, "
         "model_sha256, process_sha256) VALUES (?, ?, ?, ?, 'running', ?, ?, ?, ?, ?, ?) "
         "ON CONFLICT(id) DO UPDATE SET status='running', command=excluded.command",
         (run_id, relative(folder, root), step, command, started,
          None if built_on is None else Path(built_on).name, json.dumps(seeds or {}),
          json.dumps(package_versions()), sha_of.get("model"), sha_of.get("process")))]
    statements += [("INSERT OR REPLACE INTO inputs (run_id, role, path, sha256, size) VALUES (?, ?, ?, ?, ?)",
                    (run_id, *row)) for row in rows]
    _write(root, statements)


def record_end(root: Path, run_id: str, *, status: str, finished: str, elapsed_s: float,
               result_files: list[str], summary: dict[str, Any], timings: dict[str, float]) -> None:
    """Close the row of a result folder: status, time, files and the key results."""
    _write(Path(root), [("UPDATE runs SET status=?, finished=?, elapsed_s=?, result_files=?, summary=?, timings=? "
                         "WHERE id=?", (status, finished, float(elapsed_s), json.dumps(result_files),
                                        json.dumps(summary), json.dumps(timings), run_id))])


def _row(con: sqlite3.Connection, row: sqlite3.Row) -> dict[str, Any]:
    data = dict(row)
    for key in ("seeds", "versions", "result_files", "summary", "timings"):
        data[key] = json.loads(data[key]) if data.get(key) else ({} if key != "result_files" else [])
    data["inputs"] = [dict(r) for r in con.execute(
        "SELECT role, path, sha256, size FROM inputs WHERE run_id=? ORDER BY role, path", (data["id"],))]
    return data


def list_runs(root: str | os.PathLike) -> list[dict[str, Any]]:
    """Every recorded run, newest first (each with its ``inputs``); [] when there is no index."""
    root = Path(root)
    if not (root / INDEX_FILE).exists():
        return []
    with closing(sqlite3.connect(root / INDEX_FILE, timeout=BUSY_TIMEOUT_S)) as con:
        con.row_factory = sqlite3.Row
        return [_row(con, r) for r in con.execute("SELECT * FROM runs ORDER BY started DESC, rowid DESC").fetchall()]


def run_of_folder(root: str | os.PathLike, folder: Path) -> str | None:
    """The id of the newest run recorded for ``folder`` (to continue it), or None."""
    wanted = relative(folder, root)
    return next((r["id"] for r in list_runs(root) if r["folder"] == wanted), None)


def find_run(root: str | os.PathLike, key: str) -> dict[str, Any] | None:
    """The run whose id is ``key`` or starts with it (None when none or several match)."""
    matches = [r for r in list_runs(root) if r["id"] == key]
    if not matches:
        matches = [r for r in list_runs(root) if r["id"].startswith(key) or r["id"].endswith(key)]
    return matches[0] if len(matches) == 1 else None
