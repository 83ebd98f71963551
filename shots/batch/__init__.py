"""Catalog batches: every model × material variant × shot of a preset, into an output tree.

    from shots.batch import run_batch
    summary = run_batch("catalog/", "thumbnail", "out/", variants="all")

Modules: ``catalog`` (which models), ``layout`` (safe path template), ``jobs`` (frames, hashes,
chunks), ``worker`` (what a worker process runs), ``runner`` (local processes or Dask),
``encode`` (GIF/WebP/MP4), ``sheet`` (contact sheet), ``manifest`` (manifests, index),
``progress`` (bars and JSON-lines log), ``run`` (the batch itself), ``cli_command`` (the
``shots batch`` command).

Nothing heavy is imported here, so a worker process can configure numba before loading it.
"""

from __future__ import annotations

__all__ = ["run_batch", "BatchSummary"]


def __getattr__(name: str):
    if name in __all__:
        from shots.batch import run

        return getattr(run, name)
    raise AttributeError(f"module 'shots.batch' has no attribute {name!r}")
