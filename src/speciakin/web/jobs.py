"""Jobs of the page: pipeline work in the background, with progress, time left and cancel.

A job is kept on the server, keyed by its id, so a reloaded page finds it
again.  Each job writes into its own new folder ``results/<stamp>-<id>``
(:func:`speciakin.web.paths.new_result_folder` refuses an existing one), so
two jobs never write into the same folder.

Execution: :class:`JobBoard` runs jobs in a thread pool of the server
process; :class:`speciakin.web.dask_jobs.DaskJobBoard` runs them on a Dask
cluster.  Both have the one interface the page uses (``submit``, ``get``,
``jobs``, ``cancel``).
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

__all__ = ["Job", "JobBoard", "JOB_KINDS", "fit_window_job"]

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

    def seconds_left(self, now: float | None = None) -> float | None:
        """Time left in the current stage [s], from its pace so far (None before the first step)."""
        if self.state != "running" or self.done <= 0 or self.total <= 0:
            return None
        spent = (now or time.time()) - self.stage_started
        return spent / self.done * max(self.total - self.done, 0)

    def view(self) -> dict[str, Any]:
        """Plain dict for the page."""
        left = self.seconds_left()
        return {"id": self.id, "kind": self.kind, "campaign": self.campaign, "folder": self.folder,
                "state": self.state, "stage": self.stage, "done": self.done, "total": self.total,
                "message": self.message, "seconds_left": left,
                "elapsed": (self.finished or time.time()) - self.created}


Work = Callable[[Job, Path, Path, Callable[[str, int, int], None]], str]


def fit_window_job(job: Job, campaign: Path, out: Path, progress: Callable[[str, int, int], None]) -> str:
    """check -> fit -> window (when the campaign has a process file); returns a one-line summary."""
    from speciakin import pipeline
    from speciakin.errors import DataError

    s = job.settings
    progress("check", 0, 1)
    inputs = pipeline.resolve_inputs(campaign)
    check = pipeline.check_step(inputs, out)
    if check.errors:
        raise DataError(problems=check.errors)
    progress("load", 0, 1)
    model, loaded, process = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, loaded)
    fit = pipeline.fit_step(objective, out, starts=s.get("starts"), profiles=bool(s.get("profiles")),
                            progress=progress, cancel=job.cancel)
    text = f"fit: chi-square {fit.fit.chisqr:.4g}, reduced {fit.fit.reduced_chisqr:.3g}"
    if process is not None:
        window = pipeline.window_step(objective, process, out, fit=fit, draws=s.get("draws"), progress=progress,
                                      cancel=job.cancel)
        text += "; window: " + pipeline.window_text(window)
    return text


#: Job kinds the page offers: name -> (label, work).
JOB_KINDS: dict[str, tuple[str, Work]] = {
    "fit": ("fit and window", fit_window_job),
}


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
        """Start a job of ``kind`` on ``campaign`` (a resolved folder inside the root)."""
        from speciakin.web.paths import new_result_folder

        if kind not in JOB_KINDS:
            raise KeyError(kind)
        job_id = secrets.token_hex(4)
        out = new_result_folder(campaign, job_id)
        job = Job(job_id, kind, campaign_name, str(out.relative_to(campaign)), dict(settings))
        with self._lock:
            if any(j.folder == job.folder and j.campaign == campaign_name for j in self._jobs.values()):
                raise FileExistsError(out)
            self._jobs[job_id] = job
        self._start(job, campaign, out)
        return job

    def _start(self, job: Job, campaign: Path, out: Path) -> None:
        """Hand the job to the executor (here the thread pool)."""
        self._pool.submit(self._run, job, campaign, out)

    def _run(self, job: Job, campaign: Path, out: Path) -> None:
        from speciakin.pipeline import Cancelled

        def progress(stage: str, done: int, total: int) -> None:
            if job.cancel.is_set():
                raise Cancelled(f"step '{stage}' cancelled")
            if stage != job.stage:
                job.stage, job.stage_started = stage, time.time()
            job.done, job.total = int(done), int(total)

        if job.cancel.is_set():
            job.state, job.message, job.finished = "cancelled", "cancelled before it started", time.time()
            return
        job.state = "running"
        try:
            job.message = JOB_KINDS[job.kind][1](job, campaign, out, progress)
            job.state = "done"
        except Cancelled as exc:
            job.state, job.message = "cancelled", f"cancelled ({exc}); files written so far stay in {job.folder}"
        except SpeciakinError as exc:
            job.state, job.message = "failed", str(exc)
        except Exception as exc:  # a bug: the page says so instead of hanging
            log.exception("job %s failed", job.id)
            job.state, job.message = "failed", f"unexpected error ({type(exc).__name__}): {exc}"
        finally:
            job.finished = time.time()

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
