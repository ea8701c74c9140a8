"""Global search: the pygmo problem, islands and migration, fronts, worker processes, cluster, checkpoints."""
