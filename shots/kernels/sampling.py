"""Deterministic random numbers and sample warps for the tracer.

Every random number is a pure function of (seed, pixel, sample, dimension) through an integer
hash, so an image does not depend on how many threads rendered it or in which order.
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.layout import W_DIM

MASK32 = 0xFFFFFFFF


@njit(cache=True, error_model="numpy", _nrt=False)
def pcg_hash(x):
    """32-bit PCG output permutation as a hash (Jarzynski & Olano 2020, JCGT 9(3), "pcg")."""
    state = (x * 747796405 + 2891336453) & MASK32
    shift = (state >> 28) + 4
    word = (((state >> shift) ^ state) * 277803737) & MASK32
    return ((word >> 22) ^ word) & MASK32


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def random_bits(seed, pixel, sample, dim):
    """32 random bits addressed by their coordinates (all non-negative ints)."""
    h = pcg_hash((seed & MASK32) ^ pcg_hash(pixel & MASK32))
    h = pcg_hash(h ^ (sample & MASK32))
    return pcg_hash(h ^ ((dim * 0x9E3779B9) & MASK32))


@njit(cache=True, error_model="numpy", _nrt=False)
def random01(seed, pixel, sample, dim):
    """A uniform number in [0, 1) addressed by its coordinates (all non-negative ints)."""
    return random_bits(seed, pixel, sample, dim) * (1.0 / 4294967296.0)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def reverse_bits(x):
    """The 32 bits of x in reverse order."""
    x = ((x >> 1) & 0x55555555) | ((x & 0x55555555) << 1)
    x = ((x >> 2) & 0x33333333) | ((x & 0x33333333) << 2)
    x = ((x >> 4) & 0x0F0F0F0F) | ((x & 0x0F0F0F0F) << 4)
    x = ((x >> 8) & 0x00FF00FF) | ((x & 0x00FF00FF) << 8)
    return ((x >> 16) | (x << 16)) & MASK32


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def owen_scramble(x, seed):
    """Nested uniform (Owen) scrambling of the 32-bit fraction x by a hash (Burley 2020,
    "Practical Hash-based Owen Scrambling", JCGT 9(4), after Laine & Karras 2011): each bit
    is flipped by a function of the bits above it, which keeps every net property."""
    x = reverse_bits(x)
    x = (x + seed) & MASK32
    x ^= (x * 0x6C50B47C) & MASK32
    x ^= (x * 0xB82F1E52) & MASK32
    x ^= (x * 0xC7AFE638) & MASK32
    x ^= (x * 0x8D22F6E6) & MASK32
    return reverse_bits(x)


@njit(cache=True, error_model="numpy", _nrt=False)
def sobol_point(index, seed):
    """Point ``index`` of a 2-D Sobol' sequence, Owen-scrambled by ``seed``, in [0, 1)².

    The first two Sobol' dimensions (Sobol' 1967: the van der Corput radical inverse, and the
    generator matrix of the polynomial x + 1) form a (0, 2)-sequence: every prefix of 2^m points
    has one point in each of the 2^m elementary intervals of area 2^-m (Niederreiter 1992,
    "Random Number Generation and Quasi-Monte Carlo Methods", §4.1). So samples added to a
    pixel later fill the gaps the earlier ones left, where independent sets would not.

    No loop over the index bits: the first dimension is the index's bits reversed; the second's
    generator matrix is Pascal's triangle mod 2, whose entry C(j, i) is odd exactly when the bits
    of i are among those of j (Lucas 1878), so its product with the index is a sum over bit
    supersets, five shift-and-xor steps, one per bit of a bit's position.
    """
    i = index & MASK32
    y = i
    y ^= (y >> 1) & 0x55555555
    y ^= (y >> 2) & 0x33333333
    y ^= (y >> 4) & 0x0F0F0F0F
    y ^= (y >> 8) & 0x00FF00FF
    y ^= (y >> 16) & 0x0000FFFF
    x = reverse_bits(i)
    y = reverse_bits(y)
    x = owen_scramble(x, pcg_hash(seed & MASK32))
    y = owen_scramble(y, pcg_hash((seed ^ 0x5BD1E995) & MASK32))
    return (x + 0.5) * (1.0 / 4294967296.0), (y + 0.5) * (1.0 / 4294967296.0)


@njit(cache=True, error_model="numpy", _nrt=False)
def tent_warp(u):
    """Map u in [0, 1) to an offset in (−1, 1) distributed as the tent filter 1 − |x|.

    Filter importance sampling (Ernst, Stamminger & Greiner 2006): samples drawn from the filter
    need no weights and no splatting across pixels.
    """
    v = 2.0 * u
    if v < 1.0:
        return math.sqrt(v) - 1.0
    return 1.0 - math.sqrt(2.0 - v)


@njit(cache=True, error_model="numpy", _nrt=False)
def cosine_hemisphere(u1, u2):
    """Cosine-weighted direction on the +z hemisphere (Malley's method); pdf = cos θ / π."""
    r = math.sqrt(u1)
    phi = 2.0 * math.pi * u2
    return r * math.cos(phi), r * math.sin(phi), math.sqrt(max(0.0, 1.0 - u1))


@njit(cache=True, error_model="numpy", _nrt=False)
def orthonormal_basis(nx, ny, nz):
    """Tangent and bitangent completing unit n to a right-handed frame.

    Duff et al. 2017, "Building an Orthonormal Basis, Revisited", JCGT 6(1).
    """
    sign = 1.0 if nz >= 0.0 else -1.0
    a = -1.0 / (sign + nz)
    b = nx * ny * a
    return (
        1.0 + sign * nx * nx * a,
        sign * b,
        -sign * nx,
        b,
        sign + ny * ny * a,
        -ny,
    )


@njit(cache=True, error_model="numpy", _nrt=False)
def spread_count(per_hit, samples):
    """Rays one hit casts when a set of ``samples`` camera samples shares the work.

    ``per_hit`` is the count wanted with a single camera sample; with more, the pixel's samples
    split the work, so each pixel still gets at least ``per_hit`` (and at least ``samples``)
    well-spread rays while a hit casts ceil(per_hit / samples).
    """
    return max(1, (per_hit + samples - 1) // samples)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sequence_point(i, sample, key):
    """The point in [0, 1)² for ray ``i`` of a hit made by the pixel's camera sample ``sample``
    (counted over all the pixel's sets), for one use ``key`` (``pixel_key``: pixel and purpose).

    Each (use, ray) pair has its own scrambled Sobol' sequence (``sobol_point``) whose index is
    shuffled by nested uniform scrambling too (Burley 2020, §4): the first 2^m indices still map
    onto one aligned block of the sequence, a (0, m, 2)-net, so a pixel's successive samples
    fill in one stratified pattern over all its sets, and the shuffle keeps different uses (a
    light, the environment, the glossy lobe) from moving in step with each other or with the
    sample's place in the pixel.
    """
    k = pcg_hash((key ^ ((i * 0x9E3779B9) & MASK32)) & MASK32)
    return sobol_point(owen_scramble(sample & MASK32, k), pcg_hash(k ^ 0x68E31DA4))


@njit(cache=True, error_model="numpy", _nrt=False)
def pixel_key(seed, pixel, purpose):
    """A hash fixed for one pixel and one use (a light, the glossy lobe), shared by its samples."""
    return pcg_hash((pcg_hash((seed ^ (purpose * 0x85EBCA6B)) & MASK32) ^ pixel) & MASK32)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def next_pair(seed, pixel, sample, work):
    """The next two numbers of this camera sample's sequence (counter in work[W_DIM]).

    Both come from one 32-bit hash, 16 bits each: they only jitter a point inside a stratum.
    """
    d = int(work[W_DIM])
    work[W_DIM] = d + 1
    h = random_bits(seed, pixel, sample, d)
    return ((h & 0xFFFF) + 0.5) * (1.0 / 65536.0), ((h >> 16) + 0.5) * (1.0 / 65536.0)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def luminance(r, g, b):
    """Relative luminance of linear Rec.709 RGB (ITU-R BT.709)."""
    return 0.2126 * r + 0.7152 * g + 0.0722 * b
