"""The base of every preset table: strict about keys, types and numbers."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict


class Table(BaseModel):
    """A TOML table: unknown keys are errors, a string is never read as a number, and every
    number must be finite (no inf or nan)."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True, allow_inf_nan=False)
