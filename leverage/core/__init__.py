"""Pure numeric kernels of `leverage`.

Everything here works on plain floats and numpy arrays in km, s, km/s and radians,
is compiled with ``numba.njit(cache=True)``, and imports nothing from the rest of
the ``leverage`` package (the layer above converts units and talks to people).
Frame, unless a docstring says otherwise: heliocentric ecliptic J2000.

The numba cache goes to a folder named by a digest of these source files and of
the numba and poliastro versions. numba only re-checks the file of the function it
loads, not the files of the functions it calls; keying the folder on every kernel
source means an edit anywhere in core (or an upgrade) never loads stale machine
code. Set NUMBA_CACHE_DIR to choose the folder yourself.
"""

import hashlib
import os
import sys
from importlib.metadata import version
from pathlib import Path


def _cache_dir() -> str:
    here = Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(here.glob("*.py")):
        digest.update(path.name.encode())
        digest.update(path.read_bytes())
    # Versions from the package metadata: importing numba here would slow every command.
    digest.update(f"numba {version('numba')} poliastro {version('poliastro')}".encode())
    root = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
    return str(root / "leverage" / "numba" / digest.hexdigest()[:16])


if not os.environ.get("NUMBA_CACHE_DIR"):
    # numba reads the variable when it is imported; set it on numba too if it already was.
    os.environ["NUMBA_CACHE_DIR"] = _cache_dir()
    if "numba" in sys.modules:
        sys.modules["numba"].config.CACHE_DIR = os.environ["NUMBA_CACHE_DIR"]
