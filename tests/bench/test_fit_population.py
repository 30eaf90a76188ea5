"""The fit on a random population of plausible transformers (tests/population.py): recovery, silent failures.

Runs the real `rfmeas.analysis.analyze_manifest` on every unit and prints:
the share recovering L1 and L2 within 1 %, leakage within 3 % and ratio within
0.5 % (target >= 99 %); the share with C1, C2, C12 within 15 %; the number of
silent failures (a key quantity more than 5 standard errors from the truth, or
wrong with no error bar, while the fit is not graded "poor"; target 0); the
median and 95th-percentile time of the analysis; the scatter of repeated fits
against the Cramer-Rao bound on a sample; the worst cases. Figures are split by
core-loss placement, sweep subset and measurement quirk, and shown for the
units where the tolerances are within reach: the Cramer-Rao bound
(pop.information_limit) is a third of the tolerance or less, and the model's
best fit to the noise-free data (pop.model_limit: the systematic error of the
other core-loss placement or a calibration residue) within half of it.

Two populations are run, each with its own figures: "issue", issue 12's
population exactly as specified (noise, RI/MA/DB files in Hz/kHz/MHz,
forward-only thrus, linear and log grids, both core-loss placements, the sweep
subsets), and "stress", the same units with the quirks beyond the issue's list
(a calibration residue in a quarter of them, stitched repeats, odd option
lines, Touchstone v2).

Environment:
  RFMEAS_POPULATION_N      units per population (default 240)
  RFMEAS_POPULATION_KINDS  which populations, comma-separated: issue,stress (default both)
  RFMEAS_POPULATION_DIR    keep the simulated units there and reuse them in later runs
  RFMEAS_POPULATION_JSON   write one record per unit to this file
Run: python -m pytest tests/bench/test_fit_population.py -s -p no:cacheprovider -o addopts=""
"""

from __future__ import annotations

import json
import math
import os
import statistics
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

import population as pop
from reference.spice import spice_available
from timing import percentile

SEED = 12
UNITS = int(os.environ.get("RFMEAS_POPULATION_N", "240"))
KINDS = tuple(k.strip() for k in os.environ.get("RFMEAS_POPULATION_KINDS", "issue,stress").split(",") if k.strip())
QUIRKS = {"issue": False, "stress": True}
CRB_UNITS = int(os.environ.get("RFMEAS_POPULATION_CRB_UNITS", "4"))
CRB_REPEATS = 12
WORST = 10

pytestmark = [pytest.mark.spice, pytest.mark.skipif(not spice_available(), reason="ngspice not installed")]


def _cached_unit(spec: pop.UnitSpec, folder: Path) -> pop.Truth:
    """The unit's folder, simulated again only when it is missing or holds another spec."""
    truth_file = folder / "truth.json"
    if truth_file.exists() and (folder / "clean.npz").exists():
        stored = json.loads(truth_file.read_text())
        if (stored.get("generator_version") == pop.GENERATOR_VERSION
                and stored["spec"] == json.loads(json.dumps(spec.to_dict()))):
            return pop.load_truth(folder)
    return pop.write_unit(spec, folder)


@pytest.fixture(scope="module")
def population_root(tmp_path_factory) -> Path:
    given = os.environ.get("RFMEAS_POPULATION_DIR")
    if given:
        Path(given).mkdir(parents=True, exist_ok=True)
        return Path(given)
    return tmp_path_factory.mktemp("population")


def _analyze(truth: pop.Truth) -> tuple[pop.Verdict, dict | None, float]:
    from rfmeas.analysis import analyze_manifest
    from rfmeas.errors import RfmeasError

    t0 = time.process_time()  # CPU time: the machine may be shared
    try:
        result = analyze_manifest(truth.manifest).to_dict()
    except RfmeasError as exc:
        return pop.refused(str(exc)), None, time.process_time() - t0
    return pop.judge(truth, result), result, time.process_time() - t0


def _share(records, key) -> str:
    if not records:
        return "   -  "
    return f"{100.0 * sum(bool(r[key]) for r in records) / len(records):5.1f} %"


def _group_line(label: str, records: list) -> str:
    return (f"  {label:<22} n={len(records):4d}  recovered {_share(records, 'recovered')}  "
            f"C within 15 % {_share(records, 'capacitances_ok')}  "
            f"silent {sum(bool(r['silent']) for r in records):3d}  "
            f"refused {sum(bool(r['refused']) for r in records):3d}")


def _drawn(spec: pop.UnitSpec) -> str:
    p = spec.params
    across = p.magnetizing_inductance_H if spec.core_loss == "magnetizing" else p.L1_H
    return (f"L1 {p.L1_H:.3g} H, n {p.effective_turns_ratio:.3g}, 1-k {1 - p.k:.2g}, "
            f"R1 {p.R1_ohm:.2g}, R2 {p.R2_ohm:.2g} ohm, corner {p.Rc_ohm / (2 * math.pi * across) / 1e6:.2g} MHz, "
            f"C1 {p.C1_F * 1e12:.2g} C2 {p.C2_F * 1e12:.2g} C12 {p.C12_F * 1e12:.2g} pF, pol {p.polarity:+d}; "
            f"Rc across {spec.core_loss}, {spec.subset}, {spec.start_Hz / 1e3:g} kHz-{spec.stop_Hz / 1e6:g} MHz "
            f"{spec.points} {spec.spacing}, noise {spec.noise:.1e}, "
            f"{spec.file_format}/{spec.file_unit}/v{spec.version}"
            f"{', fwd-only' if spec.forward_only and 'thru' in spec.sweeps else ''}"
            f"{', cal residue' if spec.calibration else ''}{', stitched' if spec.stitch_at is not None else ''}")


def _badness(record) -> float:
    if record["refused"]:
        return 1.0
    worst = 0.0
    for name, tol in pop.TOLERANCES.items():
        d = record["details"][name]
        if d["determined"]:
            worst = max(worst, abs(d["rel_err"]) / tol)
        elif name in record["determined"]:
            worst = max(worst, 1.5)
    return worst + (1000.0 if record["silent"] else 0.0)


def _cramer_rao_sample(specs, root: Path, crashes: list) -> list[str]:
    """Repeat the noise on a few exactly-modelled units; compare the scatter with the bound."""

    chosen = [s for s in specs if s.subset == "four" and s.core_loss == "magnetizing"][:CRB_UNITS]
    lines = ["Scatter of repeated fits against the Cramer-Rao bound (model's core-loss placement, "
             f"no calibration residue, {CRB_REPEATS} noise draws each):",
             f"  {'unit':<16}{'qty':<9}{'CRB rel sd':>11}{'scatter':>11}{'ratio':>8}{'mean se/CRB':>13}"
             f"{'bias/CRB':>10}{'used':>6}"]
    for spec in chosen:
        spec = replace(spec, calibration=None, stitch_at=None)
        bound = pop.information_limit(spec)
        f_Hz = pop.frequency_grid(spec)
        clean = pop.simulate_unit(spec.params, spec.core_loss, f_Hz, spec.sweeps)
        logs = {name: [] for name in pop.KEY_QUANTITIES}
        ses = {name: [] for name in pop.KEY_QUANTITIES}
        for repeat in range(CRB_REPEATS):
            unit = pop.with_noise_seed(spec, 1000 + repeat)
            truth = pop.write_unit(unit, root / "crb" / f"{spec.name}-{repeat:02d}", clean=clean)
            try:
                _, result, _ = _analyze(truth)
            except Exception as exc:  # a crash is a bug of its own: collect, report, fail at the end
                crashes.append(f"{truth.folder}: {type(exc).__name__}: {exc}")
                continue
            if result is None:
                continue
            params = result["parameters"]
            for name in pop.KEY_QUANTITIES:
                est = params[pop.JSON_KEYS[name]]
                if est.get("value") and est.get("determined", True):
                    logs[name].append(math.log(est["value"] / pop.true_value(truth, name)))
                    ses[name].append((est.get("stderr") or 0.0) / est["value"])
        for name in pop.KEY_QUANTITIES:
            vals = logs[name]
            if len(vals) < 3:
                lines.append(f"  {spec.name:<16}{name:<9}{bound[name]:11.2e}   (determined in {len(vals)} fits)")
                continue
            sd = statistics.stdev(vals)
            lines.append(f"  {spec.name:<16}{name:<9}{bound[name]:11.2e}{sd:11.2e}{sd / bound[name]:8.1f}"
                         f"{statistics.mean(ses[name]) / bound[name]:13.1f}"
                         f"{statistics.mean(vals) / bound[name]:10.1f}{len(vals):6d}")
    return lines


def test_fit_population(population_root):
    unknown = set(KINDS) - set(QUIRKS)
    assert not unknown, f"RFMEAS_POPULATION_KINDS: unknown {sorted(unknown)}, choose from {sorted(QUIRKS)}"
    crashes, kept = [], {}
    for kind in KINDS:
        specs = pop.draw_population(UNITS, SEED, quirks=QUIRKS[kind])
        records, lines = _run_population(kind, specs, population_root / kind, crashes)
        print("\n".join(lines))
        kept[kind] = records
        if kind == KINDS[0]:
            sample_crashes = []
            print("\n".join(_cramer_rao_sample(specs, population_root, sample_crashes)))
            for crash in sample_crashes:
                print(f"  CRASH {crash}")
            crashes += sample_crashes
        assert len(records) + sum(c.startswith(f"[{kind}]") for c in crashes) == UNITS

    out = os.environ.get("RFMEAS_POPULATION_JSON")
    if out:
        keep = {kind: [{k: (v.to_dict() if k == "spec" else v) for k, v in r.items()} for r in records]
                for kind, records in kept.items()}
        Path(out).write_text(json.dumps(keep, indent=1, default=float))
    assert not crashes, "analyze_manifest crashed (not an RfmeasError) on: " + "; ".join(crashes)


def _run_population(kind: str, specs: list, root: Path, crashes: list) -> tuple[list, list[str]]:
    """Analyse one population; its records and the printed figures."""
    t_sim = time.perf_counter()
    truths = [_cached_unit(spec, root / spec.name) for spec in specs]
    t_sim = time.perf_counter() - t_sim

    records = []
    for spec, truth in zip(specs, truths):
        try:
            verdict, result, elapsed = _analyze(truth)
        except Exception as exc:  # a crash is a bug of its own: collect, report, fail at the end
            crashes.append(f"[{kind}] {spec.name}: {type(exc).__name__}: {exc}")
            continue
        bound = pop.information_limit(spec)
        limit = pop.model_limit(spec, pop.load_clean(truth.folder))
        records.append({
            "name": spec.name, "spec": spec, "subset": spec.subset, "core_loss": spec.core_loss,
            "determined": truth.determined, "recovered": verdict.recovered, "silent": verdict.silent,
            "wrong": verdict.wrong, "capacitances_ok": verdict.capacitances_ok, "grade": verdict.grade,
            "polarity_ok": verdict.polarity_ok, "refused": verdict.refused, "details": verdict.details,
            "describe": verdict.describe(), "analyze_s": elapsed,
            "fit_s": None if result is None else result["fit"].get("elapsed_s"),
            "converged": None if result is None else result["fit"].get("converged"),
            # the tolerance is within reach when the noise (Cramer-Rao bound) takes a third of it
            # or less and the model's best fit to the noise-free data misses by half of it or less
            "informative": all(bound[q] <= pop.TOLERANCES[q] / 3 for q in truth.determined),
            "representable": all(abs(limit[q]) <= pop.TOLERANCES[q] / 2 for q in truth.determined),
            "bound": bound, "model_limit": limit,
        })
        records[-1]["reachable"] = records[-1]["informative"] and records[-1]["representable"]

    import rfmeas

    n = len(records)
    title = {"issue": "ISSUE population (as issue 12 specifies it: no calibration residue, no other quirks)",
             "stress": "STRESS population (with calibration residue, stitched repeats, odd option lines, v2)"}
    lines = ["", title[kind],
             f"Fit population: {len(specs)} units (seed {SEED}), simulated/loaded in {t_sim:.0f} s; "
             f"{n} analysed, {len(specs) - n} crashed; rfmeas from {Path(rfmeas.__file__).parent}",
             "Recovery: L1, L2 within 1 %, leakage within 3 %, ratio within 0.5 % (those the sweeps "
             "determine; the others not determined or right); target >= 99 %"]
    lines.append(_group_line("all", records))
    lines.append(_group_line("in reach", [r for r in records if r["reachable"]]))
    lines.append(_group_line("noise limits (CRB)", [r for r in records if not r["informative"]]))
    lines.append(_group_line("model limits", [r for r in records if not r["representable"]]))
    lines.append("  (in reach: Cramer-Rao bound <= tolerance/3 and the model's best fit to the noise-free data "
                 "within tolerance/2, for every quantity the sweeps determine)")
    lines.append("By core-loss placement:")
    for placement in pop.CORE_LOSS_PLACEMENTS:
        group = [r for r in records if r["core_loss"] == placement]
        lines.append(_group_line(f"Rc across {placement}", group))
        lines.append(_group_line("  of them in reach", [r for r in group if r["reachable"]]))
    lines.append("By sweep subset:")
    for subset in pop.SUBSETS:
        lines.append(_group_line(subset, [r for r in records if r["subset"] == subset]))
    lines.append("By quirk (four-sweep units):")
    four = [r for r in records if r["subset"] == "four"]
    quirks = {
        "linear grid": lambda s: s.spacing == "linear",
        "log grid": lambda s: s.spacing == "log",
        "calibration residue": lambda s: s.calibration is not None,
        "forward-only thru": lambda s: s.forward_only,
        "inverting polarity": lambda s: s.params.polarity < 0,
        "noise > 1e-3": lambda s: s.noise > 1e-3,
        "start 10 kHz": lambda s: s.start_Hz == 10e3,
    }
    for label, test in quirks.items():
        lines.append(_group_line(label, [r for r in four if test(r["spec"])]))
    lines.append(_group_line("  calibration, in reach", [r for r in four if r["spec"].calibration is not None
                                                         and r["reachable"]]))
    for name in pop.KEY_QUANTITIES:
        tol = pop.TOLERANCES.get(name, pop.CAPACITANCE_TOLERANCE)
        det = [r for r in records if r["details"] and r["details"][name]["determined"]]
        ok = [r for r in det if abs(r["details"][name]["rel_err"]) <= tol]
        lines.append(f"  {name:<8} reported determined in {len(det):4d}, within {tol:.1%} in {len(ok):4d}")
    silent = [r for r in records if r["silent"]]
    within = [r for r in silent if not r["wrong"]]
    lines.append(f"Silent failures: {len(silent)} of {n} (target 0); of them {len(within)} within tolerance "
                 "but > 5 standard errors off")
    polarity = [r for r in records if r["polarity_ok"] is False]
    lines.append(f"Polarity wrong: {len(polarity)}")
    grades = {}
    for r in records:
        grades[str(r["grade"])] = grades.get(str(r["grade"]), 0) + 1
    lines.append(f"Quality grades: {grades}")
    times = [r["analyze_s"] for r in records]
    fit_times = [r["fit_s"] for r in records if r["fit_s"] is not None]
    lines.append(f"Analysis CPU time: median {statistics.median(times) * 1e3:.0f} ms, "
                 f"95th percentile {percentile(times, 95) * 1e3:.0f} ms, max {max(times):.2f} s; "
                 f"fit alone: median {statistics.median(fit_times) * 1e3:.0f} ms, "
                 f"95th percentile {percentile(fit_times, 95) * 1e3:.0f} ms (target median <= 150 ms, p95 <= 1 s)")
    lines.append(f"Worst {WORST} cases:")
    for r in sorted(records, key=_badness, reverse=True)[:WORST]:
        lines.append(f"  {r['name']}: {r['describe']}")
        lines.append(f"      {_drawn(r['spec'])}")
        lines.append("      model's best fit to noise-free data: " + ", ".join(
            f"{q} {r['model_limit'][q]:+.2%}" for q in pop.TOLERANCES)
            + ("" if r["reachable"] else "  (out of reach)"))
    for crash in crashes:
        if crash.startswith(f"[{kind}]"):
            lines.append(f"  CRASH {crash}")
    return records, lines
