"""What a batch has to do: model × variant × shot × frame, the hashes that say what changed,
and the chunks of frames handed to workers.

A frame's key is the SHA-256 of everything its pixels depend on: the model's inputs (its file
and the external buffers and images it names), the resolved preset, the renderer version and
the frame's identity (variant, shot, index) and PNG bit depth. Equal keys mean equal bytes,
because rendering is deterministic given the frame's seed.
"""

from __future__ import annotations

import hashlib
import json
import math
import struct
from dataclasses import dataclass, field, replace
from pathlib import Path
from urllib.parse import unquote, urlsplit

from shots.presets import Derivative, FileCameraShot, Preset, ViewsShot
from shots.tags import NO_METADATA, ImageMetadata

DEFAULT_VARIANT = "default"  # the model's own materials, not a KHR_materials_variants variant
GLB_MAGIC = b"glTF"
HASH_BLOCK = 1 << 20
TAIL_SHARE = 2  # a chunk is at most 1/(TAIL_SHARE × workers) of the frames left


# --- hashing ----------------------------------------------------------------------------------


def sha256_file(path: Path) -> str:
    """Hex SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while block := handle.read(HASH_BLOCK):
            digest.update(block)
    return digest.hexdigest()


def model_hashes(path: Path) -> tuple[str, str]:
    """(SHA-256 of the model file, SHA-256 of it and every external file it references).

    External buffers and images are the relative ``uri`` entries (glTF 2.0 spec §URIs), found
    in the JSON of a .gltf or the JSON chunk of a .glb (spec §GLB File Format Specification).
    A missing or out-of-folder reference is hashed by name only: the loader reports it.
    """
    file_hash = sha256_file(path)
    combined = hashlib.sha256(file_hash.encode())
    folder = path.parent.resolve()
    for uri in sorted(_external_uris(path)):
        combined.update(f"\n{uri}\n{_resource_hash(folder, uri)}".encode())
    return file_hash, combined.hexdigest()


def _resource_hash(folder: Path, uri: str) -> str:
    """SHA-256 of a referenced file inside ``folder``, else "missing" (the loader says why:
    a NUL once decoded, a symlink loop, a path leaving the folder)."""
    try:
        target = (folder / unquote(uri)).resolve()
        if target.is_relative_to(folder) and target.is_file():
            return sha256_file(target)
    except (OSError, ValueError, RuntimeError):
        pass
    return "missing"


def _external_uris(path: Path) -> set[str]:
    """Relative URIs of buffers and images; nothing for a file that is not valid glTF."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(20)
            if head[:4] == GLB_MAGIC and len(head) == 20:
                json_length, chunk_type = struct.unpack("<II", head[12:20])
                raw = handle.read(json_length) if chunk_type == 0x4E4F534A else b""
            else:
                raw = head + handle.read()
        document = json.loads(raw)
    except (OSError, ValueError, RecursionError):
        return set()
    uris = set()
    for key in ("buffers", "images"):
        entries = document.get(key) if isinstance(document, dict) else None
        for entry in entries if isinstance(entries, list) else []:
            uri = entry.get("uri") if isinstance(entry, dict) else None
            if isinstance(uri, str) and not uri.startswith("data:"):
                parts = urlsplit(uri)
                if not parts.scheme and not parts.netloc and "\x00" not in uri:
                    uris.add(uri)
    return uris


def preset_sha256(preset: Preset) -> str:
    """SHA-256 of the resolved preset as canonical JSON (sorted keys, no spaces).

    The description, the check's tolerances, the limits, derivatives and publishing settings
    are left out (they change no pixel of a master frame: derivatives have keys of their own);
    an environment image is represented by its content hash rather than its path, so moving
    the preset does not re-render a catalog.
    """
    data = preset.model_dump(mode="json")
    for key in ("description", "check", "limits", "derivatives", "publish"):
        data.pop(key, None)
    image = data.get("environment", {}).get("image")
    if image:
        data["environment"]["image"] = "sha256:" + sha256_file(Path(image))
    return _sha256_json(data)


def _sha256_json(value: object) -> str:
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode()).hexdigest()


# --- frames -----------------------------------------------------------------------------------


@dataclass(frozen=True, order=True)
class FrameId:
    """Which frame: the variant ("default" or a KHR_materials_variants name), shot and index."""

    variant: str
    shot: str
    index: int


def shot_frame_counts(preset: Preset) -> list[tuple[str, int]]:
    """(shot name, number of frames) for every shot, without a model.

    Matches ``shots.planner.plan_frames``: one frame per named view, one for a file camera,
    ``frames`` for turntables, orbits and paths. Workers check the planner agrees.
    """
    counts = []
    for shot in preset.shots:
        if isinstance(shot, ViewsShot):
            counts.append((shot.name, len(shot.views)))
        elif isinstance(shot, FileCameraShot):
            counts.append((shot.name, 1))
        else:
            counts.append((shot.name, int(shot.frames)))
    return counts


def frame_ids(preset: Preset, variant: str) -> list[FrameId]:
    """Every frame of the preset for one variant, in preset order."""
    return [
        FrameId(variant, shot, index)
        for shot, count in shot_frame_counts(preset)
        for index in range(count)
    ]


def frame_key(inputs_sha256: str, preset_hash: str, version: str, bits: int, frame: FrameId) -> str:
    """The frame's key: equal keys, equal image bytes."""
    return _sha256_json(
        ["frame", inputs_sha256, preset_hash, version, bits, frame.variant, frame.shot, frame.index]
    )


def derivative_key(frame_key: str, derivative: Derivative, metadata: dict) -> str:
    """A derivative's key: its frame's key, the settings that shape its bytes, the metadata
    written into it and the encoder library's version."""
    import PIL

    settings = derivative.model_dump(mode="json", exclude={"name", "path", "shots"})
    return _sha256_json(["derivative", frame_key, settings, metadata, PIL.__version__])


def derivatives_for(derivatives: tuple[Derivative, ...], shot: str) -> tuple[Derivative, ...]:
    """The derivatives made of ``shot``'s frames."""
    return tuple(d for d in derivatives if d.shots is None or shot in d.shots)


def animation_key(frame_keys: list[str], kind: str, settings: dict) -> str:
    """An animation's key: its frames' keys, its format and the encoder settings."""
    return _sha256_json(["animation", kind, settings, frame_keys])


# --- tasks for workers --------------------------------------------------------------------------


@dataclass(frozen=True)
class RenderTask:
    """A chunk of one model's frames for one worker: it loads and prepares the model once.

    Attributes
    ----------
    model : the model file. inputs_sha256 : its inputs hash (the worker's cache key).
    variant : "default" or a KHR_materials_variants name.
    frames : (shot, index) pairs to render, in order.
    preset, preset_sha256 : the resolved preset and its hash.
    bits : PNG bit depth. exr : also return linear EXR bytes.
    animated : shots whose every frame goes into an animation; their frames, and the first
        frame of every shot (contact sheet, consistency report), come back as 8-bit codes too,
        so the batch need not decode the PNG files it has just written.
    derivatives : the preset's derivatives, made of each frame in memory (``shots.derivatives``).
    metadata : what the derivatives of this model and variant say about themselves.
    """

    model: str
    inputs_sha256: str
    variant: str
    frames: tuple[tuple[str, int], ...]
    preset: Preset
    preset_sha256: str
    bits: int = 8
    exr: bool = False
    animated: tuple[str, ...] = ()
    derivatives: tuple[Derivative, ...] = ()
    metadata: ImageMetadata = NO_METADATA

    def wants_codes(self, shot: str, index: int) -> bool:
        """Whether frame ``index`` of ``shot`` comes back with its 8-bit codes."""
        return self.bits == 8 and (index == 0 or shot in self.animated)


@dataclass(frozen=True)
class DeriveTask:
    """Derivatives to re-make from master frames that are up to date (settings changed).

    ``frames`` are (shot, index, master, names of the derivatives to make); the master is the
    PNG file's path until ``with_masters`` reads it, just before the task is sent (a cluster's
    workers may not see the output folder, and only tasks in flight hold their bytes).
    """

    model: str
    variant: str
    frames: tuple[tuple[str, int, Path | bytes, tuple[str, ...]], ...]
    derivatives: tuple[Derivative, ...]
    metadata: ImageMetadata = NO_METADATA

    def with_masters(self) -> DeriveTask:
        """The task with every master's PNG bytes in place of its path."""
        frames = tuple((shot, index, Path(master).read_bytes() if isinstance(master, Path)
                        else master, names) for shot, index, master, names in self.frames)
        return replace(self, frames=frames)


@dataclass
class ModelVariantJob:
    """The frames one (model, variant) still needs."""

    model: str
    inputs_sha256: str
    variant: str
    pending: list[FrameId] = field(default_factory=list)
    preset: Preset | None = None  # the model's own (a sidecar merged in), else the batch's
    preset_sha256: str = ""


def chunk_tasks(jobs: list[ModelVariantJob], workers: int, preset: Preset, preset_hash: str,
                bits: int, exr: bool, animated: tuple[str, ...] = (),
                metadata: dict | None = None) -> list[RenderTask]:
    """Split the pending frames into tasks, largest jobs first.

    One worker takes each job whole (a model is loaded once). For several workers, chunks
    shrink as the work left does (guided scheduling): each is at most the frames still to hand
    out divided by ``TAIL_SHARE`` × workers, so a large catalog keeps each model in one chunk
    while the last chunks are single frames and the workers finish close together. A worker
    keeps the model it loaded last, so the chunks of a model cost one load per worker.
    ``metadata`` maps (model, variant) to the ``ImageMetadata`` of its derivatives.
    """
    total = sum(len(job.pending) for job in jobs)
    if total == 0:
        return []
    left = total
    tasks = []
    for job in sorted(jobs, key=lambda j: -len(j.pending)):
        start = 0
        while start < len(job.pending):
            stop = len(job.pending)
            if workers > 1:  # the job's rest in near-equal pieces of at most the guided size
                pieces = math.ceil((stop - start) / math.ceil(left / (TAIL_SHARE * workers)))
                stop = start + math.ceil((stop - start) / pieces)
            frames = tuple((f.shot, f.index) for f in job.pending[start:stop])
            tasks.append(
                RenderTask(job.model, job.inputs_sha256, job.variant, frames,
                           job.preset or preset, job.preset_sha256 or preset_hash,
                           bits, exr, animated, tuple(preset.derivatives),
                           (metadata or {}).get((job.model, job.variant), NO_METADATA))
            )
            left -= stop - start
            start = stop
    return tasks
