"""Plain text at the edges: control characters and bidirectional controls are refused.

A serial number, a customer's name, a note or a command template is plain text. Control
characters (C0, DEL, C1: ESC, BEL, a newline in a one-line field) can drive a terminal, split an
instrument command in two or hide in a certificate; the Unicode bidirectional embedding, override
and isolate controls reorder the text around them, so ``SN-1<U+202E>01`` shows as another
serial. verirun refuses both where text comes in (command-line options, files, the console) and
replaces any that reach a certificate from older stored data. The bidirectional *marks*
(U+200E, U+200F, U+061C) are kept: they only settle the direction of neutral characters next
to them, and right-to-left names may need them.
"""

from __future__ import annotations

import re
import unicodedata

#: The bidirectional embedding, override and isolate controls (Unicode UAX #9, 2.1-2.4).
BIDI_CONTROLS = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")

#: Line breaks and tabs, which a text of several lines in a file may hold.
LAYOUT = "\t\n\r"


def _unsafe(char: str) -> bool:
    return char in BIDI_CONTROLS or unicodedata.category(char) == "Cc"


def unsafe_characters(text: str, *, allow: str = "") -> list[str]:
    """The control and bidirectional-control characters in ``text`` (except those in ``allow``),
    each once, in order."""
    return list(dict.fromkeys(char for char in text if char not in allow and _unsafe(char)))


def refusal(text: str, *, allow: str = "") -> str | None:
    """Why ``text`` is refused, in words (``None`` when it is plain text)."""
    found = unsafe_characters(text, allow=allow)
    if not found:
        return None
    kinds = []
    if any(char not in BIDI_CONTROLS for char in found):
        kinds.append("a control character")
    if any(char in BIDI_CONTROLS for char in found):
        kinds.append("a bidirectional control, which reorders the text shown around it")
    codes = ", ".join(f"U+{ord(char):04X}" for char in found)
    return f"holds {' and '.join(kinds)} ({codes}); write it as plain text"


#: What :func:`shown` replaces: the C0 controls but tab and line breaks, DEL, the C1 controls,
#: and the bidirectional controls (the characters of Unicode category Cc, and BIDI_CONTROLS).
_NOT_SHOWN = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def shown(text: str) -> str:
    """``text`` with every control and bidirectional control but tab and line breaks replaced
    by U+FFFD, for output made from stored data."""
    return _NOT_SHOWN.sub("\ufffd", text)
