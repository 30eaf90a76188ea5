"""`rfmeas batch` under Ctrl-C and kill -9, with real processes and signals.

The failures once seen: Ctrl-C during `batch --workers 2` hung (2 of 15
trials) or ended in "RuntimeError: release unlocked lock"; after kill -9 of
`batch` its workers ran on forever. Here Ctrl-C is sent to the whole process
group, as a terminal does, while both workers are busy.
"""

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-before"
UNITS = 24

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc, sends POSIX signals")


def descendants(pid: int) -> set[int]:
    """Every living process below `pid` (from /proc; zombies left out)."""
    children: dict[int, list[int]] = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2:].split()
        if fields[0] != "Z":
            children.setdefault(int(fields[1]), []).append(int(entry.name))
    found, todo = set(), [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            found.add(child)
            todo.append(child)
    return found


def alive(pids) -> set[int]:
    out = set()
    for pid in pids:
        try:
            state = Path(f"/proc/{pid}/stat").read_text()
        except OSError:
            continue
        if state[state.rindex(")") + 2] != "Z":
            out.add(pid)
    return out


@pytest.fixture
def lot(tmp_path):
    for i in range(UNITS):
        shutil.copytree(SAMPLE, tmp_path / f"unit{i:02d}")
    return tmp_path


def start_batch(lot, tmp_path):
    env = dict(os.environ, PYTHONPATH=str(ROOT), RFMEAS_DB=str(tmp_path / "h.sqlite3"),
               OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    proc = subprocess.Popen([sys.executable, "-m", "rfmeas.cli", "batch", str(lot), "--workers", "2", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
                            start_new_session=True)  # its own process group, as a shell job has
    deadline = time.monotonic() + 60
    while len(descendants(proc.pid)) < 2:  # both workers are up
        assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
        time.sleep(0.05)
    time.sleep(1.0)  # let them get into their units
    return proc


def test_ctrl_c_stops_the_workers_promptly_with_exit_130(lot, tmp_path):
    for trial in range(3):
        proc = start_batch(lot, tmp_path)
        workers = descendants(proc.pid)
        os.killpg(proc.pid, signal.SIGINT)
        try:
            out, err = proc.communicate(timeout=20)  # a hang fails here
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
            pytest.fail(f"trial {trial}: batch still running 20 s after Ctrl-C")
        assert proc.returncode == 130, err
        assert "Traceback" not in err and "RuntimeError" not in err, err
        assert "interrupted after" in err and out == ""
        deadline = time.monotonic() + 10
        while alive(workers) and time.monotonic() < deadline:
            time.sleep(0.1)
        assert not alive(workers)


def test_workers_die_with_a_killed_batch(lot, tmp_path):
    proc = start_batch(lot, tmp_path)
    workers = descendants(proc.pid)
    assert workers
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=10)
    proc.stdout.close()
    proc.stderr.close()
    deadline = time.monotonic() + 15
    while alive(workers) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert not alive(workers), f"workers still running after the batch was killed: {alive(workers)}"
