"""Text from users, made safe to echo: one line, no control characters, bounded length.

Scenario text (names, notes, labels) and anything echoed in an error message may hold
control characters: ANSI escapes that recolour or rewrite a terminal, NUL, BEL, or the
bidirectional overrides that reorder what a reader sees. They are replaced by U+FFFD (the
replacement character) so the reader sees that something was there.
"""
from __future__ import annotations

import re

__all__ = ["clean_text", "one_line", "ERROR_LINE_LIMIT"]

#: The longest error line printed [characters]; longer ones are cut with an ellipsis.
ERROR_LINE_LIMIT = 600

#: Control characters (C0, DEL, C1) and the bidirectional override / isolate controls,
#: which can reorder or hide text on a terminal or in a report.
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_NEWLINES = re.compile(r"\r\n?|\n|\t")


def clean_text(text: str, multiline: bool = False) -> str:
    r"""``text`` with control characters replaced by U+FFFD (the replacement character).

    Parameters
    ----------
    text : str
    multiline : bool
        Keep line breaks and tabs (CRLF and CR become LF); otherwise they are replaced
        too, so the text stays on one line.

    Examples
    --------
    >>> clean_text("a\x1b[31mb")
    'a�[31mb'
    >>> clean_text("two\r\nlines", multiline=True)
    'two\nlines'
    """
    if multiline:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    else:
        text = _NEWLINES.sub("\ufffd", text)
    return _CONTROL.sub("\ufffd", text)


def one_line(text: str, limit: int | None = ERROR_LINE_LIMIT) -> str:
    """``text`` as one clean line of at most ``limit`` characters (for error messages).

    Examples
    --------
    >>> one_line("unknown field 'a\\nb'")
    "unknown field 'a\\\\nb'"
    """
    text = str(text).replace("\r\n", "\\n").replace("\n", "\\n").replace("\r", "\\r")
    text = clean_text(text)
    if limit is not None and len(text) > limit:
        text = text[: limit - 1] + "…"
    return text
