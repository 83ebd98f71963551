"""The demo catalog: the invented Tavlund Verkstad models shipped with the package."""

from __future__ import annotations

from importlib import resources
from pathlib import Path


def demo_models() -> list[Path]:
    """The demo catalog's .glb files, in catalog order (they install as ``shots.demo_models``)."""
    folder = Path(str(resources.files("shots.demo_models")))
    return sorted(folder.glob("*.glb"))
