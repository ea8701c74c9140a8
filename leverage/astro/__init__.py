"""Astronomy above the kernels: bodies and constants, time scales, outside ephemerides."""
