"""Checks of a design outside the search model: precise ephemeris, integration, point masses."""
