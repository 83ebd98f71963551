"""The model's own KHR_lights_punctual lights in a frame's look, when the preset asks for them.

``[look] model_lights`` chooses: ``"rig"`` (the preset's studio rig only, the default),
``"model"`` (the file's lights only) or ``"both"``. The renderer's lights already use the
extension's units (candela for point and spot lights, lux for directional ones) and its smooth
cone falloff (``shots.kernels.lights.spot_attenuation``), so a file light passes unchanged.
"""

from __future__ import annotations

from dataclasses import replace

from shots.gltf.notes import IGNORED, Note
from shots.look import Light
from shots.scene import FileLight, Scene

MODEL_LIGHTS = ("rig", "model", "both")


def look_light(light: FileLight) -> Light:
    """A file light as a world-space ``Light`` (KHR_lights_punctual fields one to one)."""
    return Light(kind=light.kind, color=light.color, intensity=light.intensity,
                 position=light.position, direction=light.direction, range=light.range,
                 inner_cone=light.inner_cone, outer_cone=light.outer_cone, name=light.name)


def frame_lights(choice: str, rig: tuple[Light, ...], scene_lights) -> tuple[Light, ...]:
    """The lights of one frame for ``[look] model_lights = choice``."""
    own = tuple(look_light(light) for light in scene_lights)
    if choice == "model":
        return own
    if choice == "both":
        return rig + own
    return rig


def note_ignored_lights(scene: Scene, choice: str) -> Scene:
    """The scene with one note when it has lights the preset does not use."""
    if choice != "rig" or not scene.lights:
        return scene
    note = Note(f"{len(scene.lights)} light(s) in the model (KHR_lights_punctual) ignored; "
                "[look] model_lights = \"model\" or \"both\" uses them", IGNORED)
    return replace(scene, warnings=scene.warnings + (note,))
