"""Budgets that keep one hostile model from taking the machine: checked before allocating.

A preset sets them in its ``[limits]`` table and every command takes ``--limit KEY=VALUE``;
the defaults fit catalog furniture with room to spare (common practice, not a standard).
A model over a budget fails with a one-line ``GltfError`` naming the field and the budget.
"""

from __future__ import annotations

from pydantic import Field, ValidationError

from shots.errors import UsageError
from shots.tables import Table

MIB = 1 << 20


class Limits(Table):
    """Budgets per model, each checked before the memory or time is spent; a model over one
    fails alone with a line naming the budget. They change no pixel, so changing them
    re-renders nothing."""

    triangles: int = Field(20_000_000, ge=1)  # drawn, every node instance counted
    instances: int = Field(200_000, ge=1)  # mesh primitives drawn, counted over every node
    texture_pixels: int = Field(268_435_456, ge=1)  # pixels of the distinct images
    texture_mb: int = Field(768, ge=1)  # decoded texels with mip levels, each image stored once
    file_mb: int = Field(2048, ge=1)  # the model file and each file it references
    json_values: int = Field(5_000_000, ge=1)  # arrays, objects, numbers... of the glTF JSON
    seconds: float = Field(1800.0, gt=0.0)  # wall time a worker spends on one model's task
    image_pixels: int = Field(40_000_000, ge=1)  # an image `shots check` decodes

    @property
    def texture_bytes(self) -> int:
        return self.texture_mb * MIB

    @property
    def file_bytes(self) -> int:
        return self.file_mb * MIB


DEFAULT = Limits()


def preset_with_limits(preset, pairs: list[str] | None):
    """``preset`` (a ``shots.presets.Preset``) with ``--limit KEY=VALUE`` pairs applied."""
    if not pairs:
        return preset
    changed = preset.model_copy(update={"limits": with_overrides(preset.limits, pairs)})
    changed._source = preset._source
    return changed


def with_overrides(limits: Limits, pairs: list[str] | None, source: str = "--limit") -> Limits:
    """``limits`` with ``KEY=VALUE`` pairs from the command line applied (validated alike)."""
    if not pairs:
        return limits
    values = limits.model_dump()
    for pair in pairs:
        key, equals, text = pair.partition("=")
        key = key.strip()
        if not equals or key not in values:
            raise UsageError(source, pair, f"expected KEY=VALUE with KEY one of "
                                           f"{', '.join(values)}")
        try:
            values[key] = int(text) if isinstance(values[key], int) else float(text)
        except ValueError:
            raise UsageError(source, key, f"expected a number, got {text!r}") from None
    try:
        return Limits.model_validate(values)
    except ValidationError as exc:
        problem = exc.errors()[0]
        raise UsageError(source, str(problem["loc"][0]), problem["msg"]) from None
