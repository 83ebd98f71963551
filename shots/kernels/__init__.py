"""Numba kernels: the hot loops over flat arrays (BVH, intersection, shading)."""

import os

# Idle OpenMP workers sleep instead of spinning between parallel regions: on a shared machine a
# spinning worker steals the core the busy thread needs (common practice for batch jobs; must be
# set before numba starts its thread pool, i.e. before the first parallel kernel runs).
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
