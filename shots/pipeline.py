"""One model, one preset: load, plan every frame, render and write the images.

This is the linear table of contents of a render; the CLI and the batch runner call it.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from shots.gltf import load_scene
from shots.hints import model_hints
from shots.output import write_png
from shots.planner import Frame, plan_frames
from shots.presets import Preset, apply_model_fixes, load_preset
from shots.render import prepare_scene, render_frame


@dataclass(frozen=True)
class RenderedFrame:
    """A frame written to disk."""

    frame: Frame
    path: Path


def safe_name(text: str) -> str:
    """A file-name-safe version of a model, shot or variant name."""
    cleaned = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")
    return cleaned or "unnamed"


def frame_file_name(model_stem: str, frame: Frame, frames_in_shot: int,
                    variant: str | None = None) -> str:
    """``<model>-<shot>.png`` for a still, ``<model>-<shot>-<frame>.png`` in a sequence; with a
    material variant, ``<model>-<variant>-<shot>...``, so variants rendered into one folder do
    not overwrite each other."""
    parts = [model_stem] + ([variant] if variant is not None else []) + [frame.shot]
    base = "-".join(safe_name(part) for part in parts)
    return f"{base}.png" if frames_in_shot == 1 else f"{base}-{frame.index:03d}.png"


def render_model(
    model: Path,
    out_dir: Path,
    preset: Preset | str = "still",
    *,
    size: tuple[int, int] | None = None,
    samples: int | None = None,
    denoise: bool | None = None,
    scene_choice: int | str | None = None,
    variant: str | None = None,
    on_frame: Callable[[RenderedFrame], None] | None = None,
    on_warning: Callable[[str], None] | None = None,
) -> list[RenderedFrame]:
    """Render every frame of ``preset`` for ``model`` into ``out_dir`` as PNG files.

    Parameters
    ----------
    model : a .gltf or .glb file.
    preset : a Preset, a built-in preset name or a path to a TOML preset.
    size : (width, height) overriding the preset's image size.
    samples : exactly this many camera samples per pixel (adaptive sampling off).
    denoise : overrides the preset's ``[image] denoise`` (``shots.denoise``).
    scene_choice : glTF scene index or name (default: the file's default scene, else the first).
    variant : a KHR_materials_variants name to render instead of the default materials.
    on_frame : called after each frame is written (progress reporting).
    on_warning : called with each loader warning and units/up-axis hint before rendering.
    """
    if not isinstance(preset, Preset):
        preset = load_preset(preset)
    if size is not None:
        preset = preset.with_image_size(*size)
    if samples is not None:
        preset = preset.with_samples(samples)
    if denoise is not None:
        preset = preset.with_image(denoise=denoise)
    loaded = load_scene(model, scene=scene_choice, limits=preset.limits)
    hints = model_hints(loaded) if preset.model.units == "m" and preset.model.up_axis == "y" else []
    scene = apply_model_fixes(loaded, preset)
    if on_warning is not None:
        for warning in (*scene.warnings, *hints):
            on_warning(warning)
    if variant is not None:
        scene = scene.with_variant(variant)
    frames = plan_frames(preset, scene)
    prepared = prepare_scene(scene)
    per_shot = {frame.shot: 0 for frame in frames}
    for frame in frames:
        per_shot[frame.shot] += 1
    written = []
    for frame in frames:
        rgba = render_frame(prepared, frame.camera, frame.look)
        path = out_dir / frame_file_name(Path(model).stem, frame, per_shot[frame.shot], variant)
        write_png(path, rgba, exposure=frame.look.exposure, tone_map=frame.look.tone_map)
        result = RenderedFrame(frame, path)
        written.append(result)
        if on_frame is not None:
            on_frame(result)
    return written
