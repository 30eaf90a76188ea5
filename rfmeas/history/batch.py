"""Analyse many units in parallel and sum them up: pass/fail per unit, yield, spread of every value.

Each worker process returns only a small summary of its unit (names, values,
standard errors, status), never arrays, so memory stays flat however many
units there are. A unit that cannot be analysed is reported with its error
message and never stops the others.

Interrupts: workers ignore Ctrl-C; the parent catches it, kills its workers
and raises KeyboardInterrupt from a safe point (never from inside the pool's
locks). Workers die with their parent, even one killed with SIGKILL: on Linux
the kernel signals them (PR_SET_PDEATHSIG); on every POSIX system a watchdog
thread in each worker also notices that it was re-parented.
"""

from __future__ import annotations

import glob
import json
import logging
import multiprocessing
import os
import signal
import statistics
import sys
import threading
import time
from collections.abc import Callable, Iterable
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path

from rfmeas.io.atomic import atomic_write_text
from rfmeas.errors import EXIT_BAD_INPUT, EXIT_DESIGN_FAILED, EXIT_OK, InputError, RfmeasError
from rfmeas.history.store import design_status

log = logging.getLogger(__name__)

STATUSES = ("pass", "fail", "not judged", "no design", "error")
WATCHDOG_PERIOD_S = 0.5  # how often a worker checks that its parent is still there
POLL_S = 0.1             # how often the parent looks for a Ctrl-C while units run


def analyse_manifest(path: str):
    """The default analysis: rfmeas.analysis on one manifest (an Analysis, summarised in the worker)."""
    from rfmeas.analysis import analyze_manifest

    return analyze_manifest(path)


@dataclass(frozen=True)
class UnitOutcome:
    """One unit of the batch: its status and the values it produced (or why it produced none)."""

    path: str
    name: str | None
    status: str  # one of STATUSES
    error: str | None
    values: dict[str, float | None]
    stderrs: dict[str, float | None]
    warnings: tuple[str, ...] = ()
    record_id: int | None = None     # its record in the history store, when kept
    record_error: str | None = None  # why it was not kept, when keeping it was asked for and failed

    def to_dict(self) -> dict:
        return {"path": self.path, "name": self.name, "status": self.status, "error": self.error,
                "values": self.values, "stderrs": self.stderrs, "warnings": list(self.warnings),
                "record_id": self.record_id, "record_error": self.record_error}


@dataclass(frozen=True)
class Spread:
    """How one value varies over the units that have it (std: sample standard deviation)."""

    count: int
    mean: float
    std: float | None
    min: float
    max: float

    def to_dict(self) -> dict:
        return {"count": self.count, "mean": self.mean, "std": self.std, "min": self.min, "max": self.max}


@dataclass(frozen=True)
class BatchResult:
    """All units in input order, their spread, and the yield.

    yield_fraction = passed / (passed + failed + not judged + errors); units
    without a design check are left out; None when no unit has a design check.
    """

    units: tuple[UnitOutcome, ...]
    spread: dict[str, Spread]

    @property
    def counts(self) -> dict[str, int]:
        return {s: sum(1 for u in self.units if u.status == s) for s in STATUSES}

    @property
    def counted_for_yield(self) -> int:
        """The units a yield is taken over: passed, failed, not judged and not analysable."""
        c = self.counts
        return c["pass"] + c["fail"] + c["not judged"] + c["error"]

    @property
    def yield_fraction(self) -> float | None:
        c = self.counts
        if not c["pass"] + c["fail"] + c["not judged"]:
            return None
        return c["pass"] / self.counted_for_yield

    @property
    def exit_code(self) -> int:
        """2 if any unit could not be analysed, else 1 if any design check failed or could not be
        judged, else 0."""
        c = self.counts
        return EXIT_BAD_INPUT if c["error"] else EXIT_DESIGN_FAILED if c["fail"] + c["not judged"] else EXIT_OK

    def to_dict(self) -> dict:
        return {"units": [u.to_dict() for u in self.units], "counts": self.counts,
                "yield_fraction": self.yield_fraction,
                "spread": {k: s.to_dict() for k, s in self.spread.items()}}

    def to_csv(self) -> str:
        """One row per unit: path, name, status, error, then each value and its standard error,
        under headers with their units (rfmeas.present.csvout)."""
        from rfmeas.present.csvout import batch_csv

        return batch_csv(self)

    def write_json(self, path: str | Path) -> None:
        atomic_write_text(path, json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n")


def _entry_value(entry) -> tuple[float | None, float | None] | None:
    """(value, stderr) of a number or {"value", "stderr"}; None for anything else (text, flags)."""
    if isinstance(entry, dict):
        entry, stderr = entry.get("value"), entry.get("stderr")
    else:
        stderr = None
    if entry is not None and (isinstance(entry, bool) or not isinstance(entry, (int, float))):
        return None
    stderr = float(stderr) if isinstance(stderr, (int, float)) and not isinstance(stderr, bool) else None
    return (None if entry is None else float(entry)), stderr


def summarise(path: str, result) -> UnitOutcome:
    """The small per-unit summary a worker sends back, of an Analysis (its status as its
    DesignCheck gave it) or of a result dict of the JSON contract (its status read back)."""
    if isinstance(result, dict):
        status = design_status(result)
    else:
        status, result = result.design_status, result.to_dict()
    values, stderrs = {}, {}
    for section in ("parameters", "figures"):
        for key, entry in (result.get(section) or {}).items():
            q = _entry_value(entry)
            if q is None:
                continue
            name = key if key not in values else f"{section}.{key}"
            values[name], stderrs[name] = q
    return UnitOutcome(path=path, name=result.get("name"), status=status, error=None,
                       values=values, stderrs=stderrs, warnings=tuple(str(w) for w in result.get("warnings") or ()))


def _failed(path: str, message: str) -> UnitOutcome:
    return UnitOutcome(path=path, name=None, status="error", error=message, values={}, stderrs={})


def _kept(outcome: UnitOutcome, analysis, db: str | None, result: dict | None = None) -> UnitOutcome:
    """The outcome with the record id of `analysis` kept in the history store at `db` (None: the
    default store), or with why it could not be kept. A result given as a dict (no sweeps) is not kept."""
    from dataclasses import replace

    from rfmeas.history.store import keep_analysis

    if isinstance(analysis, dict):
        return outcome
    record_id, not_kept = keep_analysis(analysis, db, result)
    if not_kept is not None:
        return replace(outcome, record_error=f"{outcome.path}: not kept in the history: {not_kept}")
    return replace(outcome, record_id=record_id)


def _run_one(analyse: Callable[[str], object], path: str, record: bool = False,
             db: str | None = None) -> UnitOutcome:
    """Analyse one unit (and keep it in the history store when `record`); any failure of the
    analysis becomes an 'error' outcome carrying its message."""
    try:
        analysis = analyse(path)
        result = analysis if isinstance(analysis, dict) else analysis.to_dict()  # made once, for both
        outcome = summarise(path, result)
        return _kept(outcome, analysis, db, result) if record else outcome
    except RfmeasError as exc:
        return _failed(path, str(exc))
    except Exception as exc:  # a bug must not stop the lot; it is reported with its type
        log.exception("unit %s: unexpected failure", path)
        return _failed(path, f"{path}: internal error ({type(exc).__name__}: {exc})")


def spread_of(units: Iterable[UnitOutcome]) -> dict[str, Spread]:
    """Mean, sample standard deviation, min and max of every value over the units that have it."""
    columns: dict[str, list[float]] = {}
    for u in units:
        for key, value in u.values.items():
            if value is not None:
                columns.setdefault(key, []).append(value)
    return {key: Spread(len(v), statistics.fmean(v), statistics.stdev(v) if len(v) > 1 else None, min(v), max(v))
            for key, v in sorted(columns.items())}


def _worker_start(parent_pid: int) -> None:
    """Worker initializer: leave Ctrl-C to the parent, and die with the parent."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            PR_SET_PDEATHSIG = 1
            ctypes.CDLL(None, use_errno=True).prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL))
        except (OSError, AttributeError):  # no prctl: the watchdog below still works
            pass
    if os.getppid() != parent_pid:  # the parent died before the kernel could be told
        os._exit(1)

    def watchdog() -> None:
        while True:
            time.sleep(WATCHDOG_PERIOD_S)
            if os.getppid() != parent_pid:  # re-parented: the batch process is gone
                os._exit(1)

    threading.Thread(target=watchdog, name="parent-watchdog", daemon=True).start()


class _CtrlC:
    """While active (main thread only), Ctrl-C sets a flag instead of raising inside the pool's code."""

    def __init__(self):
        self.pressed = threading.Event()
        self._previous = None

    def __enter__(self) -> "_CtrlC":
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, lambda signum, frame: self.pressed.set())
        return self

    def __exit__(self, *exc) -> None:
        if self._previous is not None:
            signal.signal(signal.SIGINT, self._previous)


def _stop_workers(pool: ProcessPoolExecutor) -> None:
    """Cancel what has not started and kill the workers (their units are lost anyway)."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        if process.is_alive():
            process.kill()
    for process in processes:
        process.join(timeout=5)
    # Let the pool's manager thread finish closing its wake-up pipe now: at interpreter exit,
    # concurrent.futures writes to that pipe and would race the closing (a traceback on Ctrl-C).
    manager = getattr(pool, "_executor_manager_thread", None)
    if manager is not None:
        manager.join(timeout=5)


def run_batch(manifest_paths: Iterable[str | Path], workers: int | None = None,
              progress: Callable[[int, int, UnitOutcome], None] | None = None,
              analyse: Callable[[str], object] = analyse_manifest, record: bool = False,
              db: str | Path | None = None) -> BatchResult:
    """Analyse every manifest over `workers` processes (default: all cores); with `record`, each
    worker keeps its unit in the history store at `db` (None: the default store), as `analyze` does.

    `analyse` must be picklable (a module-level function); workers=1 runs in
    this process. `progress(done, total, outcome)` is called as each unit ends.
    Ctrl-C stops every worker at once and raises KeyboardInterrupt.
    """
    paths = [str(p) for p in manifest_paths]
    if workers is not None and workers < 1:
        raise InputError(f"--workers must be at least 1, not {workers}")
    total = len(paths)
    outcomes: dict[int, UnitOutcome] = {}

    def finished(index: int, outcome: UnitOutcome) -> None:
        outcomes[index] = outcome
        if progress is not None:
            progress(len(outcomes), total, outcome)

    workers = min(workers or os.cpu_count() or 1, max(total, 1))
    if workers == 1:
        for i, path in enumerate(paths):
            finished(i, _run_one(analyse, path, record, db))
    else:
        # Workers are direct children started afresh (not a plain fork: the progress bar's thread
        # is running here), so that they can be tied to this process's life.
        pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                   initializer=_worker_start, initargs=(os.getpid(),))
        with _CtrlC() as ctrl_c:
            try:
                db = None if db is None else str(db)
                futures = {pool.submit(_run_one, analyse, path, record, db): i for i, path in enumerate(paths)}
                pending = set(futures)
                while pending:
                    if ctrl_c.pressed.is_set():
                        raise KeyboardInterrupt
                    done, pending = wait(pending, timeout=POLL_S, return_when=FIRST_COMPLETED)
                    for future in sorted(done, key=futures.get):
                        i = futures[future]
                        try:
                            outcome = future.result()
                        except BrokenProcessPool:
                            outcome = _failed(paths[i], f"{paths[i]}: the worker process died (out of memory?)")
                        finished(i, outcome)
            except BaseException:
                _stop_workers(pool)
                raise
        pool.shutdown(wait=True)
    units = tuple(outcomes[i] for i in range(total))
    return BatchResult(units=units, spread=spread_of(units))


def find_manifests(targets: Iterable[str]) -> list[Path]:
    """Manifests named by folders (every *.toml below them), glob patterns or file paths."""
    found: list[Path] = []
    for target in targets:
        p = Path(target)
        if p.is_dir():
            matches = sorted(p.rglob("*.toml"))
        elif p.is_file():
            matches = [p]
        else:
            matches = sorted(Path(m) for m in glob.glob(target, recursive=True) if Path(m).is_file())
        if not matches:
            raise InputError("no manifest found (give a folder, a glob such as 'units/*.toml', or files)", path=target)
        found.extend(m for m in matches if m not in found)
    return found
