"""What a scientist runs on methods: simulation, comparison, calibration, sweeps and figures."""
