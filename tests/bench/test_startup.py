"""Start-up of the command line: `--help` under 0.5 s; heavy modules only when a command needs them.

Each run is a fresh interpreter (subprocess); the figure is the median of 5.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

from timing import median

REPO_ROOT = Path(__file__).resolve().parents[2]
SAMPLE = REPO_ROOT / "sample_data" / "coupler-after"
RUNS = 5
TARGET_HELP_S = 0.5
HEAVY = ("numpy", "scipy", "skrf", "skrf.plotting", "matplotlib", "jinja2", "pyvisa", "rich")
# Runs the CLI in-process and, at exit, names the heavy modules it loaded (on stderr, after a marker).
PROBE = """
import atexit, json, sys
HEAVY = {heavy!r}
atexit.register(lambda: print("LOADED " + json.dumps([m for m in HEAVY if m in sys.modules]), file=sys.stderr))
sys.argv = ["rfmeas"] + {args!r}
from rfmeas.cli import main
main()
"""


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(REPO_ROOT), env.get("PYTHONPATH")) if p)
    return env


def _wall_s(cmd) -> float:
    t0 = time.perf_counter()
    done = subprocess.run(cmd, capture_output=True, env=_env(), cwd=REPO_ROOT)
    elapsed = time.perf_counter() - t0
    assert done.returncode == 0, done.stderr.decode()
    return elapsed


def _loaded(args) -> tuple[list[str], str]:
    done = subprocess.run([sys.executable, "-c", PROBE.format(heavy=HEAVY, args=args)],
                          capture_output=True, text=True, env=_env(), cwd=REPO_ROOT)
    marker = [line for line in done.stderr.splitlines() if line.startswith("LOADED ")]
    assert marker, done.stderr
    return json.loads(marker[-1][len("LOADED "):]), done.stdout


def test_help_is_quick():
    module_help = [_wall_s([sys.executable, "-m", "rfmeas.cli", "--help"]) for _ in range(RUNS)]
    line = f"\nstart-up: python -m rfmeas.cli --help median {median(module_help) * 1e3:.0f} ms"
    installed = shutil.which("rfmeas")
    if installed:
        script_help = [_wall_s([installed, "--help"]) for _ in range(RUNS)]
        line += f"; rfmeas --help median {median(script_help) * 1e3:.0f} ms"
    else:
        line += "; rfmeas script not on PATH"
    baseline = [_wall_s([sys.executable, "-c", "pass"]) for _ in range(RUNS)]
    print(line + f" (bare interpreter {median(baseline) * 1e3:.0f} ms; target < {TARGET_HELP_S * 1e3:.0f} ms)")
    assert median(module_help) < TARGET_HELP_S
    if installed:
        assert median(script_help) < TARGET_HELP_S


def test_heavy_modules_load_only_when_needed():
    help_loaded, _ = _loaded(["--help"])
    analyze_loaded, stdout = _loaded(["analyze", str(SAMPLE), "--json"])
    json.loads(stdout)  # stdout carries only the JSON result
    print(f"\nstart-up: heavy modules after --help: {help_loaded or 'none'}; "
          f"after analyze --json: {analyze_loaded}")
    assert not set(help_loaded) & {"numpy", "scipy", "skrf", "matplotlib", "jinja2", "pyvisa"}
    assert "matplotlib" not in analyze_loaded
