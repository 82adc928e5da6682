"""Jobs of the page: pipeline work in the background, with progress, time left and cancel.

A job is kept on the server, keyed by its id, so a reloaded page finds it
again.  Its work (:mod:`speciakin.web.job_kinds`) runs inside a
:class:`speciakin.pipeline.Recording`: a new result folder
``results/<UTC time>-<id>`` taken with ``mkdir`` (never an existing one, so
two jobs never write into the same folder), its lock and ``status.json``,
and a row in the campaign's results index, as for a command-line run.

Execution: :class:`JobBoard` runs jobs in a thread pool of the server
process; :class:`speciakin.web.dask_jobs.DaskJobBoard` runs them on a Dask
cluster.  Both have the one interface the page uses (``submit``, ``get``,
``jobs``, ``cancel``) and both run a job through :func:`perform`.
"""

from __future__ import annotations

import logging
import secrets
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from speciakin.errors import SpeciakinError
from speciakin.web.job_kinds import JOB_KINDS, clean_settings

__all__ = ["Job", "JobBoard", "JOB_KINDS", "Feedback", "perform"]

log = logging.getLogger(__name__)

#: Job states, in the order a job passes them.
STATES = ("queued", "running", "done", "failed", "cancelled")


@dataclass
class Job:
    """One job: what it does, where it writes, how far it is."""

    id: str
    kind: str
    campaign: str
    folder: str
    settings: dict[str, Any]
    state: str = "queued"
    stage: str = "waiting"
    done: int = 0
    total: int = 0
    message: str = ""
    created: float = field(default_factory=time.time)
    stage_started: float = field(default_factory=time.time)
    finished: float | None = None
    cancel: threading.Event = field(default_factory=threading.Event, repr=False)
    #: Plain-words notes of the recording (the index could not be written, ...).
    notes: list[str] = field(default_factory=list)
    #: Every stage the work has reported, in order (a stage shorter than the server's poll is kept too).
    stages: list[str] = field(default_factory=list)

    def seconds_left(self, now: float | None = None) -> float | None:
        """Time left in the current stage [s], from its pace so far (None before the first step)."""
        if self.state != "running" or self.done <= 0 or self.total <= 0:
            return None
        spent = (now or time.time()) - self.stage_started
        return spent / self.done * max(self.total - self.done, 0)

    def show(self, shown: dict[str, Any]) -> None:
        """Take the progress a worker reported (stage, done, total, folder, the stages so far)."""
        if shown.get("stage") and shown["stage"] != self.stage:
            self.stage, self.stage_started = shown["stage"], time.time()
        if shown.get("stages"):
            self.stages = list(shown["stages"])
        self.done, self.total = int(shown.get("done", 0)), int(shown.get("total", 0))
        if shown.get("folder"):
            self.folder = shown["folder"]

    def view(self) -> dict[str, Any]:
        """Plain dict for the page."""
        return {"id": self.id, "kind": self.kind, "label": JOB_KINDS[self.kind].label if self.kind in JOB_KINDS
                else self.kind, "campaign": self.campaign, "folder": self.folder, "state": self.state,
                "stage": self.stage, "stages": list(self.stages), "done": self.done, "total": self.total,
                "message": self.message,
                "seconds_left": self.seconds_left(), "elapsed": (self.finished or time.time()) - self.created,
                # a posterior until converged may stop before its cap: the time left is then an upper bound
                "at_most": self.stage == "sample" and bool(self.settings.get("until_converged"))}


class Feedback:
    """What a job's work reports: ``feedback(stage, done, total)`` and ``feedback.opened(folder)``.

    Parameters
    ----------
    campaign
        The campaign folder (the result folder is shown relative to it).
    cancel
        The job's cancel flag (``is_set()``); once set, the next call raises
        :class:`speciakin.pipeline.Cancelled`.
    publish
        Receives ``{"stage", "done", "total", "folder", "stages"}`` after every change (``stages``: every
        stage so far, in order, so that a reader polling less often than stages change misses none).
    """

    def __init__(self, campaign: Path, cancel, publish: Callable[[dict[str, Any]], None]) -> None:
        self.campaign = Path(campaign)
        self.cancel = cancel
        self.publish = publish
        self.shown: dict[str, Any] = {"stage": "", "done": 0, "total": 0, "folder": "", "stages": []}

    def __call__(self, stage: str, done: int, total: int) -> None:
        from speciakin.pipeline import Cancelled

        if self.cancel.is_set():
            raise Cancelled(f"step '{stage}' cancelled")
        if stage != self.shown["stage"]:
            self.shown["stages"] = [*self.shown["stages"], stage]
        self.shown.update(stage=stage, done=int(done), total=int(total))
        self.publish(dict(self.shown))

    def opened(self, folder: Path) -> None:
        """The job's result folder exists: show it (relative to the campaign)."""
        from speciakin.pipeline.outputs import relative

        self.shown["folder"] = relative(folder, self.campaign)
        self.publish(dict(self.shown))


def perform(job: Job, campaign: Path, feedback: Feedback) -> tuple[str, str]:
    """Run ``job``'s work; returns (state, message), state "done", "cancelled" or "failed".

    A cancelled job keeps the files its finished steps wrote (its folder reads
    "interrupted"); a failed one says why (a bad input names its file, sheet,
    row and column).
    """
    from speciakin.pipeline import Cancelled

    try:
        state, message = "done", JOB_KINDS[job.kind].work(job, campaign, feedback)
    except Cancelled as exc:  # never let the interrupt reach the thread or the worker itself
        state, message = "cancelled", f"cancelled ({exc})"
    except SpeciakinError as exc:
        state, message = "failed", str(exc)
    except Exception as exc:  # a bug: the page says so instead of hanging
        log.exception("job %s failed", job.id)
        state, message = "failed", f"unexpected error ({type(exc).__name__}): {exc}"
    notes = "".join(f"\nnote: {n}" for n in job.notes)
    return state, message + notes


class JobBoard:
    """The jobs of one server: submit, look up, cancel.

    Parameters
    ----------
    workers
        Jobs run at once; more wait in the queue.
    """

    def __init__(self, workers: int = 1) -> None:
        self._pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="speciakin-job")
        self._jobs: dict[str, Job] = {}
        self._lock = threading.Lock()

    def submit(self, kind: str, campaign_name: str, campaign: Path, settings: dict[str, Any]) -> Job:
        """Start a job of ``kind`` on ``campaign`` (a resolved folder inside the root).

        Raises
        ------
        InputError
            An unknown kind or a setting out of range (nothing is started).
        """
        job = Job(secrets.token_hex(4), kind, campaign_name, "", clean_settings(kind, settings))
        with self._lock:
            self._jobs[job.id] = job
        self._start(job, campaign)
        return job

    def _start(self, job: Job, campaign: Path) -> None:
        """Hand the job to the executor (here the thread pool)."""
        self._pool.submit(self._run, job, campaign)

    def _run(self, job: Job, campaign: Path) -> None:
        if job.cancel.is_set():
            job.state, job.message, job.finished = "cancelled", "cancelled before it started", time.time()
            return
        job.state = "running"
        try:
            job.state, job.message = perform(job, campaign, Feedback(campaign, job.cancel, job.show))
            self._after(job)
        finally:
            job.finished = time.time()

    @staticmethod
    def _after(job: Job) -> None:
        if job.state == "cancelled" and job.folder:
            job.message += f"; files written so far stay in {job.folder}"

    def get(self, job_id: str | None) -> Job | None:
        return self._jobs.get(str(job_id)) if job_id else None

    def jobs(self, campaign_name: str | None = None) -> list[Job]:
        """Jobs, newest first (of one campaign when named)."""
        found = [j for j in self._jobs.values() if campaign_name is None or j.campaign == campaign_name]
        return sorted(found, key=lambda j: j.created, reverse=True)

    def cancel(self, job_id: str) -> bool:
        """Ask a job to stop at its next progress point; False for an unknown or finished job."""
        job = self.get(job_id)
        if job is None or job.state not in ("queued", "running"):
            return False
        job.cancel.set()
        return True

    def shutdown(self) -> None:
        for job in self._jobs.values():
            job.cancel.set()
        self._pool.shutdown(wait=False, cancel_futures=True)
