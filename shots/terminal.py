"""Text from files, shown literally on a terminal: no rich markup, no escape sequences.

Names and paths inside a model, a preset or a catalog folder can hold ``[bold]`` (rich markup)
or ESC sequences that clear the screen and print fake lines. Every such text passes through
``literal`` before it is printed.
"""

from __future__ import annotations

import re

from rich.markup import escape

# control characters (U+0000–U+001F, DEL, U+0080–U+009F) and the bidirectional overrides
# that reorder what is shown
_CONTROLS = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def visible(text: object) -> str:
    """``text`` with every control character written as an escape (``\\x1b``, ``\\u202e``)."""
    return _CONTROLS.sub(lambda m: m.group().encode("unicode_escape").decode("ascii"), str(text))


def literal(text: object) -> str:
    """``text`` ready for ``Console.print``: controls escaped and markup shown as written."""
    return escape(visible(text))
