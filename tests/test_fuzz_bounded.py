"""Fuzzing under a memory cap: mutated GLB bytes, glTF JSON and preset TOML (tests/fuzz_child.py)
run in a child process whose address space is limited with setrlimit(RLIMIT_AS), so a budget
that fails to hold ends as a MemoryError there instead of taking the machine."""

import resource
import subprocess
import sys
from pathlib import Path

import pytest

CHILD = Path(__file__).parent / "fuzz_child.py"
CAP = 3 << 30  # bytes of address space: the interpreter, numpy and Pillow need about 1 GiB


def run_child(examples: int, folder: Path) -> subprocess.CompletedProcess:
    def cap():
        resource.setrlimit(resource.RLIMIT_AS, (CAP, CAP))

    return subprocess.run([sys.executable, str(CHILD), str(examples), str(folder)],
                          capture_output=True, text=True, preexec_fn=cap, timeout=1800)


def test_fuzzed_inputs_raise_only_our_errors(tmp_path):
    done = run_child(40, tmp_path)
    assert done.returncode == 0, done.stderr[-3000:]


@pytest.mark.slow
def test_fuzzed_inputs_raise_only_our_errors_long(tmp_path):
    done = run_child(400, tmp_path)
    assert done.returncode == 0, done.stderr[-3000:]


def test_the_cap_is_real(tmp_path):
    # the same cap makes a 4 GiB allocation fail in the child: the fuzzing above runs under it
    code = "import numpy\ntry:\n    numpy.ones(1 << 32, numpy.uint8)\nexcept MemoryError:\n" \
           "    print('capped')\n"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          preexec_fn=lambda: resource.setrlimit(resource.RLIMIT_AS, (CAP, CAP)))
    assert done.stdout.strip() == "capped"
