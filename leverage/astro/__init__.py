"""Astronomy above the kernels: bodies, times, ephemerides."""
