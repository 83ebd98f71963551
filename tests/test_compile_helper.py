"""The compile helper (``shots.compile_helper``): skipped on a warm cache, gone with its parent,
and its hand-copied argument types equal to the ones a real render compiles."""

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from shots.compile_helper import cache_is_cold, helped_kernels, helping_compile, qualified_name
from shots.demo import demo_models
from shots.warmup import compile_renderer

ROOT = Path(__file__).resolve().parents[1]


def fresh_cache_env(tmp_path: Path) -> dict:
    """This checkout's shots with an empty kernel cache, the helper switched on."""
    path = os.pathsep.join(p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p)
    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path / "cache"), PYTHONPATH=path)
    env.pop("SHOTS_COMPILE_HELPER", None)
    return env


def run_python(code: str, env: dict, cwd: Path, *args: str) -> str:
    done = subprocess.run([sys.executable, "-c", code, *args], env=env, cwd=cwd, capture_output=True,
                          text=True, timeout=600)  # fmt: skip
    assert done.returncode == 0, done.stderr
    return done.stdout


def gone(pid: int, seconds: float) -> bool:
    """True once ``pid`` has exited (a zombie waiting for its reaper counts) within ``seconds``."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        try:
            os.kill(pid, 0)
            stat = Path(f"/proc/{pid}/stat")  # Linux: state Z is a zombie (proc(5))
            if stat.exists() and stat.read_text().rsplit(")", 1)[1].split()[0] == "Z":
                return True
        except (ProcessLookupError, FileNotFoundError):
            return True
        time.sleep(0.1)
    return False


def test_no_helper_on_a_warm_cache(monkeypatch):
    # once the renderer is compiled (or loaded), the cache holds an entry under each of the
    # helper's argument types
    monkeypatch.delenv("SHOTS_COMPILE_HELPER", raising=False)
    compile_renderer()
    assert not cache_is_cold(helped_kernels(albedo=True))
    with helping_compile(albedo=True) as helper:
        assert helper is None


def test_albedo_kernels_have_the_types_the_albedo_pass_uses():
    # the albedo pass calls them from Python, so the loaded signatures are the call's own types
    compile_renderer()
    render_only = len(helped_kernels())
    for dispatcher, signature in helped_kernels(albedo=True)[render_only:]:
        assert tuple(signature) in [tuple(s) for s in dispatcher.signatures], dispatcher


def test_no_helper_when_switched_off(monkeypatch, tmp_path):
    monkeypatch.setenv("SHOTS_COMPILE_HELPER", "0")
    with helping_compile() as helper:
        assert helper is None


HELPER_THEN_ERROR = """
from shots.compile_helper import helping_compile
try:
    with helping_compile() as helper:
        print(helper.process.pid, flush=True)
        raise KeyError("the render failed")
except KeyError:
    pass
print(helper.process.returncode)
"""


def test_helper_is_killed_and_reaped_when_the_block_fails(tmp_path):
    pid, code = run_python(HELPER_THEN_ERROR, fresh_cache_env(tmp_path), tmp_path).split()
    assert code != "None"  # reaped by the block, not left running
    assert gone(int(pid), 1.0)


HELPER_THEN_DIE = """
import os
from shots.compile_helper import helping_compile
block = helping_compile()
helper = block.__enter__()
print(helper.process.pid, flush=True)
os._exit(0)
"""


def test_helper_exits_when_its_parent_dies(tmp_path):
    # no cleanup runs in the parent: the helper sees its stdin close and ends on its own, at
    # once (its first kernel takes seconds, and only then would a write to the closed stdout
    # stop it)
    pid = int(run_python(HELPER_THEN_DIE, fresh_cache_env(tmp_path), tmp_path))
    assert gone(pid, 1.5)


COLD_RENDER = """
import json, sys
import shots.cli
from shots.compile_helper import helped_kernels, qualified_name
sys.argv = ["shots", "render", sys.argv[1], "--size", "16x16", "-o", "out"]
try:
    shots.cli.main()
except SystemExit as stop:
    if stop.code:
        raise
print(json.dumps({qualified_name(d): {
    "used": [str(s) for s in d.signatures], "helper": str(signature),
    "loaded": sum(d.stats.cache_hits.values()), "compiled": sum(d.stats.cache_misses.values()),
} for d, signature in helped_kernels()}))
"""


@pytest.mark.slow
def test_a_cold_render_loads_what_the_helper_compiled(tmp_path):
    # a real first render on an empty cache: the functions the render needed have exactly the
    # helper's argument types, and this process loaded them from the helper's cache entries
    model = min(demo_models(), key=lambda path: path.stat().st_size)
    env = fresh_cache_env(tmp_path)
    report = json.loads(run_python(COLD_RENDER, env, tmp_path, str(model)).splitlines()[-1])
    assert set(report) == {qualified_name(d) for d, _ in helped_kernels()}
    for name, seen in report.items():
        assert seen["used"] == [seen["helper"]], name
        assert (seen["loaded"], seen["compiled"]) == (1, 0), name
