"""Speed and search-quality benchmarks of `leverage` (run as ``python -m benchmarks.NAME``).

Each script prints its figures and exits 0; ``--smoke`` runs it at a tiny size so the
test suite can check that it still runs. See ``benchmarks/README.md``.
"""
