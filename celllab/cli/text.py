"""Text for the terminal: whatever a file or an argument held is shown, never obeyed.

Control characters (ANSI escape sequences, carriage returns, bells) and Unicode format
characters (bidirectional overrides) in names, paths and messages are written as escapes
(``\\x1b``, ``\\u202e``), so text from a catalog, a deck or the command line cannot move the
cursor, recolour the terminal or reorder what the reader sees (ECMA-48 control functions and
Unicode bidirectional controls, docs/references.md [128]).
"""

from __future__ import annotations

import unicodedata


def _escape(ch: str) -> str:
    code = ord(ch)
    if code < 0x100:
        return f"\\x{code:02x}"
    return f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def printable(text: object, keep_newlines: bool = False) -> str:
    """``str(text)`` with every control and format character escaped (newlines kept if asked);
    lone surrogates (undecodable bytes of a file name) become escapes too."""
    out = []
    for ch in str(text):
        if ch == "\n" and keep_newlines:
            out.append(ch)
        elif unicodedata.category(ch) in ("Cc", "Cf", "Cs"):
            out.append(_escape(ch))
        else:
            out.append(ch)
    return "".join(out)
