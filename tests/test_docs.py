"""The README against the code: generated references, commands, the preset example.

The oracle is the code itself: the typer app (``shots.cli.app``) for commands and options, the
pydantic schema in ``shots/presets.py`` and the preset loader for keys and the example preset.
"""

from __future__ import annotations

import re
import shlex
import tomllib
import typing
from pathlib import Path

import pytest
import typer

from shots import docs, presets
from shots.cli import app
from shots.errors import PresetError

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
HOW_TO_FIX = f"README.md is out of date: run `{docs.REGENERATE}` and commit the result"


@pytest.fixture(scope="module")
def readme() -> str:
    return README.read_text(encoding="utf-8")


def cli_commands() -> dict:
    """The click commands of the typer app, by name; a group's as "group command"."""
    group = typer.main.get_command(app)
    context = group.context_class(group, info_name="shots")
    commands = {}
    for name in group.list_commands(context):
        command = group.get_command(context, name)
        if hasattr(command, "list_commands"):  # a group such as `shots preset`
            commands.update({f"{name} {sub}": command.get_command(context, sub)
                             for sub in command.list_commands(context)})
        else:
            commands[name] = command
    return commands


def section(text: str, heading: str) -> str:
    """The body of a ``## heading`` section, up to the next ``## `` heading."""
    match = re.search(rf"^## {re.escape(heading)}\n(.*?)(?=^## |\Z)", text, re.S | re.M)
    assert match, f"README.md has no '## {heading}' section"
    return match.group(1)


def shots_invocations(text: str) -> list[list[str]]:
    """Every ``shots ...`` command in the indented code lines of ``text`` (fenced blocks
    skipped), split into words; ``a && b`` chains count as separate commands."""
    found, fenced = [], False
    for line in text.splitlines():
        if line.startswith("```"):
            fenced = not fenced
        if fenced or not line.startswith("    "):
            continue
        for part in line.split("&&"):
            words = shlex.split(part)
            if words and Path(words[0]).name == "shots":
                found.append(words)
    return found


def check_invocation(words: list[str], commands: dict) -> None:
    assert len(words) > 1, f"'{' '.join(words)}' names no command"
    name = words[1]
    if len(words) > 2 and f"{name} {words[2]}" in commands:  # a group's command
        name, words = f"{name} {words[2]}", [words[0], f"{name} {words[2]}", *words[3:]]
    assert name in commands, f"'{' '.join(words)}': shots has no command {name!r} " \
                             f"(commands: {', '.join(commands)})"
    known = {"--help"}
    for param in commands[name].params:
        known.update(param.opts if param.param_type_name == "option" else ())
        known.update(param.secondary_opts)
    for word in words[2:]:
        option = word.strip("[]").split("=", 1)[0]
        if option.startswith("-") and option != "-":
            assert option in known, f"'{' '.join(words)}': shots {name} has no option " \
                                    f"{option!r} (options: {', '.join(sorted(known))})"


# --- generated sections ------------------------------------------------------------------------


@pytest.mark.parametrize("name", docs.SECTIONS)
def test_generated_section_is_current(readme, name):
    # The README's section must be exactly what the code generates now; a CLI or preset schema
    # change without regenerating fails here.
    assert docs.section_text(readme, name) == docs.generate(name).strip("\n"), HOW_TO_FIX


def test_check_and_write_round_trip(readme, tmp_path):
    start, end = docs.markers("presets")
    head, rest = readme.split(start, 1)
    tail = rest.split(end, 1)[1]
    stale = tmp_path / "README.md"
    stale.write_text(f"{head}{start}\nold text\n{end}{tail}", encoding="utf-8")
    assert docs.main(["--check", str(stale)]) == 1
    assert docs.main(["--write", str(stale)]) == 0
    assert docs.main(["--check", str(stale)]) == 0
    # the section is back and everything outside the markers is kept as it was
    assert stale.read_text(encoding="utf-8") == readme


def test_missing_markers_are_an_error(tmp_path):
    bare = tmp_path / "README.md"
    bare.write_text("# no markers here\n")
    assert docs.main(["--check", str(bare)]) == 2
    assert docs.main(["--write", str(bare)]) == 2
    assert bare.read_text() == "# no markers here\n"


def test_cli_reference_lists_every_command_and_option(readme):
    reference = docs.section_text(readme, "cli")
    for name, command in cli_commands().items():
        assert f"#### `shots {name}`" in reference
        for param in command.params:
            for opt in param.opts if param.param_type_name == "option" else ():
                assert f"`{opt}`" in reference, f"shots {name} {opt} missing: {HOW_TO_FIX}"


# --- commands named in the README --------------------------------------------------------------


def test_quick_start_names_real_commands(readme):
    invocations = shots_invocations(section(readme, "Quick start"))
    assert invocations, "the quick start runs no shots command"
    for words in invocations:
        check_invocation(words, cli_commands())


def test_every_readme_command_is_real(readme):
    # Walkthrough, Commands and the generated usage lines alike: real commands, real options.
    invocations = shots_invocations(readme)
    assert {words[1] for words in invocations} >= {"render", "plan", "batch", "check", "demo"}
    for words in invocations:
        check_invocation(words, cli_commands())


# --- presets -----------------------------------------------------------------------------------


def schema_models() -> set[type]:
    """Every table model reachable from ``Preset``, walked here independently of shots.docs."""
    seen, todo = set(), [presets.Preset]
    while todo:
        model = todo.pop()
        if model in seen:
            continue
        seen.add(model)
        for field in model.model_fields.values():
            stack = [field.annotation]
            while stack:
                annotation = stack.pop()
                if isinstance(annotation, type) and issubclass(annotation, presets.Table):
                    todo.append(annotation)
                stack.extend(a for a in typing.get_args(annotation) if a is not None)
    return seen


def test_every_preset_key_is_described(readme):
    reference = docs.section_text(readme, "presets")
    models = schema_models()
    assert {presets.RigLight, presets.PathKey, *presets.SHOT_KINDS.values()} <= models
    for model in models:
        for key, field in model.model_fields.items():
            if isinstance(field.annotation, type) and issubclass(field.annotation, presets.Table):
                assert f"#### `[{key}]`" in reference, f"table [{key}] is missing"
                continue
            rows = [r for r in reference.splitlines() if r.startswith(f"| `{key}` |")]
            assert rows, f"{model.__name__}.{key} is missing from the preset reference"
            assert docs.describe_key(model, key), (
                f"{model.__name__}.{key} has no description: give it Field(description=...) "
                "or an end-of-line comment in shots/presets.py")


def test_key_notes_name_real_keys():
    for entry in docs.KEY_NOTES:
        owner, key = entry.split(".")
        model = getattr(presets, owner)
        assert key in model.model_fields, f"KEY_NOTES[{entry!r}]: no such key"
        assert docs.defining_class(model, key) is model, f"KEY_NOTES[{entry!r}]: declared in a " \
                                                         "base class"


def test_every_builtin_preset_is_listed(readme):
    reference = docs.section_text(readme, "presets")
    names = presets.builtin_preset_names()
    assert len(names) == len(list((ROOT / "presets").glob("*.toml")))
    for name in names:
        rows = [r for r in reference.splitlines() if r.startswith(f"| `{name}` |")]
        assert len(rows) == 1, f"built-in preset {name!r} is not in the reference"
        assert presets.load_preset(name).description in rows[0]


def toml_examples(readme: str) -> list[str]:
    blocks = re.findall(r"^```toml\n(.*?)^```", section(readme, "Walkthrough"), re.S | re.M)
    assert len(blocks) == 2, "expected two TOML examples in the walkthrough (style, publishing)"
    return blocks


def toml_example(readme: str) -> str:
    return toml_examples(readme)[0]


def test_walkthrough_publishing_example_is_the_demo_preset(readme):
    # the publishing example shows presets/demo-thumbnail.toml's keys with their values
    example = tomllib.loads(toml_examples(readme)[1])
    shipped = tomllib.loads((presets.builtin_folder() / "demo-thumbnail.toml").read_text())
    assert example["extends"] == shipped["extends"] and example["publish"] == shipped["publish"]
    for shown, real in zip(example["derivatives"], shipped["derivatives"], strict=True):
        assert shown.items() <= real.items(), (shown, real)


def test_walkthrough_preset_loads_and_extends_thumbnail(readme, tmp_path):
    path = tmp_path / "sawdust-lane-thumbnail.toml"
    path.write_text(toml_example(readme))
    preset = presets.load_preset(path)
    thumbnail = presets.load_preset("thumbnail")
    # set in the example
    assert (preset.image.width, preset.image.height) == (640, 640)
    assert preset.background.kind == "solid"
    assert preset.model.units == "auto"
    assert [shot.views for shot in preset.shots] == [["front_left", "front"]]
    # inherited through extends: tables merge key by key (shots/presets.py docstring)
    assert preset.image.samples == thumbnail.image.samples
    assert preset.lights == thumbnail.lights and len(preset.lights) > 0
    assert preset.ground == thumbnail.ground


def test_walkthrough_error_line_is_what_the_loader_says(readme, tmp_path):
    example = toml_example(readme)
    assert "width = 640" in example
    path = tmp_path / "style" / "sawdust-lane-thumbnail.toml"
    path.parent.mkdir()
    path.write_text(example.replace("width = 640", "widht = 640"))
    with pytest.raises(PresetError) as caught:
        presets.load_preset(path)
    shown = [line.strip() for line in section(readme, "Walkthrough").splitlines()
             if line.strip().startswith("error: ")]
    assert shown, "the walkthrough shows no error line"
    expected = str(caught.value).replace(str(path), "style/sawdust-lane-thumbnail.toml")
    assert shown[0] == f"error: {expected}"
