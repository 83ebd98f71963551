"""Reference text for the README, generated from the code so it cannot drift from it.

    python -m shots.docs                        # print both references
    python -m shots.docs --write README.md      # refresh the generated sections in place
    python -m shots.docs --check README.md      # exit 1 when they are out of date

The command-line reference walks the click commands of the typer app (``shots.cli.app``); the
preset reference walks the pydantic models of ``shots.presets``. Each lands between a pair of
marker comments (``<!-- reference:cli:start -->`` … ``<!-- reference:cli:end -->``, the same for
``presets``); the rest of the file is left as it is.

A key's description is its ``Field(description=...)`` when it has one, else an entry in
``KEY_NOTES`` below, else the comment at the end of its line in ``shots/presets.py``.
"""

from __future__ import annotations

import argparse
import ast
import inspect
import io
import sys
import textwrap
import tokenize
import tomllib
import types
import typing
from pathlib import Path

from annotated_types import Ge, Gt, Le, Lt, MaxLen, MinLen
from pydantic import BaseModel, PlainValidator, StringConstraints
from pydantic_core import PydanticUndefined

from shots import presets
from shots.errors import ShotsError

SECTIONS = ("cli", "presets")
REGENERATE = "python -m shots.docs --write README.md"

# Descriptions for keys whose line in shots/presets.py carries no (or too short a) comment.
# Keys are "Class.field" with the class that defines the field; tests/test_docs.py checks that
# every entry still names a real key.
SHOT_NAME = "Names the shot in file names, manifests and reports; unique within the preset."
KEY_NOTES = {
    "Preset.description": "One line saying what the preset is for (listed below for built-ins).",
    "Preset.lights": "The light rig: one `[[lights]]` table per light.",
    "Preset.shots": "The shots to take: one `[[shots]]` table per shot.",
    "Preset.derivatives": "Published versions of every frame: one `[[derivatives]]` table each.",
    "Preset.publish": "Product table and copyright line for the derivatives.",
    "ImageSettings.width": "Image width in pixels.",
    "ImageSettings.height": "Image height in pixels.",
    "ImageSettings.samples": "Camera samples per pixel. 0 (the default) samples adaptively: each "
                             "pixel takes sets of samples until its estimated error is under "
                             "`noise_target`; N forces exactly N in every pixel (previews, "
                             "references; a power of two is stratified exactly).",
    "ImageSettings.noise_target": "Adaptive sampling stops a pixel when its estimated error (one "
                                  "standard error, with its 3×3 neighbours) is under this many "
                                  "8-bit sRGB codes (0–255) of the displayed colour (root mean "
                                  "square over red, green and blue) or alpha.",
    "ImageSettings.min_samples": "Adaptive sampling: samples every pixel takes before its error "
                                 "is judged (at least 8: two sets of 4 give a variance).",
    "ImageSettings.max_samples": "Adaptive sampling: the most samples a pixel takes.",
    "ImageSettings.seed": "Base of every frame's random numbers: the same seed gives the same "
                          "pixels on any machine and thread count.",
    "LookSettings.exposure": "Exposure in stops: linear light is multiplied by 2^exposure "
                             "before the tone map.",
    "LookSettings.tone_map": "How linear light becomes display values: `neutral` is Khronos PBR "
                             "Neutral (base colours kept, highlights rolled off), `none` clips.",
    "LookSettings.model_lights": "Which lights shine: `rig` the preset's lights only (a model's "
                                 "own KHR_lights_punctual lights are named and ignored), `model` "
                                 "the model's lights only (candela, lux), `both` together.",
    "ModelSettings.units": "The unit the model was exported in (glTF says metres); `auto` picks "
                           "the unit that makes the model about a metre across and says so.",
    "ModelSettings.up_axis": "`z` stands a Z-up export upright (glTF says +Y up).",
    "BackgroundSettings.kind": "What camera rays that miss the model show; `transparent` "
                               "writes alpha 0, `environment` shows the environment light.",
    "BackgroundSettings.color": "Display sRGB colour of a solid background, or the top of a "
                                "gradient.",
    "BackgroundSettings.color_bottom": "Display sRGB colour at the bottom of a gradient.",
    "EnvironmentSettings.zenith": "Linear RGB radiance of the studio gradient straight up.",
    "EnvironmentSettings.horizon": "Linear RGB radiance of the studio gradient at the horizon.",
    "EnvironmentSettings.nadir": "Linear RGB radiance of the studio gradient straight down.",
    "EnvironmentSettings.intensity": "Scale of the environment light (gradient or image).",
    "EnvironmentSettings.rotation_deg": "Turns the environment about +Y, in degrees.",
    "GroundSettings.kind": "What the product stands on: `shadow_catcher` is invisible except for "
                           "the shadow it receives (written to alpha), `plane` a visible floor, "
                           "`sweep` a floor curving up into a backdrop behind the product.",
    "GroundSettings.color": "Linear RGB albedo of a visible floor or sweep.",
    "GroundSettings.roughness": "Roughness of a visible floor or sweep.",
    "GroundSettings.shadow_strength": "How dark a shadow catcher's shadow is: 0 none, 1 full.",
    "GroundSettings.sweep_radius": "Radius of the curve from floor to backdrop, in metres.",
    "GroundSettings.sweep_distance": "How far behind the camera target the backdrop stands, "
                                     "in metres.",
    "RigLight.kind": "`area`: a rectangular softbox (soft shadows); `directional`, `point`, "
                     "`spot`: hard light.",
    "RigLight.attached_to": "`camera`: the light moves with the camera, so every view is lit "
                            "alike; `world`: fixed around the model.",
    "RigLight.azimuth_deg": "Degrees about +Y from the camera's side of the model (0) toward "
                            "the camera's right (+90); 180 is behind the model.",
    "RigLight.elevation_deg": "Degrees above the horizon.",
    "RigLight.distance": "From the model's centre, in bounding radii.",
    "RigLight.intensity": "An area light's radiance; for the other kinds the illuminance at the "
                          "model's centre.",
    "RigLight.color": "Linear RGB.",
    "RigLight.size": "Area lights: width and height, in bounding radii.",
    "RigLight.inner_cone_deg": "Spot lights: half-angle of the full-intensity core.",
    "Lens.yfov_deg": "Vertical field of view, in degrees.",
    "Lens.xfov_deg": "Horizontal field of view, in degrees.",
    "Lens.focal_length_mm": "Focal length on a sensor `sensor_width_mm` wide (50 mm when no "
                            "lens key is given).",
    "FramedShot.name": SHOT_NAME,
    "FramedShot.projection": "`orthographic` takes no lens keys.",
    "FramedShot.framing": "`sphere` fits the bounding sphere, `tight` the model's projected "
                          "outline to `fill`, `scale` a fixed `pixels_per_metre`.",
    "FramedShot.fill": "Share of the frame the model fills (0.8 when neither fill nor margin "
                       "is given).",
    "FramedShot.margin": "Free share of the frame on each side (fill = 1 − 2·margin).",
    "FramedShot.pixels_per_metre": "Pixels per metre at the target, with framing = `scale`.",
    "FramedShot.elevation_deg": "Camera elevation above the horizon, in degrees.",
    "ViewsShot.kind": "One still per named view.",
    "ViewsShot.views": "Named directions: azimuth about +Y from the front (+Z) toward the "
                       "model's left (+X); `top` and `bottom` look straight down and up.",
    "ViewsShot.same_scale": "With framing = `tight`: every view at one distance, so the views "
                            "share one scale.",
    "TurntableShot.kind": "A full turn about +Y.",
    "TurntableShot.frames": "Equal steps over 360°.",
    "TurntableShot.start_azimuth_deg": "Azimuth of the first frame, degrees from the front.",
    "OrbitShot.kind": "An arc between two azimuths.",
    "OrbitShot.frames": "Frames along the arc, both ends included.",
    "OrbitShot.from_azimuth_deg": "Azimuth of the first frame, degrees from the front.",
    "OrbitShot.to_azimuth_deg": "Azimuth of the last frame.",
    "OrbitShot.to_elevation_deg": "Elevation of the last frame (absent: `elevation_deg`).",
    "OrbitShot.easing": "How the camera speeds up and slows down along the arc.",
    "PathKey.time": "When the camera passes this key (any unit); give every key a time or none.",
    "PathKey.eye": "Camera position, in the shot's `space`.",
    "PathKey.target": "Where the camera looks, in the shot's `space`.",
    "PathKey.yfov_deg": "Vertical field of view at this key.",
    "PathKey.focal_length_mm": "Focal length at this key.",
    "PathShot.name": SHOT_NAME,
    "PathShot.kind": "A keyframed camera flight.",
    "PathShot.frames": "Frames along the whole path.",
    "PathShot.space": "`model`: eyes and targets in bounding radii from the model's centre "
                      "(reusable across models); `world`: in metres.",
    "PathShot.keys": "The keyframes, one `[[shots.keys]]` table each.",
    "FileCameraShot.name": SHOT_NAME,
    "FileCameraShot.kind": "A camera stored in the model file.",
    "FileCameraShot.camera": "The glTF camera's name or index.",
}

# Headings for shot base classes whose keys several kinds of shot share.
GROUP_TITLES = {"Lens": "Lens keys", "FramedShot": "Framing keys"}


# --- sections in a Markdown file -------------------------------------------------------------


def markers(name: str) -> tuple[str, str]:
    return f"<!-- reference:{name}:start -->", f"<!-- reference:{name}:end -->"


def generate(name: str) -> str:
    """The Markdown of one generated section ("cli" or "presets")."""
    return {"cli": cli_reference, "presets": preset_reference}[name]()


def section_text(document: str, name: str, source: str = "README.md") -> str:
    """The text between a section's markers, without the blank lines around it.

    Raises
    ------
    ShotsError : a marker is missing or they are out of order.
    """
    start, end = markers(name)
    begin, finish = document.find(start), document.find(end)
    if begin < 0 or finish < begin:
        raise ShotsError(source, None, f"needs the markers {start} and {end}, in that order")
    return document[begin + len(start):finish].strip("\n")


def replace_sections(document: str, sections: dict[str, str], source: str = "README.md") -> str:
    """``document`` with each named section's text replaced."""
    for name, text in sections.items():
        start, end = markers(name)
        section_text(document, name, source)  # both markers present
        head, rest = document.split(start, 1)
        _, tail = rest.split(end, 1)
        document = f"{head}{start}\n\n{text.strip()}\n\n{end}{tail}"
    return document


def stale_sections(document: str, source: str = "README.md") -> list[str]:
    """Names of the sections whose text differs from what the code generates now."""
    return [name for name in SECTIONS
            if section_text(document, name, source) != generate(name).strip("\n")]


# --- the command line --------------------------------------------------------------------------


def cli_reference() -> str:
    """Every ``shots`` command: usage, help, arguments and options with defaults."""
    import typer

    from shots.cli import app

    # typer's commands are click commands (recent typer releases vendor click): use the
    # group's own context class rather than importing click.
    group = typer.main.get_command(app)
    context = group.context_class(group, info_name="shots")
    lines = [
        _first_paragraph(group.help),
        "",
        "`shots --help` lists the commands, `shots COMMAND --help` shows one of them and "
        "`shots --version` prints the version; the same text, generated from the code, follows.",
    ]
    for name, command in _commands(group, context):
        lines += ["", *command_reference(name, command)]
    return "\n".join(lines)


def _commands(group, context, prefix: str = ""):
    """(name, command) of every visible command, a sub-group's as "group sub"."""
    for name in group.list_commands(context):
        command = group.get_command(context, name)
        if command is None or command.hidden:
            continue
        if hasattr(command, "list_commands"):  # a group of commands (`shots preset ...`)
            yield from _commands(command, context, f"{prefix}{name} ")
        else:
            yield f"{prefix}{name}", command


def command_reference(name: str, command) -> list[str]:
    """Markdown lines for one click command."""
    hints = _type_hints(command.callback)
    params = [p for p in command.params if not getattr(p, "hidden", False)]
    arguments = [p for p in params if p.param_type_name == "argument"]
    usage = " ".join(
        ["shots", name, "[OPTIONS]"]
        + [p.name.upper() if p.required else f"[{p.name.upper()}]" for p in arguments]
    )
    lines = [f"#### `shots {name}`", "", f"    {usage}", ""]
    lines += [_clean_help(command.help), ""]
    lines += ["| Argument or option | Value | Default | Meaning |", "| --- | --- | --- | --- |"]
    for param in params:
        lines.append(_param_row(param, hints.get(param.name)))
    return lines


def _param_row(param, annotation) -> str:
    is_argument = param.param_type_name == "argument"
    if is_argument:
        names = f"`{param.name.upper()}`"
    else:
        opts = sorted(param.opts, key=len, reverse=True) + list(param.secondary_opts)
        names = ", ".join(f"`{o}`" for o in opts)
    flag = bool(getattr(param, "is_flag", False))
    value = "flag" if flag else _value_word(annotation)
    if param.multiple:
        value += ", repeatable"
    if param.required:
        default = "required"
    elif flag:
        default = "on" if param.default else "off"
    elif param.default is None or param.default == ():
        default = "—"
    else:
        default = f"`{_plain(param.default)}`"
    help_text = " ".join((getattr(param, "help", None) or "").split())
    return f"| {names} | {value} | {default} | {_cell(help_text)} |"


def _type_hints(callback) -> dict:
    if callback is None:
        return {}
    try:
        return typing.get_type_hints(callback, include_extras=True)
    except (NameError, TypeError):
        return {}


def _value_word(annotation) -> str:
    """A command-line value's kind in words, from the Python annotation of its parameter."""
    core = _strip(annotation)
    if typing.get_origin(core) in (list, tuple):
        core = _strip(typing.get_args(core)[0])
    words = {Path: "path", str: "text", int: "integer", float: "number", bool: "flag"}
    return words.get(core, "text")


def _strip(annotation):
    """``annotation`` without ``Annotated`` and ``| None``."""
    while True:
        if typing.get_origin(annotation) is typing.Annotated:
            annotation = typing.get_args(annotation)[0]
        elif _is_optional(annotation):
            annotation = next(a for a in typing.get_args(annotation) if a is not type(None))
        else:
            return annotation


def _is_union(annotation) -> bool:
    return typing.get_origin(annotation) in (typing.Union, types.UnionType)


def _is_optional(annotation) -> bool:
    args = typing.get_args(annotation)
    return _is_union(annotation) and type(None) in args and len(args) == 2


def _plain(value) -> str:
    return value.as_posix() if isinstance(value, Path) else str(value)


def _clean_help(text: str | None) -> str:
    text = inspect.cleandoc(text or "").split("\f", 1)[0]
    return "\n".join(" ".join(p.split()) for p in text.split("\n\n"))


def _first_paragraph(text: str | None) -> str:
    return _clean_help(text).split("\n", 1)[0]


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


# --- presets -----------------------------------------------------------------------------------


def preset_reference() -> str:
    """Every preset table and key (type, default, allowed values, meaning) and the built-ins."""
    top = presets.Preset
    tables = [k for k, f in top.model_fields.items() if _is_model(_strip(f.annotation))]
    lines = [*_preset_intro(), "", "#### Top level", ""]
    lines += _key_table(top, [k for k in top.model_fields if k not in tables],
                        extra_rows=[_extends_row()])
    rules = validator_rules(top)
    if rules:
        lines += ["", "Refused: " + "; ".join(rules) + "."]
    for key in tables:
        table = _strip(top.model_fields[key].annotation)
        lines += ["", f"#### `[{key}]`", "", *_model_block(table)]
    lines += ["", "#### `[[lights]]`", "", *_model_block(presets.RigLight)]
    lines += ["", "#### `[[derivatives]]`", "", *_model_block(presets.Derivative)]
    lines += ["", *_shots_reference()]
    lines += ["", *builtin_presets_reference()]
    return "\n".join(lines)


def _preset_intro() -> list[str]:
    """The loader's rules, from the docstrings of ``shots.presets`` and its ``Table`` model."""
    paragraphs = (presets.__doc__ or "").strip().split("\n\n")
    literal = next((i for i, p in enumerate(paragraphs) if p.startswith(" ")), len(paragraphs))
    rules = [_rst(" ".join(p.split())) for p in paragraphs[literal + 1:]]
    table = _rst(" ".join(inspect.cleandoc(presets.Table.__doc__ or "").split()))
    table = table.removeprefix("A TOML table: ")
    return [
        "A preset is a TOML file; every key is optional, and the defaults below apply. "
        "Pass a built-in preset's name or a file's path to `--preset`.",
        "",
        *[line for rule in rules for line in (rule, "")],
        f"{table[:1].upper()}{table[1:]} An integer is fine where a number is expected.",
    ]


def _extends_row() -> str:
    return ("| `extends` | string or array of strings | absent | a built-in preset's name, or a "
            "path relative to this file | Presets to start from, merged in order before this "
            "file's keys. |")


def _docstring(cls: type) -> list[str]:
    """The paragraphs of a class's own docstring, each followed by a blank line."""
    doc = cls.__dict__.get("__doc__")
    if not doc:
        return []
    paragraphs = inspect.cleandoc(doc).split("\n\n")
    return [line for p in paragraphs for line in (_rst(" ".join(p.split())), "")]


def _model_block(model: type[BaseModel], keys=None, docstring: bool = True) -> list[str]:
    """A model's docstring, its keys' table and the combinations its validators refuse."""
    lines = _docstring(model) if docstring else []
    keys = list(model.model_fields) if keys is None else keys
    if keys:
        lines += _key_table(model, keys)
    rules = validator_rules(model)
    if rules:
        lines += ["", "Refused: " + "; ".join(rules) + "."]
    return lines


def _key_table(model: type[BaseModel], keys: list[str], extra_rows=()) -> list[str]:
    rows = [key_row(model, key) for key in keys]
    rows[1:1] = list(extra_rows)  # extends sits after description
    return ["| Key | Type | Default | Allowed | Meaning |", "| --- | --- | --- | --- | --- |",
            *rows]


def key_row(model: type[BaseModel], key: str) -> str:
    """One Markdown table row: key, type, default, allowed values, meaning."""
    field = model.model_fields[key]
    kind, allowed = describe_type(field.annotation, field.metadata)
    return (f"| `{key}` | {kind} | {_default(field)} | {_cell(allowed) or ' '} "
            f"| {_cell(describe_key(model, key))} |")


def describe_key(model: type[BaseModel], key: str) -> str:
    """A key's meaning: its Field description, else KEY_NOTES, else its line's comment."""
    field = model.model_fields[key]
    if field.description:
        return field.description
    owner = defining_class(model, key)
    note = KEY_NOTES.get(f"{owner.__name__}.{key}")
    if note:
        return note
    comment = field_comments(owner).get(key, "")
    return comment[:1].upper() + comment[1:] + ("." if comment and comment[-1] != "." else "")


def defining_class(model: type[BaseModel], key: str) -> type:
    """The class in ``model``'s MRO whose body declares ``key``."""
    for cls in model.__mro__:
        if key in cls.__dict__.get("__annotations__", {}):
            return cls
    return model


def field_comments(cls: type) -> dict[str, str]:
    """``{key: comment}`` for the lines ``key: type = ...  # comment`` in ``cls``'s body."""
    try:
        source = textwrap.dedent(inspect.getsource(cls))
    except (OSError, TypeError):
        return {}
    lines = source.splitlines()
    comments = {}
    for token in tokenize.generate_tokens(io.StringIO(source).readline):
        if token.type != tokenize.COMMENT:
            continue
        line = lines[token.start[0] - 1]
        head = line[: token.start[1]]
        if line.startswith("    ") and not line.startswith("     ") and ":" in head:
            name = head.strip().split(":", 1)[0].strip()
            if name.isidentifier():
                comments[name] = token.string.lstrip("#").strip()
    return comments


def validator_rules(model: type[BaseModel]) -> list[str]:
    """The messages of the ``ValueError`` raised by validators in ``model``'s own body."""
    try:
        tree = ast.parse(textwrap.dedent(inspect.getsource(model)))
    except (OSError, TypeError, SyntaxError):
        return []
    rules = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Raise) and isinstance(node.exc, ast.Call) and \
                getattr(node.exc.func, "id", "") == "ValueError" and node.exc.args:
            text = _message_text(node.exc.args[0])
            if text:
                rules.append(f"“{text}”")
    return rules


def _message_text(node) -> str:
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return node.value
    if isinstance(node, ast.JoinedStr):
        return "".join(v.value if isinstance(v, ast.Constant) else "…" for v in node.values)
    return ""


def describe_type(annotation, metadata=()) -> tuple[str, str]:
    """(type in TOML words, allowed values or bounds) of a schema annotation."""
    metadata = list(metadata)
    core = annotation
    while True:
        if typing.get_origin(core) is typing.Annotated:
            core, *extra = typing.get_args(core)
            metadata += extra
        elif _is_optional(core):
            core = next(a for a in typing.get_args(core) if a is not type(None))
        else:
            break
    if any(isinstance(m, PlainValidator) for m in metadata):
        members = [_scalar_word(a) for a in typing.get_args(core)] or [_scalar_word(core)]
        return " or ".join(members), _bounds(metadata)
    origin = typing.get_origin(core)
    if origin is typing.Literal:
        return "string", ", ".join(f"`{v}`" for v in typing.get_args(core))
    if origin is tuple:
        items = typing.get_args(core)
        item_kind, item_allowed = describe_type(items[0])
        plural = {"number": "numbers", "integer": "integers", "string": "strings"}
        kind = f"array of {len(items)} {plural.get(item_kind, item_kind)}"
        return kind, f"each {item_allowed}" if item_allowed else ""
    if origin is list:
        item = _strip(typing.get_args(core)[0])
        members = typing.get_args(item) if _is_union(item) else (item,)
        if all(_is_model(m) for m in members):
            return "array of tables", _bounds(metadata)
        item_kind, item_allowed = describe_type(item)
        allowed = ", ".join(a for a in (item_allowed, _bounds(metadata)) if a)
        return f"array of {item_kind}s", allowed
    if _table_of(core) is not None:
        return "table", ""
    return _scalar_word(core), _bounds(metadata)


def _scalar_word(annotation) -> str:
    return {bool: "boolean", int: "integer", float: "number", str: "string"}.get(
        annotation, getattr(annotation, "__name__", str(annotation)))


def _bounds(metadata) -> str:
    """Numeric bounds as ``0 ≤ x < 0.5``; lengths and patterns in words."""
    low = high = None
    words = []
    for m in metadata:
        if isinstance(m, Ge):
            low = f"{_number(m.ge)} ≤ "
        elif isinstance(m, Gt):
            low = f"{_number(m.gt)} < "
        elif isinstance(m, Le):
            high = f" ≤ {_number(m.le)}"
        elif isinstance(m, Lt):
            high = f" < {_number(m.lt)}"
        elif isinstance(m, MinLen):
            words.append(f"at least {m.min_length}")
        elif isinstance(m, MaxLen):
            words.append(f"at most {m.max_length}")
        elif isinstance(m, StringConstraints):
            if m.pattern == r"^[A-Za-z0-9_-]+$":
                words.append("letters, digits, `-` and `_`")
            elif m.pattern:
                words.append(f"matching `{m.pattern}`")
            if m.max_length:
                words.append(f"at most {m.max_length} characters")
    if low or high:
        words.insert(0, f"{low or ''}x{high or ''}")
    return ", ".join(words)


def _number(value) -> str:
    return f"{value:g}" if isinstance(value, float) and abs(value) < 1e6 else str(value)


def _default(field) -> str:
    if field.default_factory is not None:
        value = field.default_factory()
    elif field.default is PydanticUndefined:
        return "required"
    else:
        value = field.default
    if value is None:
        return "absent"
    if isinstance(value, BaseModel):
        return "table"
    if value == [] or value == ():
        return "`[]`"
    return f"`{toml_value(value)}`"


def toml_value(value) -> str:
    """``value`` as it is written in TOML."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, list | tuple):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return str(value)


def _table_of(annotation):
    """The pydantic model an annotation holds (directly or as array items), else None."""
    core = _strip(annotation)
    if typing.get_origin(core) is list:
        core = _strip(typing.get_args(core)[0])
    return core if _is_model(core) else None


def _is_model(annotation) -> bool:
    return isinstance(annotation, type) and issubclass(annotation, BaseModel)


def _shots_reference() -> list[str]:
    """``[[shots]]``: keys every shot takes, the groups some share, then each kind's own keys."""
    kinds = presets.SHOT_KINDS
    common = ("name", "kind")
    lines = [
        "#### `[[shots]]`",
        "",
        "One table per shot; `kind` says which keys apply. Every shot takes:",
        "",
        *_key_table(next(iter(kinds.values())), ["name"]),
        f"| `kind` | string | required | {', '.join(f'`{k}`' for k in kinds)} "
        "| Which kind of shot this is (the sections below). |",
    ]
    groups = shot_groups()
    for group in groups:
        users = ", ".join(f"`{k}`" for k, cls in kinds.items() if issubclass(cls, group))
        lines += ["", f"##### {_group_title(group)} ({users})", ""]
        lines += _model_block(group, [k for k in own_fields(group) if k not in common])
    for kind, cls in kinds.items():
        lines += ["", f'##### `kind = "{kind}"`', "", *_docstring(cls)]
        shared = [_group_title(g).lower() for g in groups if issubclass(cls, g)]
        if shared:
            lines += [f"Also takes the {' and '.join(shared)} above.", ""]
        keys = [k for k in own_fields(cls) if k not in common]
        lines += _model_block(cls, keys, docstring=False)
        for key in keys:
            nested = _table_of(cls.model_fields[key].annotation)
            if nested is not None:
                lines += ["", f"`[[shots.{key}]]`, in a `{kind}` shot:", ""]
                lines += _model_block(nested)
    while lines[-1] == "":
        lines.pop()
    return lines


def shot_groups() -> list[type]:
    """Base classes of the shot kinds that carry keys (lens, framing), in first-use order."""
    groups = []
    for cls in presets.SHOT_KINDS.values():
        for base in cls.__mro__[1:]:
            is_group = isinstance(base, type) and issubclass(base, presets.Table)
            if is_group and base is not presets.Table and base not in groups:
                groups.append(base)
    return groups


def _group_title(group: type) -> str:
    return GROUP_TITLES.get(group.__name__, f"{group.__name__} keys")


def own_fields(cls: type[BaseModel]) -> list[str]:
    """The keys ``cls`` declares itself (not inherited)."""
    return [k for k in cls.model_fields if defining_class(cls, k) is cls]


def builtin_presets_reference() -> list[str]:
    """The shipped presets: name, what they extend, image size, shots and description."""
    lines = [
        "#### Built-in presets",
        "",
        "Shipped in `presets/`; pass the name to `--preset`, or `extends` one in your own file.",
        "",
        "| Preset | Extends | Image | Shots | Description |",
        "| --- | --- | --- | --- | --- |",
    ]
    for name in presets.builtin_preset_names():
        path = presets.builtin_folder() / f"{name}.toml"
        preset = presets.load_preset(name)
        with open(path, "rb") as handle:
            parents = tomllib.load(handle).get("extends", [])
        parents = [parents] if isinstance(parents, str) else parents
        shots = ", ".join(_shot_summary(shot) for shot in preset.shots) or "— (a look only)"
        size = f"{preset.image.width}×{preset.image.height}"
        extends = ", ".join(f"`{p}`" for p in parents) or "—"
        lines.append(f"| `{name}` | {extends} | {size} | {_cell(shots)} "
                     f"| {_cell(preset.description)} |")
    return lines


def _shot_summary(shot) -> str:
    if shot.kind == "views":
        return f"`{shot.name}`: {len(shot.views)} view{'s' if len(shot.views) > 1 else ''}"
    if hasattr(shot, "frames"):
        return f"`{shot.name}`: {shot.kind}, {shot.frames} frames"
    return f"`{shot.name}`: {shot.kind}"


def _rst(text: str) -> str:
    """reStructuredText inline literals (````x````) as Markdown code (```x```)."""
    return text.replace("``", "`")


# --- command line ------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m shots.docs", description=__doc__.split(
        "\n", 1)[0])
    action = parser.add_mutually_exclusive_group()
    action.add_argument("--write", metavar="FILE", nargs="?", const="README.md",
                        help="replace the generated sections of FILE (default README.md)")
    action.add_argument("--check", metavar="FILE", nargs="?", const="README.md",
                        help="exit 1 when FILE's generated sections are out of date")
    args = parser.parse_args(argv)
    try:
        if args.write:
            path = Path(args.write)
            document = path.read_text(encoding="utf-8")
            updated = replace_sections(document, {n: generate(n) for n in SECTIONS}, str(path))
            if updated != document:
                path.write_text(updated, encoding="utf-8")
            print(f"{path}: reference sections up to date")
            return 0
        if args.check:
            path = Path(args.check)
            stale = stale_sections(path.read_text(encoding="utf-8"), str(path))
            if stale:
                print(f"{path}: out of date: {', '.join(stale)} reference; run `{REGENERATE}`",
                      file=sys.stderr)
                return 1
            print(f"{path}: reference sections up to date")
            return 0
    except (ShotsError, OSError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    for name in SECTIONS:
        print(generate(name), end="\n\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
