"""Strict JSON text of results: numpy values converted, NaN and infinities as null."""

from __future__ import annotations

import json
import math

SCHEMA_VERSION = 1
"""Version of the JSON contract (docs/DESIGN.md): keys are only added within a version."""


def _json_default(value):
    try:
        import numpy as np

        if isinstance(value, np.generic):
            return value.item()
        if isinstance(value, np.ndarray):
            return value.tolist()
    except ImportError:  # pragma: no cover
        pass
    if hasattr(value, "to_dict"):
        return value.to_dict()
    raise TypeError(f"cannot serialise {type(value).__name__}")


def _clean_floats(value):
    """JSON has no NaN/inf: map them to None so the output is valid JSON."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean_floats(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean_floats(v) for v in value]
    return value


def dumps_json(data) -> str:
    """Strict JSON text (no NaN), numpy values converted."""
    text = json.dumps(data, default=_json_default)
    return json.dumps(_clean_floats(json.loads(text)), indent=2, allow_nan=False)
