"""What a fresh install relies on: declared dependencies, one version, the licence, the kernel
cache outside the package, and the line that says the renderer is being compiled.

Oracles: the Python Packaging User Guide's core metadata and pyproject.toml specifications
(dependency and dynamic-version fields, PEP 639 ``license``), PEP 561 (``py.typed``), the
installed distributions' own metadata (``importlib.metadata``), and numba's documented cache
settings (``NUMBA_CACHE_DIR``, index files ``*.nbi``).
"""

from __future__ import annotations

import ast
import functools
import importlib.metadata
import io
import os
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from numba import njit
from rich.console import Console
from typer.testing import CliRunner

import shots
from shots import kernel_cache
from shots.cli import app
from shots.warmup import announce_compiles

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
PROJECT = PYPROJECT["project"]


def distribution_name(requirement: str) -> str:
    """'numba>=0.61,<0.69' → 'numba' (names compared normalised, PEP 503)."""
    name = re.match(r"[A-Za-z0-9._-]+", requirement).group(0)
    return re.sub(r"[-_.]+", "-", name).lower()


def declared(*extras: str) -> set[str]:
    requirements = list(PROJECT["dependencies"])
    for extra in extras:
        requirements += PROJECT["optional-dependencies"][extra]
    return {distribution_name(r) for r in requirements}


def imported_top_level(folder: Path) -> set[str]:
    """Top-level modules imported anywhere in ``folder``'s Python files, standard library and
    the folder's own modules left out."""
    names = set()
    for path in folder.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                names.update(alias.name.split(".")[0] for alias in node.names)
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names.add(node.module.split(".")[0])
    local = {p.stem for p in folder.glob("*.py")} | {"shots"}
    return {n for n in names if n not in sys.stdlib_module_names and n not in local}


@functools.cache
def module_providers() -> dict[str, set[str]]:
    """Top-level module → the installed distributions whose files provide it (from each
    distribution's RECORD, so compiled modules such as OpenEXR's count too)."""
    found: dict[str, set[str]] = {}
    for dist in importlib.metadata.distributions():
        name = re.sub(r"[-_.]+", "-", dist.metadata["Name"]).lower()
        for file in dist.files or ():
            top = file.parts[0].split(".")[0]
            if not file.parts[0].endswith((".dist-info", ".pth")):
                found.setdefault(top, set()).add(name)
    return found


@pytest.mark.parametrize(("folder", "extras"), [("shots", ("dask",)), ("tests", ("dev",))])
def test_every_imported_library_is_declared(folder, extras):
    # pyproject.toml specification: what the code imports must be in dependencies (or the extra
    # that the code needs it for), not arrive by chance as another library's dependency.
    allowed = declared(*extras)
    for module in sorted(imported_top_level(ROOT / folder)):
        found = module_providers().get(module, set())
        assert found, f"{folder}/ imports {module}, which no installed distribution provides"
        assert found & allowed, f"{folder}/ imports {module} ({', '.join(found)}): not declared"


def test_libraries_whose_internals_the_kernels_use_have_an_upper_bound():
    # numba.extending intrinsics, numba.core internals and llvmlite.ir change between releases
    for requirement in PROJECT["dependencies"]:
        if distribution_name(requirement) in {"numba", "llvmlite"}:
            assert "<" in requirement, requirement


def test_openexr_lower_bound_has_the_file_api():
    # OpenEXR's Python binding gained OpenEXR.File in 3.3 (its release notes); the code uses it
    (exr,) = [r for r in PROJECT["dependencies"] if distribution_name(r) == "openexr"]
    assert ">=3.3" in exr
    import OpenEXR

    assert hasattr(OpenEXR, "File")


def test_the_version_has_one_source():
    # pyproject.toml specification, "dynamic": the version is read from shots.__version__
    assert "version" not in PROJECT
    assert "version" in PROJECT["dynamic"]
    assert PYPROJECT["tool"]["setuptools"]["dynamic"]["version"] == {"attr": "shots.__version__"}
    assert re.fullmatch(r"\d+\.\d+\.\d+", shots.__version__)


def test_version_option_prints_the_version():
    result = CliRunner().invoke(app, ["--version"])
    assert result.exit_code == 0
    assert result.output.strip() == f"shots {shots.__version__}"


def test_licence_file_matches_the_declared_licence():
    # PEP 639: license is an SPDX expression; license-files names the text shipped with it
    assert PROJECT["license"] == "MIT"
    assert PROJECT["license-files"] == ["LICENSE"]
    text = (ROOT / "LICENSE").read_text(encoding="utf-8")
    assert text.startswith("MIT License")
    assert "The shots developers" in text
    assert "THE SOFTWARE IS PROVIDED \"AS IS\"" in text  # the MIT text's warranty clause


def test_package_is_marked_typed():
    # PEP 561: a py.typed marker inside the package, shipped as package data
    assert (ROOT / "shots" / "py.typed").is_file()
    assert "py.typed" in PYPROJECT["tool"]["setuptools"]["package-data"]["shots"]


# --- the kernel cache -------------------------------------------------------------------------

# Runs in a fresh interpreter: compile one small kernel and say where numba's cache went.
COMPILE_ONE = """
import shots.kernels.sampling as sampling
from numba.core import config
sampling.pcg_hash(7)
print(config.CACHE_DIR)
"""


def compile_in_fresh_interpreter(env_changes: dict) -> str:
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_CACHE_DIR"}
    env.update(env_changes)
    done = subprocess.run([sys.executable, "-c", COMPILE_ONE], env=env, cwd=ROOT,
                          capture_output=True, text=True, check=True)
    return done.stdout.strip()


def cache_files(folder: Path) -> set[Path]:
    return set(folder.rglob("*.nbi")) | set(folder.rglob("*.nbc"))


def test_kernels_are_cached_in_the_users_cache_folder_not_the_package(tmp_path):
    package = Path(shots.__file__).parent
    before = cache_files(package)
    folder = Path(compile_in_fresh_interpreter({"XDG_CACHE_HOME": str(tmp_path)}))
    # platformdirs on Linux: $XDG_CACHE_HOME/<app>; one folder per version and kernel sources
    assert folder.parent == tmp_path / "shots"
    assert folder.name == f"kernels-{shots.__version__}-{kernel_cache.sources_digest()}"
    assert any("pcg_hash" in p.name for p in cache_files(folder))
    assert cache_files(package) == before  # nothing new beside the installed modules


def test_numba_cache_dir_wins(tmp_path):
    chosen = tmp_path / "mine"
    folder = compile_in_fresh_interpreter({"NUMBA_CACHE_DIR": str(chosen),
                                           "XDG_CACHE_HOME": str(tmp_path / "xdg")})
    assert Path(folder) == chosen
    assert cache_files(chosen)
    assert not (tmp_path / "xdg").exists()


def test_a_changed_kernel_source_gets_a_new_cache_folder(tmp_path, monkeypatch):
    # numba checks only the defining file of a kernel; a callee or a constant from another
    # module changing must not load old machine code, so every kernel source is in the name
    copy = tmp_path / "shots"
    (copy / "kernels").mkdir(parents=True)
    for pattern in kernel_cache.KERNEL_SOURCES:
        for path in kernel_cache.PACKAGE.glob(pattern):
            (copy / path.relative_to(kernel_cache.PACKAGE)).write_bytes(path.read_bytes())
    monkeypatch.setattr(kernel_cache, "PACKAGE", copy)
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    original = kernel_cache.kernel_cache_folder()
    brdf = copy / "kernels" / "brdf.py"
    brdf.write_text(brdf.read_text(encoding="utf-8") + "\n# changed\n", encoding="utf-8")
    changed = kernel_cache.kernel_cache_folder()
    assert changed != original
    assert changed.parent == original.parent


# --- saying that the renderer is being compiled ----------------------------------------------


def test_a_compile_is_announced_once_with_its_duration():
    @njit(cache=False)
    def add_one(x):
        return x + 1

    stream = io.StringIO()
    with announce_compiles(Console(file=stream, width=200)):
        assert add_one(1) == 2
        assert add_one(2) == 3  # already compiled: no second announcement
    lines = stream.getvalue().splitlines()
    assert len(lines) == 2
    assert lines[0].startswith("compiling the renderer for this machine: once")
    assert re.fullmatch(r"compiled \d+ functions in \d+ s", lines[1])


def test_nothing_is_said_when_nothing_compiles():
    @njit(cache=False)
    def twice(x):
        return 2 * x

    twice(1)
    stream = io.StringIO()
    with announce_compiles(Console(file=stream, width=200)):
        assert twice(4) == 8
    assert stream.getvalue() == ""
