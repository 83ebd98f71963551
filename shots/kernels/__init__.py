"""Numba kernels: the hot loops over flat arrays (BVH, intersection, shading)."""
