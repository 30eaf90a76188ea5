"""Scratch runner over a written ngspice population folder (development aid)."""
import os, sys, time, math, json
sys.path[:0] = [os.path.join(os.path.dirname(__file__), ".."), os.path.join(os.path.dirname(__file__), "..", "..")]
from pathlib import Path
import numpy as np
import population as pop
from rfmeas.analysis import analyze_manifest
from rfmeas.errors import RfmeasError

KEYS = {"L1": ("primary_inductance_H", 0.01), "L2": ("secondary_inductance_H", 0.01),
        "leakage": ("leakage_inductance_H", 0.03), "ratio": ("effective_turns_ratio", 0.005)}
CAPS = (("primary_capacitance_F", "C1_F"), ("secondary_capacitance_F", "C2_F"), ("interwinding_capacitance_F", "C12_F"))

def main(root, only=None, verbose=False, limit=None):
    folders = sorted(p for p in Path(root).iterdir() if (p / "truth.json").exists())
    if limit: folders = folders[:limit]
    stats = {"n": 0, "ok": 0, "caps": 0, "caps_n": 0, "silent": 0, "wrong_nd": 0, "errors": 0}
    by = {}
    times = []; worst = []; cpu = []
    for f in folders:
        t = pop.load_truth(f)
        if only and t.subset != only and t.core_loss != only: continue
        stats["n"] += 1
        try:
            c0 = time.process_time()
            a = analyze_manifest(t.manifest)
            cpu.append(time.process_time() - c0)
        except RfmeasError as e:
            stats["errors"] += 1; print(f.name, t.subset, t.core_loss, "ERROR", e); continue
        out = a.fit.outcome
        times.append(out.elapsed_s)
        chi2 = getattr(out, "reduced_chi2", out.residual_variance)
        ratio = math.sqrt(chi2) if math.isfinite(chi2) else math.inf
        truth = {"L1": t.L1_H, "L2": t.L2_H, "leakage": t.leakage_H, "ratio": t.ratio}
        good = True; msg = []; silent = False
        for q, (key, tol) in KEYS.items():
            e = a.fit.estimates[key]
            if e.value is None:
                if q in t.determined: good = False; msg.append(f"{q}=nd")
                continue
            rel = e.value / truth[q] - 1
            z = (e.value - truth[q]) / e.stderr if e.stderr else math.inf
            if abs(rel) > tol and q in t.determined: good = False
            if abs(rel) > tol or abs(z) > 5: msg.append(f"{q}={rel:+.2e}({z:+.0f}σ)")
            if abs(z) > 5 and ratio <= 5: silent = True
        stats["silent"] += silent
        stats["ok"] += good
        b = by.setdefault((t.subset, t.core_loss), [0, 0]); b[0] += 1; b[1] += good
        if t.subset == "four":
            stats["caps_n"] += 1
            cg = all(a.fit.estimates[k].value is not None and abs(a.fit.estimates[k].value / getattr(t.params, n) - 1) < 0.15 for k, n in CAPS)
            stats["caps"] += cg
        if verbose or not good or silent:
            p = t.params
            print(f"{f.name} {t.subset:13s} {t.core_loss[:4]} {'OK ' if good else 'BAD'}{' SILENT' if silent else ''} ratio={ratio:7.3g} "
                  f"t={out.elapsed_s*1e3:5.0f}ms agree={getattr(out, 'start_agreement', float('nan')):.2f}{'!' if getattr(out, 'starts_disagree', False) else ''} held={','.join(out.held)} {' '.join(msg)} | "
                  f"L1={p.L1_H:.2e} n={p.effective_turns_ratio:.2f} 1-k={1-p.k:.1e} Rc={p.Rc_ohm:.3g} C={p.C1_F*1e12:.1f},{p.C2_F*1e12:.1f},{p.C12_F*1e12:.1f}p "
                  f"pol={p.polarity} cal={t.spec.get('calibration') is not None} f={t.spec['start_Hz']:.0e}-{t.spec['stop_Hz']:.0e}/{t.spec['points']}{t.spec['spacing'][:3]} noise={t.noise:.1e}")
    tt = np.array(times)
    print(f"{root}: n={stats['n']} key ok {stats['ok']} ({100*stats['ok']/max(stats['n'],1):.1f}%), caps ok {stats['caps']}/{stats['caps_n']}, "
          f"silent {stats['silent']}, errors {stats['errors']}, fit wall median {np.median(tt)*1e3:.0f} ms p95 {np.percentile(tt,95)*1e3:.0f} ms; "
          f"analysis cpu median {np.median(cpu)*1e3:.0f} ms p95 {np.percentile(cpu,95)*1e3:.0f} ms")
    print("  by subset/placement:", {f"{k[0]}/{k[1][:4]}": f"{v[1]}/{v[0]}" for k, v in sorted(by.items())})

if __name__ == "__main__":
    import argparse
    a = argparse.ArgumentParser(); a.add_argument("root"); a.add_argument("--only"); a.add_argument("-v", action="store_true"); a.add_argument("--limit", type=int)
    o = a.parse_args(); main(o.root, o.only, o.v, o.limit)
