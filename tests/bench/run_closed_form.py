"""Scratch runner: fit a closed-form population and print figures (development aid)."""
import os, sys, time, math
sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", ".."))
import numpy as np
from closed_form_population import population, KEY_TOLERANCES, CAPACITANCE_KEYS, true_values
from rfmeas.fit import fit_sweeps
from rfmeas.results import build_estimates
from rfmeas.errors import RfmeasError

def main(seed=1, count=40, placement="branch", chi2_poor=4.0, verbose=False):
    cases = population(seed, count, placement)
    ok = capok = silent = 0
    times = []; worst = []
    for i, c in enumerate(cases):
        t0 = time.perf_counter()
        try:
            out = fit_sweeps(list(c.measurement.sweeps))
        except RfmeasError as e:
            print(i, "error", e); times.append(time.perf_counter()-t0); continue
        times.append(time.perf_counter()-t0)
        est = build_estimates(out)
        truth = true_values(c.params)
        good = True; errs = {}
        chi2 = getattr(out, "reduced_chi2", out.residual_variance)
        for key, tol in KEY_TOLERANCES.items():
            e = est[key]
            if e.value is None: good = False; errs[key] = "nd"; continue
            rel = e.value / truth[key] - 1
            errs[key] = rel
            if abs(rel) > tol: good = False
            if e.stderr and abs(e.value - truth[key]) > 5 * e.stderr and chi2 < chi2_poor:
                silent += 1
                worst.append((i, key, rel, (e.value - truth[key]) / e.stderr, chi2))
        cgood = all(est[k].value is not None and abs(est[k].value / truth[k] - 1) < 0.15 for k in CAPACITANCE_KEYS)
        ok += good; capok += cgood
        if verbose or not good:
            p = c.params
            print(f"{i:3d} {'OK ' if good else 'BAD'} chi2={chi2:9.3g} t={times[-1]*1e3:6.0f}ms held={list(out.held)} "
                  + " ".join(f"{k[:5]}={v if isinstance(v,str) else f'{v:+.2e}'}" for k, v in errs.items())
                  + f" | L1={p.L1_H:.2e} n={p.effective_turns_ratio:.2f} 1-k={1-p.k:.1e} Rc={p.Rc_ohm:.3g} C={p.C1_F*1e12:.1f},{p.C2_F*1e12:.1f},{p.C12_F*1e12:.1f}p f={c.f_Hz[0]:.0e}-{c.f_Hz[-1]:.0e}/{c.f_Hz.size}{'lin' if abs(c.f_Hz[1]-c.f_Hz[0]-(c.f_Hz[2]-c.f_Hz[1]))<1e-6*c.f_Hz[1] else 'log'} sig={c.sigma:.1e}")
    t = np.array(times)
    print(f"placement={placement} seed={seed} n={count}: key ok {ok}/{count}, caps ok {capok}/{count}, silent {silent}, "
          f"time median {np.median(t)*1e3:.0f} ms p95 {np.percentile(t,95)*1e3:.0f} ms")
    for w in worst[:10]: print("  silent", w)

if __name__ == "__main__":
    import argparse
    a = argparse.ArgumentParser(); a.add_argument("--seed", type=int, default=1); a.add_argument("--count", type=int, default=40)
    a.add_argument("--placement", default="branch"); a.add_argument("-v", action="store_true")
    o = a.parse_args(); main(o.seed, o.count, o.placement, verbose=o.v)
