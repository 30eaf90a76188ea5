"""Stand-in analysis functions for the batch tests (module level so worker processes can pickle them).

A fake manifest is a small text file of `key = value` lines: name, passed
(true/false), L1 (henries), fail (a message: the analysis raises InputError).
"""

from pathlib import Path

from rfmeas.errors import InputError


def fake_analyse(path: str) -> dict:
    fields = dict(line.split(" = ", 1) for line in Path(path).read_text().splitlines() if " = " in line)
    if "fail" in fields:
        raise InputError(fields["fail"], path=path)
    L1_H = float(fields["L1"])
    return {
        "name": fields["name"],
        "parameters": {"primary_inductance_H": {"value": L1_H, "stderr": L1_H * 0.01}},
        "figures": {"low_frequency_limit_Hz": {"value": 1e5 / (L1_H * 1e6), "stderr": None},
                    "label": "not a number"},
        "design_check": {"passed": fields["passed"] == "true"},
        "fit": {"converged": True, "rms_residual": 0.001, "points": 201, "residuals": [0.0] * 201},
        "warnings": [],
    }


def crashing_analyse(path: str) -> dict:
    """A bug outside the project's error types: must be reported like any other bad unit."""
    if "unit-03" in path:
        raise ZeroDivisionError("division by zero")
    return fake_analyse(path)
