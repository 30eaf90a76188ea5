"""Run rounds of processes that write one history store at once (used by the tests and the benchmark).

Each round starts `writers` fresh interpreters that open a store that does not
exist yet at the same moment (a shared start time), through the public store
API (tests/helpers/store_writer.py) or through the real command line
(`python -m rfmeas.cli analyze ... --db`). A round's figures: how many writers
succeeded, which record ids they were told, and what the store holds.
"""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
WRITER = ROOT / "tests" / "helpers" / "store_writer.py"
SAMPLE_SET = ROOT / "sample_data" / "coupler-before"
START_DELAY_S = 1.0  # long enough for every interpreter of a round to be up before the start time


@dataclass
class Round:
    succeeded: int
    failures: list[str]
    told_ids: list[int]
    stored_ids: list[int]
    integrity: str
    orphans: int  # file rows without a record or without a blob
    elapsed_s: float

    @property
    def lost(self) -> int:
        """Records a writer was told were kept but that the store does not hold."""
        return len(set(self.told_ids) - set(self.stored_ids))


def _env() -> dict:
    return dict(os.environ, PYTHONPATH=str(ROOT), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")


def writer_command(db: Path, start: float, tag: str, via_cli: bool, count: int = 1) -> list[str]:
    if via_cli:
        # the CLI cannot wait for a start time: it is started at once, which already overlaps the writes
        return [sys.executable, "-m", "rfmeas.cli", "analyze", str(SAMPLE_SET), "--json", "--db", str(db)]
    return [sys.executable, str(WRITER), str(db), f"{start:.6f}", tag, str(count)]


def inspect(db: Path) -> tuple[list[int], str, int]:
    """(record ids, PRAGMA integrity_check, file rows without a record or blob) of a store."""
    conn = sqlite3.connect(db)
    try:
        ids = [r[0] for r in conn.execute("SELECT id FROM records ORDER BY id")]
        integrity = conn.execute("PRAGMA integrity_check").fetchone()[0]
        orphans = conn.execute(
            "SELECT count(*) FROM files f WHERE NOT EXISTS (SELECT 1 FROM records r WHERE r.id = f.record_id) "
            "OR NOT EXISTS (SELECT 1 FROM blobs b WHERE b.sha256 = f.sha256)").fetchone()[0]
    finally:
        conn.close()
    return ids, integrity, orphans


def run_round(folder: Path, writers: int, via_cli: bool = False, timeout_s: float = 300) -> Round:
    """`writers` processes create and write folder/history.sqlite3 at once."""
    folder.mkdir(parents=True, exist_ok=True)
    db = folder / "history.sqlite3"
    start = time.time() + START_DELAY_S
    t0 = time.perf_counter()
    procs = [subprocess.Popen(writer_command(db, start, f"w{i}", via_cli), stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True, env=_env(), cwd=folder)
             for i in range(writers)]
    succeeded, failures, told = 0, [], []
    for p in procs:
        out, err = p.communicate(timeout=timeout_s)
        if p.returncode in (0, 1):  # 1: the sample unit's design check fails, the record is kept
            succeeded += 1
            if not via_cli:  # analyze --json prints no record id: its rounds compare counts only
                told.extend(int(line) for line in out.split())
        else:
            failures.append(f"exit {p.returncode}: {err.strip()[-300:]}")
    elapsed = time.perf_counter() - t0
    ids, integrity, orphans = inspect(db)
    return Round(succeeded, failures, told, ids, integrity, orphans, elapsed)
