"""The rules a fit is judged by, each written once: the solver, the fit report and the
plausibility checks import them from here, so they cannot drift apart."""

# --- the edge of a parameter's range

EDGE_TOLERANCE_LOG = 1e-3
"""A parameter within this of its range edge, in the fit's internal coordinates (log of the
value, log(1 − k)), i.e. within 0.1 %, is 'at the edge of its range': the solver holds it
(rfmeas.fit.solver) and the checks name it (rfmeas.fit.checks)."""

# --- misfit against the data's own noise (rfmeas.fit.result)

GOOD_MISFIT_RATIO = 2.0
"""Up to this overall misfit ratio the fit is good. A right model gives 0.9–1.1: the fit
absorbs a few components, the data-noise estimate scatters by some 10 % on a few hundred
points, and a real VNA's noise changes over the band. 2 allows a systematic misfit of up to
√3 ≈ 1.7 σ per component (calibration residue beyond the floor, a core slightly off the
lumped model): the values still stand and the standard errors are optimistic by at most ~2×."""

POOR_MISFIT_RATIO = 5.0
"""Above this the fit is poor: the misfit power is over 25× the noise power, a systematic
error of ≥ √24 ≈ 4.9 σ at every point, so the model does not describe the data. Standard
errors from the data's noise then understate the real error at least that much, and values
many standard errors from the truth are to be expected; no design verdict rests on it."""

MISSED_SWEEP_FACTOR = 3.0
"""A sweep whose ratio is above GOOD_MISFIT_RATIO and this many times the median ratio of the
other sweeps is named as missed, even when the set as a whole is not poor."""

# --- misfit in S units, between sweeps (rfmeas.fit.checks)

MISSED_RMS = 0.05
"""A sweep the fit misses by more than this rms (−26 dB of full reflection) is not described by the
circuit at all; a sound fit leaves about the trace noise, 1e-3 (common practice). When most sweeps
are missed like that, the numbers describe none of them."""

RESIDUAL_OUTLIER_FACTOR = 5.0
"""A sweep fitted this many times worse (rms) than the median of the others is the suspect."""

RESIDUAL_OUTLIER_FLOOR = 3e-3
"""...but only when its misfit is above three times a typical trace noise of 1e-3 (common
practice): below that every sweep fits down to its noise."""

# --- a pattern in the residuals

SYSTEMATIC_CORRELATION = 0.5
"""Lag-1 residual correlation along frequency above this is a pattern, not noise: white noise
gives about 0, a systematic misfit about 1 (the fit report and the checks both use it)."""
