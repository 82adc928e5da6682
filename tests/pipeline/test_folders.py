"""Result folders, their lock and status, the run index and safe file stems (no computation)."""

from __future__ import annotations

import contextlib
import json
import multiprocessing
import os
import shutil
import signal
import socket
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from speciakin.errors import InputError
from speciakin.pipeline import folders, history
from speciakin.pipeline.inputs import Inputs
from speciakin.pipeline.outputs import safe_stems
from speciakin.pipeline.record import Recording, find_result


def _campaign(tmp_path: Path) -> Inputs:
    folder = tmp_path / "campaign"
    folder.mkdir()
    (folder / "runs.csv").write_text("invented,1\n")
    (folder / "model.toml").write_text("# invented\n")
    return Inputs(folder, folder / "model.toml")


# ------------------------------------------------------------------ slugs
def test_run_names_give_distinct_safe_stems():
    names = ["run_R/1", "run_R_1", "run_R 1", "run_" + "x" * 300, "run_R01"]
    stems = safe_stems(names)
    assert len(set(stems.values())) == len(names)
    assert stems["run_R01"] == "run_R01"                     # a plain name is kept as it is
    assert all(len(s) <= 80 and "/" not in s and " " not in s for s in stems.values())
    assert safe_stems(names) == stems                        # the same names give the same files


def test_stems_that_differ_only_in_case_are_distinct():
    # a case-insensitive file system (common on Windows and macOS) would merge them otherwise
    stems = safe_stems(["run_a", "run_A"])
    assert stems["run_a"].lower() != stems["run_A"].lower()


# ------------------------------------------------------------------ folders, lock, status
def test_new_folders_are_distinct_and_named_by_time(tmp_path):
    made = {folders.new_result_folder(tmp_path / "results") for _ in range(20)}
    assert len(made) == 20
    for folder in made:
        stamp, short = folder.name.split("-")
        # ISO 8601 basic format with a decimal fraction of the second: 20261203T130501.482913Z
        assert len(stamp) == 23 and stamp[15] == "." and stamp.endswith("Z") and len(short) == 6


def test_two_results_in_the_same_second_latest_is_the_last_started(tmp_path, monkeypatch):
    import datetime as dt

    # a clock held still inside one second (and even repeating the same microsecond)
    frozen = dt.datetime(2026, 12, 3, 13, 5, 1, 999999, tzinfo=dt.timezone.utc)
    monkeypatch.setattr(folders, "_clock", lambda: frozen)
    inputs = _campaign(tmp_path)
    started = []
    for _ in range(5):
        with Recording(inputs, step="fit", command="c") as rec:
            (rec.folder / "fit.json").write_text("{}")
        started.append(rec.folder)
    assert len({f.name[:15] for f in started}) == 1          # all five in one second
    root = tmp_path / "campaign" / "results"
    assert folders.result_folders(root) == started           # listed in the order they were started
    assert folders.latest_result(root) == started[-1]
    assert find_result(inputs.campaign, having="fit") == started[-1]
    listed = [r["id"] for r in history.list_runs(root)]      # history: newest first
    assert listed == [f.name for f in reversed(started)]


def test_older_names_without_microseconds_sort_by_time(tmp_path):
    # a result folder written by an earlier version (stamp to the second) among new ones
    for name in ("20261203T130500Z-aaaaaa", "20261203T130501.000002Z-bbbbbb", "20261203T130459.999999Z-cccccc"):
        (tmp_path / name).mkdir()
        (tmp_path / name / folders.STATUS_FILE).write_text('{"status": "complete"}')
    assert [f.name[-6:] for f in folders.result_folders(tmp_path)] == ["cccccc", "aaaaaa", "bbbbbb"]


def _make_folder(root: str, queue) -> None:
    queue.put(str(folders.new_result_folder(root)))


def test_two_processes_never_share_a_folder(tmp_path):
    ctx = multiprocessing.get_context("spawn")
    queue = ctx.Queue()
    procs = [ctx.Process(target=_make_folder, args=(str(tmp_path), queue)) for _ in range(4)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(60)
    names = [queue.get(timeout=5) for _ in procs]
    assert len(set(names)) == 4


def test_recording_marks_complete_failed_and_interrupted(tmp_path):
    inputs = _campaign(tmp_path)
    with Recording(inputs, step="fit", command="speciakin fit campaign") as ok:
        assert (ok.folder / folders.LOCK_FILE).exists()
        assert folders.read_status(ok.folder)["status"] == "running"
        (ok.folder / "fit.txt").write_text("invented")
    assert ok.status == "complete" and not (ok.folder / folders.LOCK_FILE).exists()
    assert ok.folder.parent == tmp_path / "campaign" / "results"

    with pytest.raises(ValueError):
        with Recording(inputs, step="fit", command="c") as bad:
            raise ValueError("invented failure")
    assert folders.read_status(bad.folder)["status"] == "failed"
    assert "invented failure" in folders.read_status(bad.folder)["error"]

    with pytest.raises(KeyboardInterrupt):
        with Recording(inputs, step="run", command="c") as stopped:
            raise KeyboardInterrupt
    assert folders.read_status(stopped.folder)["status"] == "interrupted"
    # the newest complete folder is the one to build on, never a failed or interrupted one
    assert find_result(inputs.campaign) == ok.folder
    runs = {r["id"]: r for r in history.list_runs(tmp_path / "campaign" / "results")}
    assert runs[ok.id]["status"] == "complete" and runs[ok.id]["result_files"] == ["fit.txt"]
    assert runs[bad.id]["status"] == "failed" and runs[stopped.id]["status"] == "interrupted"


def test_a_live_lock_is_respected_and_a_dead_one_reads_as_interrupted(tmp_path):
    folder = folders.new_result_folder(tmp_path)
    with folders.ResultWriter(folder, "c", "run"):
        with pytest.raises(InputError, match="being written by another process"):
            folders.ResultWriter(folder, "c", "run").__enter__()
    # a lock left by a process that is gone (killed): status running, pid dead -> interrupted
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    folders.outputs.write_json(folder / folders.STATUS_FILE, {"status": "running"})
    (folder / folders.LOCK_FILE).write_text(json.dumps({"pid": child.pid, "host": socket.gethostname(),
                                                        "started": folders.utc_now()}))
    assert folders.read_status(folder)["status"] == "interrupted"
    with folders.ResultWriter(folder, "c", "run", resume=True) as again:   # a stale lock is taken over
        assert again.status["status"] == "running"
    assert folders.read_status(folder)["status"] == "complete"


def test_an_explicit_folder_is_never_overwritten(tmp_path):
    inputs = _campaign(tmp_path)
    out = tmp_path / "mine"
    with Recording(inputs, step="fit", out=out, writes=("fit",), command="c"):
        (out / "fit.json").write_text("{}")
    with pytest.raises(InputError, match="already holds this result") as info:
        Recording(inputs, step="fit", out=out, writes=("fit",), command="c").__enter__()
    assert info.value.exit_code == 2
    # another step may add its own files to the folder; the earlier status is kept
    with Recording(inputs, step="window", out=out, writes=("window",), command="w"):
        pass
    status = folders.read_status(out)
    assert status["step"] == "window" and status["earlier"][0]["step"] == "fit"


@contextlib.contextmanager
def read_only(*paths: Path):
    """Folders nobody may write into, the super-user included (an immutable folder for root)."""
    root = os.geteuid() == 0
    if root and shutil.which("chattr") is None:
        pytest.skip("running as root without chattr: a folder cannot be made read-only")
    try:
        for p in paths:
            if root:
                subprocess.run(["chattr", "+i", str(p)], check=True)
            else:
                p.chmod(0o555)
        yield
    finally:
        for p in paths:
            if root:
                subprocess.run(["chattr", "-i", str(p)], check=False)
            else:
                p.chmod(0o755)


def test_read_only_output_folder_fails_before_any_work(tmp_path):
    inputs = _campaign(tmp_path)
    locked = tmp_path / "locked"
    locked.mkdir()
    results = inputs.campaign / "results"
    results.mkdir()
    with read_only(locked, results):
        for out in (locked / "out", locked, None):
            with pytest.raises(InputError, match="cannot be written") as info:
                Recording(inputs, step="fit", out=out, command="c").__enter__()
            assert info.value.exit_code == 2
    assert not any(locked.iterdir()) and not any(results.iterdir())


# ------------------------------------------------------------------ the index
def _record(root: str, n: int) -> None:
    for i in range(n):
        folder = Path(root) / f"f{os.getpid()}-{i}"
        history.record_start(Path(root), folder.name, folder, step="fit", command="c", started=folders.utc_now())
        history.record_end(Path(root), folder.name, status="complete", finished=folders.utc_now(), elapsed_s=0.0,
                           result_files=[], summary={}, timings={})


def test_index_takes_writes_from_two_processes(tmp_path):
    ctx = multiprocessing.get_context("spawn")
    procs = [ctx.Process(target=_record, args=(str(tmp_path), 25)) for _ in range(2)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(120)
    assert [p.exitcode for p in procs] == [0, 0]
    runs = history.list_runs(tmp_path)
    assert len(runs) == 50 and {r["status"] for r in runs} == {"complete"}
    with sqlite3.connect(tmp_path / history.INDEX_FILE) as con:
        assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def _record_at_once(root: str, run_id: str, barrier) -> None:
    barrier.wait()
    history.record_start(Path(root), run_id, Path(root) / run_id, step="run", command="c", started=folders.utc_now())


def test_two_processes_that_create_the_index_at_once_are_both_recorded(tmp_path):
    # Two `speciakin run` started together both create results/index.sqlite; switching the new file to
    # WAL answered "database is locked" at once in 6 of 40 such pairs before open_index waited and retried.
    ctx = multiprocessing.get_context("fork")
    for trial in range(40):
        root = tmp_path / f"trial{trial}"
        barrier = ctx.Barrier(2)
        procs = [ctx.Process(target=_record_at_once, args=(str(root), f"run{i}", barrier)) for i in range(2)]
        for p in procs:
            p.start()
        for p in procs:
            p.join(60)
        assert [p.exitcode for p in procs] == [0, 0], trial
        assert sorted(r["id"] for r in history.list_runs(root)) == ["run0", "run1"], trial


def test_index_records_inputs_with_their_sha256(tmp_path):
    import hashlib

    inputs = _campaign(tmp_path)
    with Recording(inputs, step="fit", command="c", seeds={"seed": 3}) as rec:
        pass
    run = history.find_run(inputs.campaign / "results", rec.id)
    by_path = {i["path"]: i for i in run["inputs"]}
    # SHA-256 of the file's bytes, as hashlib computes it (FIPS 180-4)
    assert by_path["../runs.csv"]["sha256"] == hashlib.sha256(b"invented,1\n").hexdigest()
    assert run["model_sha256"] == hashlib.sha256(b"# invented\n").hexdigest()
    assert run["seeds"] == {"seed": 3} and set(run["versions"]) == set(history.PACKAGES)
    assert run["versions"]["numpy"] == __import__("numpy").__version__


def test_killed_process_leaves_an_interrupted_folder(tmp_path):
    inputs = _campaign(tmp_path)
    code = ("import time; from pathlib import Path; from speciakin.pipeline.record import Recording;"
            "from speciakin.pipeline.inputs import Inputs\n"
            f"inputs = Inputs(Path({str(inputs.campaign)!r}), Path({str(inputs.model)!r}))\n"
            "with Recording(inputs, step='run', command='c') as rec:\n"
            "    print(rec.folder, flush=True)\n"
            "    time.sleep(120)\n")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)}
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True, env=env)
    folder = Path(proc.stdout.readline().strip())
    assert folders.read_status(folder)["status"] == "running"
    proc.send_signal(signal.SIGKILL)
    proc.wait(30)
    time.sleep(0.1)
    assert folders.read_status(folder)["status"] == "interrupted"
    from speciakin.pipeline.contrast import live_runs

    assert live_runs(inputs.campaign / "results")[0]["status"] == "interrupted"


def test_the_demo_shipped_in_the_package_is_never_written_into(capsys, tmp_path):
    """Results for the packaged demo are refused before any file is made (exit 2, the folder named)."""
    from speciakin.cli.main import main
    from speciakin.demo import demo_dir

    demo = demo_dir()
    before = sorted(p.relative_to(demo) for p in demo.rglob("*"))
    with pytest.raises(InputError, match="inside the demo campaign shipped with the speciakin package"):
        folders.new_result_folder(demo / folders.RESULTS_FOLDER)
    with pytest.raises(InputError, match="stays as shipped"):
        folders.check_writable(demo / "out" / "nested")
    assert main(["fit", str(demo), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "demo campaign shipped with the speciakin package" in err and "Traceback" not in err
    assert sorted(p.relative_to(demo) for p in demo.rglob("*")) == before
    # with --out elsewhere the fit is made, and the package gets no run index either
    assert main(["fit", str(demo), "--out", str(tmp_path / "out"), "--quiet", "--starts", "1", "--no-profiles"]) == 0
    assert (tmp_path / "out" / "fit.json").is_file()
    assert sorted(p.relative_to(demo) for p in demo.rglob("*")) == before


def test_the_recorded_command_names_a_new_output_folder(tmp_path, monkeypatch):
    # outputs never overwrite earlier results, so the command written into a result names its own
    # folder, when it was given with --out, as a new folder to make; inputs stay relative paths
    from speciakin.pipeline import outputs

    out, campaign = tmp_path / "res", tmp_path / "camp"
    out.mkdir()
    campaign.mkdir()
    monkeypatch.setattr("sys.argv", ["speciakin", "fit", str(campaign), "--out", str(out), "--starts", "2"])
    assert outputs.command_line(out) == f"speciakin fit ../camp --out {outputs.NEW_FOLDER} --starts 2"
    monkeypatch.setattr("sys.argv", ["speciakin", "report", str(out)])  # a folder read, not written
    assert outputs.command_line(out) == "speciakin report ."
