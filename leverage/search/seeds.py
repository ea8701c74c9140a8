"""Seeds of the compiled algorithms' calls (``compiled_de``, ``compiled_nsga2``).

Each ``evolve`` call of a compiled algorithm seeds numba's generator afresh from the
algorithm's seed and the number of calls it has made, so successive calls differ, the
same seed repeats a search, and an algorithm pickled between calls (worker processes,
checkpoints) goes on exactly as the original would.
"""

_MASK64 = (1 << 64) - 1


def call_seed(seed: int, call: int) -> int:
    """A 32-bit seed for call ``call`` of an algorithm seeded ``seed`` (splitmix64 of
    the pair, Steele, Lea and Flood 2014), so neighbouring seeds and calls do not give
    neighbouring random streams."""
    z = ((seed & 0xFFFFFFFF) << 32 | (call & 0xFFFFFFFF)) + 0x9E3779B97F4A7C15
    z &= _MASK64
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & _MASK64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & _MASK64
    return (z ^ (z >> 31)) & 0xFFFFFFFF
