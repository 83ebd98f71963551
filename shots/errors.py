"""Errors a user can act on: one type per failure domain, each naming the file and the field.

The CLI turns any ``ShotsError`` into one line on stderr and exit code 2; everything else is a bug
and keeps its traceback.
"""

from __future__ import annotations


class ShotsError(Exception):
    """Base of every user-facing error: ``source`` is the file, ``field`` the path inside it."""

    def __init__(self, source: object, field: str | None, message: str):
        self.source = str(source)
        self.field = field
        self.message = message
        where = f"{self.source}: {field}: " if field else f"{self.source}: "
        super().__init__(where + message)


class GltfError(ShotsError):
    """A model file is malformed, hostile or uses something we do not support."""


class PresetError(ShotsError):
    """A preset file is malformed or asks for something impossible."""


class RenderError(ShotsError):
    """A render cannot proceed (for example an empty scene or an unwritable output folder)."""


class BatchError(ShotsError):
    """A batch-level failure (bad source list, bad path template)."""


class UsageError(ShotsError):
    """A command-line option has a wrong value (``source`` is the option)."""
