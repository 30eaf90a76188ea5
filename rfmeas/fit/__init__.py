"""Fitting models to measurements: start values, the joint transformer fit, its result and checks, the core spectrum."""
