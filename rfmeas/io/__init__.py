"""File input and output: Touchstone reading and writing (`rfmeas.io.touchstone`),
LCR readings (`rfmeas.io.readings`) and crash-safe file writes (`rfmeas.io.atomic`).

Import the submodules directly; this package imports nothing heavy on its own.
"""
