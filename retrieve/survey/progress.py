"""Survey progress: counts of objects waiting / running / done / failed, the status table, per-object logs.

The client keeps one :class:`SurveyProgress`.  Tasks announce that they
started through Dask's event log (:func:`announce`, topic :data:`TOPIC`),
results arrive as futures complete; each change prints one line such as::

    survey: 3/10 finished (1 skipped), 2 running, 1 failed, 4 waiting | hd_984: finished in 41 s

Each object's own log (fit messages, warnings, tracebacks) goes to
``SURVEY_DIR/_logs/<object>.log`` through :func:`object_log`.
"""
from __future__ import annotations

import contextlib
import datetime
import logging
import sys
import threading
import time
from pathlib import Path

from astropy.table import Table

TOPIC = "retrieve-survey"
LOG_DIR = "_logs"
STATES = ("waiting", "running", "finished", "failed")


def now_utc() -> str:
    return datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")


def announce(name: str, state: str, **extra) -> None:
    """Tell the survey client about an object's state (no-op outside a Dask worker)."""
    try:
        from distributed import get_worker
        worker = get_worker()
    except (ImportError, ValueError):
        return
    worker.log_event(TOPIC, {"object": name, "state": state, "worker": worker.address, **extra})


class SurveyProgress:
    """Thread-safe state of every object of a survey, printed as one line per change.

    Parameters
    ----------
    names : sequence of str
        Objects in catalogue order.
    stream : file-like or None
        Where progress lines go (None: silent).
    """

    def __init__(self, names, stream=sys.stderr):
        self.state = {n: "waiting" for n in names}
        self.detail = {n: {} for n in names}
        self.stream = stream
        self._lock = threading.Lock()
        self._t0 = time.monotonic()

    def counts(self) -> dict:
        with self._lock:
            out = {s: 0 for s in STATES}
            for s in self.state.values():
                out[s] += 1
            out["skipped"] = sum(1 for d in self.detail.values() if d.get("skipped"))
            return out

    def line(self, note: str = "") -> str:
        c = self.counts()
        total = len(self.state)
        text = (f"survey: {c['finished']}/{total} finished" + (f" ({c['skipped']} skipped)" if c["skipped"] else "")
                + f", {c['running']} running, {c['failed']} failed, {c['waiting']} waiting")
        return text + (f" | {note}" if note else "")

    def _print(self, note: str) -> None:
        if self.stream is not None:
            print(self.line(note), file=self.stream, flush=True)

    def running(self, name: str, worker: str = "") -> None:
        with self._lock:
            if self.state.get(name) != "waiting":
                return  # a late event after the result: keep the final state
            self.state[name] = "running"
            self.detail[name].update(worker=worker, started_utc=now_utc())
        self._print(f"{name}: started" + (f" on {worker}" if worker else ""))

    def done(self, name: str, outcome: dict) -> None:
        """Record a task's outcome (``status`` finished / failed, ``elapsed_s``, ``error``, ``skipped``)."""
        with self._lock:
            self.state[name] = "finished" if outcome.get("status") == "finished" else "failed"
            self.detail[name].update(outcome)
        if outcome.get("skipped"):
            note = f"{name}: already finished, skipped"
        elif self.state[name] == "finished":
            note = f"{name}: finished in {outcome.get('elapsed_s', float('nan')):.1f} s"
        else:
            note = f"{name}: FAILED ({outcome.get('error', '?')})"
        self._print(note)

    def ended(self, name: str, status: str) -> None:
        """A task says it ended: count it out of "running" now (its result, printed by :meth:`done`, follows).

        Events of one worker arrive in order, so this keeps "running" at most
        the number of worker threads even when the next task's start event
        overtakes the previous task's result.
        """
        with self._lock:
            if self.state.get(name) == "running":
                self.state[name] = "finished" if status == "finished" else "failed"

    def handle_event(self, event) -> None:
        """Handler for :meth:`distributed.Client.subscribe_topic` (event = (timestamp, message))."""
        _, msg = event
        if not isinstance(msg, dict):
            return
        if msg.get("state") == "running":
            self.running(str(msg.get("object")), str(msg.get("worker", "")))
        elif msg.get("state") == "ended":
            self.ended(str(msg.get("object")), str(msg.get("status", "")))

    def table(self) -> Table:
        """Status table: one row per object."""
        with self._lock:
            rows = [(n, s, str(d.get("error", "") or ""), bool(d.get("skipped", False)), bool(d.get("resumed", False)),
                     float(d.get("elapsed_s", float("nan"))), float(d.get("cpu_s", float("nan"))),
                     str(d.get("worker", "") or ""), str(d.get("finished_utc", "") or ""))
                    for (n, s), d in zip(self.state.items(), self.detail.values())]
        t = Table(rows=rows, names=("object", "status", "error", "skipped", "resumed", "elapsed_s", "cpu_s", "worker",
                                    "finished_utc"),
                  dtype=(str, str, str, bool, bool, float, float, str, str)) if rows else Table()
        if rows:
            t["elapsed_s"].unit = t["cpu_s"].unit = "s"
        return t


@contextlib.contextmanager
def object_log(path, name: str):
    """Send the ``retrieve`` loggers and Python warnings to ``path`` (appended) while the block runs."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    handler = logging.FileHandler(path, encoding="utf-8")
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    # a worker with several threads runs several objects at once: keep each log to its own thread
    thread = threading.get_ident()
    handler.addFilter(lambda record: record.thread == thread)
    loggers = [logging.getLogger("retrieve"), logging.getLogger("py.warnings")]
    old_levels = [lg.level for lg in loggers]
    for lg in loggers:
        lg.addHandler(handler)
        lg.setLevel(logging.INFO)
    logging.captureWarnings(True)
    log = logging.getLogger(f"retrieve.survey.{name}")
    try:
        yield log
    finally:
        logging.captureWarnings(False)
        for lg, level in zip(loggers, old_levels):
            lg.removeHandler(handler)
            lg.setLevel(level)
        handler.close()
