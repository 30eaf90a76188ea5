"""How far the derived sector sum of a two-hole core's half section lies from a two-dimensional field
solution, over a seeded random population of sections (prints its figures; not in the normal run)."""

from __future__ import annotations

import math

import numpy as np

from rfmeas.magnetics import hole_in_rectangle_constants
from test_magnetics import field_log_ratio


def test_sector_sum_population():
    rng = np.random.default_rng(20261202)
    rows = []
    for _ in range(300):
        # half block a × b (hole diameter 1), hole centre anywhere leaving a wall of 0.05 or more
        a, b = rng.uniform(1.1, 4.0, 2)
        e = rng.uniform(0.55, a - 0.55)
        c1, _ = hole_in_rectangle_constants((e, a - e, b / 2, b / 2), 0.5, 1.0)
        field_c1 = 2 * math.pi / field_log_ratio(a, b, 1.0, e, n=60)
        rows.append((field_c1 / c1 - 1, a, b, e))
    errors = np.array([r[0] for r in rows])
    worst = rows[int(np.argmax(errors))]
    print(f"\nC1(field)/C1(sector) − 1 over {len(rows)} sections: min {errors.min():+.3f}, "
          f"median {np.median(errors):+.3f}, max {errors.max():+.3f}; worst a={worst[1]:.2f} "
          f"b={worst[2]:.2f} e={worst[3]:.2f} (hole diameter 1)")
    assert np.all(errors > 0) and errors.max() < 0.12
