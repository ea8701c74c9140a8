"""A run from problem to result folder: the runner, sweeps and their slices, after-run pictures and checks."""
