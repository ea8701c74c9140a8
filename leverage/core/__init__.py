"""Pure numeric kernels of `leverage`.

Everything here works on plain floats and numpy arrays in km, s, km/s and radians,
is compiled with ``numba.njit(cache=True)``, and imports nothing from the rest of
the ``leverage`` package (the layer above converts units and talks to people).
Frame, unless a docstring says otherwise: heliocentric ecliptic J2000.
"""
