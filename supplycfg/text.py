"""Text from files shown to a person: every invisible character made visible.

A label or a key comes from a file someone else may have written. Printed
raw, a terminal escape can hide the lines after it, a right-to-left override
can reverse what follows and a zero-width character can make two different
names look alike. :func:`visible` writes each such character as a Python-style
escape (``\\x1b``, ``\\u202e``, ``\\u200b``) so what is on the screen is what
is in the file. JSON output keeps the exact text; this is for text meant to be
read.
"""

import unicodedata

#: Unicode categories written as escapes: control, format (bidirectional
#: overrides, zero-width and tag characters), surrogates, private use,
#: unassigned, and the line and paragraph separators.
HIDDEN_CATEGORIES = frozenset({"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"})


def _escape(ch):
    code = ord(ch)
    if ch == "\t":
        return "\\t"
    if ch == "\n":
        return "\\n"
    if ch == "\r":
        return "\\r"
    if code <= 0xFF:
        return f"\\x{code:02x}"
    if code <= 0xFFFF:
        return f"\\u{code:04x}"
    return f"\\U{code:08x}"


def is_hidden(ch):
    """True for a character that does not show as itself on a terminal or page."""
    return unicodedata.category(ch) in HIDDEN_CATEGORIES or (ch.isspace() and ch != " ")


def visible(text, keep_newlines=False):
    """``text`` with every control, format and separator character written as an escape.

    Parameters
    ----------
    text : str
        Any text, typically from a file.
    keep_newlines : bool
        Keep ``\\n`` as a line break (for whole multi-line outputs of our
        own, whose pieces from files were made visible already).

    Returns
    -------
    str
        Printable text: letters, marks, digits, punctuation, symbols and plain
        spaces, everything else as ``\\xNN``, ``\\uNNNN`` or ``\\UNNNNNNNN``.
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(ch if (ch == "\n" and keep_newlines) or not is_hidden(ch) else _escape(ch)
                   for ch in text)
