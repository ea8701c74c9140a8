"""Tests of leverage.search.seeds: the compiled algorithms' per-call seeds.

Outside source: the splitmix64 generator's published reference output (Steele, Lea and
Flood 2014; Vigna's reference C code: state 1234567 gives 6457827717110365317 first,
from memory).
"""

from leverage.search.seeds import call_seed


def test_call_seed_is_splitmix64_of_seed_and_call():
    # state = seed * 2^32 + call; one splitmix64 step; its low 32 bits
    assert call_seed(0, 1234567) == 6457827717110365317 & 0xFFFFFFFF
    seeds = {call_seed(s, c) for s in range(200) for c in range(50)}
    assert len(seeds) == 200 * 50  # no two (seed, call) pairs share a stream here
