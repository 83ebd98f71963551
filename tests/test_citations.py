"""Comments and docstrings cite sources a reader can open, never our working notes.

A citation names a standard, a specification section, an extension README or a paper. Our notes
(their file, their item numbers, the task text they answered) are not published, so a reference
to them leaves the reader with nothing to check.
"""

import io
import re
import tokenize
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SOURCES = sorted(
    path
    for folder in ("shots", "tests")
    for path in (ROOT / folder).rglob("*.py")
    if path != Path(__file__).resolve()  # this file spells out what it looks for
)
NOTES = [
    re.compile(r"checklist", re.IGNORECASE),
    re.compile(r"shared/(?:re)search|\.\./shared/|/work/shared"),  # spelt so it does not match itself
    re.compile(r"\b(?:the|task) brief\b", re.IGNORECASE),
    re.compile(r"\bresearch notes?\b", re.IGNORECASE),
    # an item id: a capital from the notes' sections and a number, unless it is a CPU cache level
    re.compile(r"(?<![\w.§-])[BCILMPR]\d{1,2}\b(?! cache)"),
]


def prose(path: Path) -> list[tuple[int, str]]:
    """(line, text) of every comment and string literal in a Python file."""
    tokens = tokenize.generate_tokens(io.StringIO(path.read_text(encoding="utf-8")).readline)
    return [(token.start[0], token.string) for token in tokens
            if token.type in (tokenize.COMMENT, tokenize.STRING)]


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_working_note_is_cited(path):
    found = [f"{path.relative_to(ROOT)}:{line}: {match.group(0)!r}"
             for line, text in prose(path) for pattern in NOTES
             for match in pattern.finditer(text)]
    assert not found, "\n".join(found)


def test_the_patterns_catch_what_they_are_for():
    note = "check" + "list"  # the samples are assembled, so this file cites no note itself
    samples = [f"# see {note} L17", f"# {note.title()} §9", "# values: M6", "# (R4)",
               '"""as the brief asks"""', f"# /work/shared/re" f"search/gltf-{note}.md"]
    for sample in samples:
        assert any(pattern.search(sample) for pattern in NOTES), sample
    for fine in ["# 32 MB of L3 cache", "# IEC 61966-2-1 §5.2", "# Walter et al. 2007, eq. 4",
                 "# ISO/IEC 15948", "# PBR 3rd ed. §3.9.2"]:
        assert not any(pattern.search(fine) for pattern in NOTES), fine
