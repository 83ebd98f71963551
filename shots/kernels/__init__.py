"""Numba kernels: the hot loops over flat arrays (BVH, intersection, shading)."""

import os

from shots.kernel_cache import use_kernel_cache

# Idle OpenMP workers sleep instead of spinning between parallel regions: on a shared machine a
# spinning worker steals the core the busy thread needs (common practice for batch jobs; must be
# set before numba starts its thread pool, i.e. before the first parallel kernel runs).
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

# Before any kernel module runs its decorators: they choose their cache folder as they run.
use_kernel_cache()
