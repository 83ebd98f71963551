"""Where numba keeps the compiled kernels: a per-user cache folder, one per renderer build.

numba's default puts its cache beside the source files (``site-packages/shots/kernels/
__pycache__``). pip does not know those files, so ``pip uninstall`` leaves a ``shots`` folder of
caches behind, which then shadows a later editable install as a namespace package. So the
kernels are cached in the user's cache folder instead (``platformdirs``: ``$XDG_CACHE_HOME/shots``
or ``~/.cache/shots`` on Linux, ``~/Library/Caches/shots`` on macOS,
``%LOCALAPPDATA%\\shots\\Cache`` on Windows), which also works for a read-only install.

The folder name carries the ``shots`` version and a hash of the kernel sources: numba checks
only the file that defines a kernel, not the modules its callees and constants come from, so any
change to those starts a new folder instead of loading stale machine code. numba's own index
keys every entry by the CPU (name and features), so a cache shared between machines never
loads code built for another CPU. ``NUMBA_CACHE_DIR``, when set, wins.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import platformdirs

import shots

PACKAGE = Path(__file__).resolve().parent
# Sources whose contents end up in the compiled kernels: the kernels and the scene's columns.
KERNEL_SOURCES = ("kernels/*.py", "scene.py")


def sources_digest() -> str:
    """A short hash of the kernel sources (file names and bytes)."""
    digest = hashlib.sha256()
    for pattern in KERNEL_SOURCES:
        for path in sorted(PACKAGE.glob(pattern)):
            digest.update(path.name.encode() + b"\0" + path.read_bytes())
    return digest.hexdigest()[:12]


def cache_root() -> Path:
    """The per-user cache folder of ``shots`` (delete it to clear every compiled kernel)."""
    return platformdirs.user_cache_path("shots", appauthor=False)


def kernel_cache_folder() -> Path:
    """Where this build's kernels are cached: ``NUMBA_CACHE_DIR`` when set, else
    ``cache_root() / kernels-<version>-<sources digest>``."""
    chosen = os.environ.get("NUMBA_CACHE_DIR")
    if chosen:
        return Path(chosen)
    return cache_root() / f"kernels-{shots.__version__}-{sources_digest()}"


def use_kernel_cache() -> Path:
    """Point numba's cache at ``kernel_cache_folder()``; call before any kernel is defined.

    numba picks a function's cache folder when its ``@njit(cache=True)`` decorator runs, from
    ``numba.config.CACHE_DIR``; the environment is left alone, so the user's own numba code
    keeps its cache where it was.
    """
    from numba.core import config

    folder = kernel_cache_folder()
    config.CACHE_DIR = str(folder)
    return folder
