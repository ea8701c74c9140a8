"""Astronomy above the kernels: bodies and constants, time scales, outside ephemerides
(mean elements, JPL DE tables for the search, astropy and SPK files for checks)."""
