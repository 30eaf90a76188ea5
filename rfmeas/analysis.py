"""The main job in one call: a measurement set in, a fitted and judged transformer out."""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

from rfmeas import __version__
from rfmeas.io.jsonio import SCHEMA_VERSION
from rfmeas.fit.result import FitResult
from rfmeas.measurement.sweep import MeasurementSet

if TYPE_CHECKING:
    from rfmeas.judge.design import DesignCheck
    from rfmeas.judge.figures import Figures


@dataclass(frozen=True)
class Analysis:
    """A measurement set, its fit, and everything derived from the fit."""

    measurement: MeasurementSet
    fit: FitResult
    figures: Figures | None = None           # None only for an analysis built without figures
    design_check: DesignCheck | None = None  # None without a design to check
    warnings: tuple[str, ...] = ()
    advice: tuple[str, ...] = ()   # better ways to measure, not doubts about the result
    recorded: MeasurementSet | None = None  # everything measured, left-out sweeps included

    @property
    def name(self) -> str:
        return self.measurement.name

    @property
    def design_passed(self) -> bool | None:
        """True or False as DesignCheck.passed decided; None without a check or when not judged."""
        return None if self.design_check is None else self.design_check.passed

    @property
    def design_status(self) -> str:
        """'pass', 'fail', 'not judged' (DesignCheck.status) or 'no design'."""
        return "no design" if self.design_check is None else self.design_check.status

    @property
    def all_warnings(self) -> list[str]:
        """The fit's own warnings, then those of the checks and figures."""
        return list(self.fit.warnings) + list(self.warnings)

    @property
    def sources(self) -> list[tuple[str, bytes]]:
        return (self.recorded or self.measurement).sources()

    def to_dict(self) -> dict:
        fit = self.fit.to_dict()
        return {
            "schema_version": SCHEMA_VERSION,
            "name": self.name,
            "parameters": fit["parameters"],
            "figures": {} if self.figures is None else self.figures.to_dict(),
            "design_check": None if self.design_check is None else self.design_check.to_dict(),
            "fit": fit["fit"],
            "model": fit["model"],
            "measurement": (self.recorded or self.measurement).to_dict(),
            "warnings": self.all_warnings,
            "advice": list(self.advice),
            "software": {"name": "rfmeas", "version": __version__},
        }


def analyze(measurement: MeasurementSet) -> Analysis:
    """Fit every sweep of `measurement` at once and derive the figures of merit."""
    from rfmeas.judge.figures import compute_figures
    from rfmeas.fit.solver import fit_sweeps
    from rfmeas.fit.result import build_result
    from rfmeas.fit.checks import method_warnings, review_fit, review_sweeps
    from rfmeas.judge.design import check_design_units

    check_design_units(measurement)  # a band typed in the wrong unit: an error, not absurd verdicts
    pre, unusable = review_sweeps(measurement)  # raises FitError when no sweep is usable
    advice = method_warnings(measurement)
    recorded = measurement
    if unusable:
        # a sweep that cannot be a winding would drag every parameter with it: fit the others
        measurement = replace(measurement, sweeps=tuple(s for s in measurement.sweeps
                                                        if s.label not in unusable))
        pre += [f"{label}: left out of the fit (see above); the results rest on the other sweeps"
                for label in sorted(unusable)]
    sweeps = list(measurement.sweeps)
    outcome = fit_sweeps(sweeps)
    result = build_result(outcome, sweeps)
    review = review_fit(measurement, result)
    figures, design_check, warnings = compute_figures(measurement, result, review.cannot_judge)
    return Analysis(measurement, result, figures, design_check, tuple(pre + list(review.warnings) + list(warnings)),
                    tuple(advice), recorded)


def analyze_manifest(path: str | Path) -> Analysis:
    from rfmeas.measurement.manifest import load_manifest

    return analyze(load_manifest(path))


def analyze_files(paths, turns=None, termination="open", port1="primary", name=None) -> Analysis:
    from rfmeas.measurement.manifest import measurement_set_from_files

    return analyze(measurement_set_from_files(list(paths), turns, termination, port1, name))
