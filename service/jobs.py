"""Background jobs: large assessments run off the request thread.

The request is validated in full before a job is queued (bad input is a 4xx
at once, never a failed job); the job then counts and assesses point by
point, recording progress in the ``jobs`` table, and ends ``done`` with the
assessment's id or ``failed`` with problem details. Each job keeps what
re-runs it (its request, and a file of its inline inputs, removed when it
ends), so the jobs of a process that stopped are queued again at the next
start (:meth:`JobRunner.resume`): none accepted with 202 is lost, and one
interrupted mid-way starts over (results are stored in one transaction at
the end, so nothing half-made remains).
"""

from __future__ import annotations

import logging
import threading
import time
from concurrent.futures import ThreadPoolExecutor

from service import runs
from service.engine.errors import EngineError
from service.store import sqlite

log = logging.getLogger("cycleledger.jobs")


def _drop_input(con, data_dir, job_id: str) -> None:
    """Remove an ended job's input file (its result or its error is stored)."""
    from service.store import parquet

    row = con.execute("SELECT input_file FROM jobs WHERE id = ?", (job_id,)).fetchone()
    if row is not None and row[0]:
        with sqlite.write(con):
            con.execute("UPDATE jobs SET input_file = NULL WHERE id = ?", (job_id,))
        parquet.remove(data_dir, row[0])


class JobRunner:
    """A small pool of worker threads (the kernels release the GIL)."""

    def __init__(self, data_dir, workers: int = 1, scheduler: str | None = None):
        self.data_dir = data_dir
        self.pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="cycleledger-job")
        self.scheduler = scheduler  # a Dask scheduler address: jobs' points run there
        self._client = None
        self._client_lock = threading.Lock()

    def _runner(self):
        """The Dask runner when a scheduler is configured (connected once)."""
        if not self.scheduler:
            return None
        from distributed import Client

        from service.batch.run import point_runner

        with self._client_lock:
            if self._client is None:
                self._client = Client(self.scheduler, timeout="30s")
            return point_runner(self._client)

    def submit_assessment(self, job_id: str, request: dict, load_channels, duration_s,
                          history_id, samples_file=None, *, project: str):
        """Queue an assessment in ``project``; ``load_channels()`` returns
        ``{name: MPa array}``."""
        return self.pool.submit(self._run, job_id, request, load_channels, duration_s,
                                history_id, samples_file, project)

    def resume(self, jobs: list[dict]) -> int:
        """Queue again the jobs a stopped process left (``sqlite.interrupted_jobs``)."""
        from service.store import parquet

        for job in jobs:
            stored, project = job["request"], job["project"]
            if job["kind"] == "assessment":
                names = stored["channels"]
                if stored["history_id"]:
                    def load(rel=stored["samples_file"], names=names):
                        return parquet.read_channels(self.data_dir, rel, names)
                else:
                    def load(rel=job["input_file"], names=names):
                        return parquet.read_channels(self.data_dir, rel, names)
                self.submit_assessment(job["id"], stored["body"], load, stored["duration_s"],
                                       stored["history_id"], stored["samples_file"],
                                       project=project)
            else:
                con = sqlite.connect(self.data_dir)
                try:
                    unit_set = sqlite.get_unit_stress_set(con, project,
                                                          stored["unit_stresses_id"])
                    if unit_set is None:
                        sqlite.update_job(con, job["id"], state="failed", error={
                            "title": "Unit stresses deleted", "detail": "the unit stresses "
                            "were deleted before the job ran"})
                        _drop_input(con, self.data_dir, job["id"])
                finally:
                    con.close()
                if unit_set is None:
                    continue
                import numpy as np

                loads = parquet.read_channels(self.data_dir, job["input_file"],
                                              unit_set["load_cases"])
                checked = {**stored["checked"],
                           "loads": np.stack([loads[c] for c in unit_set["load_cases"]])}
                self.submit_superposition(job["id"], project, unit_set, checked)
        if jobs:
            log.info("queued again %d job(s) left by a stopped process", len(jobs))
        return len(jobs)

    def _guarded(self, job_id: str, work, missing: dict) -> None:
        """Run ``work(con)`` as job ``job_id``: running, then done with what
        ``work`` returns ({column: value}) or failed with problem details.
        ``missing`` is the error when an input file was deleted meanwhile."""
        con = sqlite.connect(self.data_dir)
        try:
            sqlite.update_job(con, job_id, state="running")
            sqlite.update_job(con, job_id, state="done", **work(con))
        except FileNotFoundError:
            sqlite.update_job(con, job_id, state="failed", error=missing)
        except EngineError as exc:
            sqlite.update_job(con, job_id, state="failed",
                              error={"title": "Invalid input", "detail": exc.message,
                                     **runs.json_safe(exc.as_dict())})
        except Exception:
            log.exception("job %s failed", job_id)
            sqlite.update_job(con, job_id, state="failed",
                              error={"title": "Internal error",
                                     "detail": "the job failed; it has been logged"})
        finally:
            _drop_input(con, self.data_dir, job_id)
            con.close()

    @staticmethod
    def _progress(con, job_id: str):
        """A progress callback writing at most a few times a second."""
        last = [0.0]

        def progress(done: int, total: int) -> None:
            now = time.monotonic()
            if done == total or now - last[0] > 0.25:
                last[0] = now
                sqlite.update_job(con, job_id, points_done=done)
        return progress

    def _run(self, job_id, request, load_channels, duration_s, history_id,
             samples_file, project) -> None:
        def work(con):
            channels = load_channels()
            row = runs.run(con, self.data_dir, request, channels, duration_s, history_id,
                           progress=self._progress(con, job_id), samples_file=samples_file,
                           lookup=runs.store_lookup(con, project), project=project,
                           runner=self._runner())
            return {"assessment_id": row["id"]}

        self._guarded(job_id, work, {"title": "History deleted", "detail": f"history "
                                     f"{history_id} was deleted before the job ran"})

    def submit_superposition(self, job_id: str, project: str, unit_set: dict, checked: dict):
        """Queue a superposition (checked by ``superpositions.check_request``)."""
        return self.pool.submit(self._run_superposition, job_id, project, unit_set, checked)

    def _run_superposition(self, job_id, project, unit_set, checked) -> None:
        from service import superpositions

        def work(con):
            client = None
            if self.scheduler:
                self._runner()  # connects once
                client = self._client
            row = superpositions.run(con, self.data_dir, project, unit_set, checked,
                                     progress=self._progress(con, job_id), client=client)
            return {"superposition_id": row["id"]}

        self._guarded(job_id, work, {"title": "Unit stresses deleted", "detail": f"unit "
                                     f"stresses {unit_set['id']} were deleted before the job "
                                     f"ran"})

    def shutdown(self, wait: bool = True) -> None:
        self.pool.shutdown(wait=wait, cancel_futures=not wait)
        if self._client is not None:
            self._client.close()
            self._client = None
