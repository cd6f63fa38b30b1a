"""Text that is safe to print on a terminal.

A design file's strings (names, revision, notes) reach the terminal through ``rotorbook``'s
output and error lines. A control character in them could move the cursor, clear the screen,
retitle the window or overwrite an earlier line (ECMA-48 escape and control sequences), so
every string printed is passed through :func:`terminal_text` first: C0 and C1 control
characters, DEL, and the Unicode bidirectional overrides and isolates are written as visible
escapes (``\\x1b``, ``\\u202e``); everything else, including non-ASCII letters, is unchanged.

References
----------
ECMA-48, Control Functions for Coded Character Sets, 5th ed. (1991), sec. 5 (C0 and C1 sets).
Unicode Standard Annex #9, Unicode Bidirectional Algorithm, sec. 2 (explicit formatting
characters).
"""

from __future__ import annotations

import re

#: Bidirectional embeddings, overrides and isolates (UAX #9, sec. 2), and the marks.
_BIDI = "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069"
_CONTROL_RE = re.compile("[\x00-\x1f\x7f-\x9f" + _BIDI + "]")
_CONTROL_BUT_NEWLINE_RE = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f" + _BIDI + "]")


def _escape(m: re.Match) -> str:
    c = m.group(0)
    n = ord(c)
    return f"\\x{n:02x}" if n <= 0xFF else f"\\u{n:04x}"


def terminal_text(text: object, keep_newlines: bool = False) -> str:
    """``str(text)`` with every control character written as a visible escape.

    Parameters
    ----------
    text : object
        What to print; converted with ``str``.
    keep_newlines : bool
        Keep line feeds (for multi-line output the kit itself lays out); every other control
        character, carriage return included, is still escaped.

    Returns
    -------
    str
        Printable text: ``"a\\x1b[2Jb"`` for a name holding ESC [ 2 J.
    """
    rx = _CONTROL_BUT_NEWLINE_RE if keep_newlines else _CONTROL_RE
    return rx.sub(_escape, str(text))
