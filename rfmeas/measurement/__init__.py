"""What was measured: sweeps, measurement sets, manifests, impedance methods, test jigs, data noise."""
