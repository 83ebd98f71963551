"""Showing text that came from a file: literally, never as terminal control."""

from __future__ import annotations

import re

_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")


def literal(text: str) -> str:
    """``text`` with every C0/C1 control character written as a visible ``\\xNN`` escape."""
    return _CONTROL.sub(lambda m: f"\\x{ord(m.group()):02x}", str(text))
