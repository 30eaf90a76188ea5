"""`rfmeas batch` over simulated units: units/s with 1 and 2 workers, peak memory for 50 and 200 units.

Every unit is an invented 1:3 transformer (the reference circuit of
tests/fitting_helpers with a few per cent of lot spread), four sweeps of
POINTS points from rfmeas's closed-form model plus 1e-3 rms noise, written
as Touchstone files with a manifest. Each run is a fresh interpreter; while it
runs, the peak resident memory (VmHWM) of it and of every worker process is
read from /proc, so the figures cover the whole process tree.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from reference import model_response
from rfmeas.io.touchstone import write_touchstone
from rfmeas.model import TransformerParams

REPO_ROOT = Path(__file__).resolve().parents[2]
POINTS = 401
LOTS = (50, 200)
WORKERS = (1, 2)
# memory "flat": the lot of 200 may peak at most this much above the lot of 50
FLAT_MB = 20.0
RUNNER = """
import json, sys, time
from rfmeas.history.batch import run_batch
paths = sys.argv[2:]
t0 = time.perf_counter()
result = run_batch(paths, workers=int(sys.argv[1]))
print(json.dumps({"elapsed_s": time.perf_counter() - t0, "counts": result.counts}))
"""
MANIFEST = """[transformer]
name = "bench unit {index}"
primary_turns = 4
secondary_turns = 12

[design]
source_impedance_ohm = 50
load_impedance_ohm = 450
lowest_frequency_Hz = 3.5e6
highest_frequency_Hz = 20e6
reactance_factor = 4
{sweeps}"""
SWEEPS = {
    "pri_open": ("pri_open.s1p", 'port1 = "primary"\ntermination = "open"'),
    "pri_short": ("pri_short.s1p", 'port1 = "primary"\ntermination = "short"'),
    "sec_open": ("sec_open.s1p", 'port1 = "secondary"\ntermination = "open"'),
    "thru": ("thru.s2p", 'port1 = "primary"\nport2 = "secondary"'),
}


def write_units(folder: Path, count: int) -> list[Path]:
    rng = np.random.default_rng(21)
    f_Hz = np.logspace(5, 8, POINTS)
    paths = []
    for i in range(count):
        spread = {k: v * (1 + 0.03 * rng.standard_normal()) for k, v in REFERENCE_CIRCUIT.items() if k != "k"}
        params = TransformerParams(k=REFERENCE_CIRCUIT["k"], **spread)
        unit = folder / f"unit-{i:03d}"
        unit.mkdir(parents=True)
        measurement = simulated_set(params, f_Hz, rng=rng, simulate=model_response, forward_only=False)
        entries = []
        for sweep, (name, (file_name, keys)) in zip(measurement.sweeps, SWEEPS.items()):
            write_touchstone(sweep.network, unit / file_name, comments=["simulated bench unit"])
            entries.append(f'\n[[sweep]]\nfile = "{file_name}"\n{keys}\n')
        (unit / "manifest.toml").write_text(MANIFEST.format(index=i, sweeps="".join(entries)))
        paths.append(unit / "manifest.toml")
    return paths


def _descendants(root: int) -> set[int]:
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        ppid = int(stat.rsplit(")", 1)[1].split()[1])
        children.setdefault(ppid, []).append(int(entry))
    found, todo = set(), [root]
    while todo:
        pid = todo.pop()
        found.add(pid)
        todo.extend(children.get(pid, []))
    return found


def _peak_kB(pid: int) -> int | None:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1])
    except OSError:
        return None
    return None


def run_lot(paths: list[Path], workers: int, extra_env: dict | None = None) -> dict:
    """Run the batch in a fresh interpreter; elapsed time and peak memory of its process tree."""
    env = dict(os.environ, **(extra_env or {}))
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(REPO_ROOT), os.environ.get("PYTHONPATH")) if p)
    proc = subprocess.Popen([sys.executable, "-c", RUNNER, str(workers), *map(str, paths)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    peaks: dict[int, int] = {}
    while proc.poll() is None:
        for pid in _descendants(proc.pid):
            kB = _peak_kB(pid)
            if kB is not None:
                peaks[pid] = max(peaks.get(pid, 0), kB)
        time.sleep(0.02)
    out, err = proc.communicate()
    assert proc.returncode == 0, err
    report = json.loads(out.strip().splitlines()[-1])
    main_kB = peaks.pop(proc.pid, 0)
    report["main_MB"] = main_kB / 1024
    report["worker_MB"] = max(peaks.values(), default=0) / 1024
    report["total_MB"] = (main_kB + sum(peaks.values())) / 1024
    return report


@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads peak memory from Linux /proc")
def test_batch_throughput_and_memory(tmp_path):
    paths = write_units(tmp_path / "lot", max(LOTS))
    rows = {}
    print(f"\nbatch, four sweeps x {POINTS} points per unit, {os.cpu_count()} cores:")
    for workers in WORKERS:
        for lot in LOTS:
            r = run_lot(paths[:lot], workers)
            assert r["counts"]["error"] == 0, r["counts"]
            rate = lot / r["elapsed_s"]
            rows[workers, lot] = dict(r, rate=rate)
            print(f"  workers {workers}, {lot} units: {rate:.1f} units/s ({r['elapsed_s']:.1f} s); "
                  f"peak RSS main {r['main_MB']:.0f} MB, largest worker {r['worker_MB']:.0f} MB, "
                  f"whole tree {r['total_MB']:.0f} MB")
    speedup = rows[2, max(LOTS)]["rate"] / rows[1, max(LOTS)]["rate"]
    print(f"  speed-up 2 workers over 1 at {max(LOTS)} units: {speedup:.2f}x "
          f"(load average {os.getloadavg()[0]:.1f})")
    single = run_lot(paths, 2, {"OPENBLAS_NUM_THREADS": "1"})
    print(f"  workers 2, {max(LOTS)} units, OPENBLAS_NUM_THREADS=1: {max(LOTS) / single['elapsed_s']:.1f} units/s; "
          f"peak RSS whole tree {single['total_MB']:.0f} MB")
    for workers in WORKERS:
        small, large = rows[workers, min(LOTS)], rows[workers, max(LOTS)]
        assert large["total_MB"] - small["total_MB"] < FLAT_MB, (workers, small, large)
    if (os.cpu_count() or 1) >= 2:
        assert speedup > 1.5
