"""Benchmarks: run with `python -m pytest tests/bench -s -p no:cacheprovider -o addopts=""`.

They print their figures and assert the speed targets; they are not part of
the normal suite (pyproject's addopts ignores this folder). The tests/ folder
is put on sys.path so the reference simulators and fitting helpers import.
"""

from __future__ import annotations

import sys
from pathlib import Path

TESTS_DIR = Path(__file__).resolve().parents[1]
if str(TESTS_DIR) not in sys.path:
    sys.path.insert(0, str(TESTS_DIR))
