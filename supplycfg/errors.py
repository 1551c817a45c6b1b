"""Exceptions of the project.

Every input problem is an :class:`InputError`, a ``ValueError`` whose text is
one line naming the file (or option), the key and what is allowed.
"""


class InputError(ValueError):
    """Bad input: a file, a key (or option) and what is allowed.

    Parameters
    ----------
    source : str
        File name, ``"command line"`` or ``"form"``.
    key : str
        Dotted key such as ``machine.poles`` or an option such as ``--speed-rpm``.
    message : str
        What is wrong and what is allowed.
    """

    def __init__(self, source, key, message):
        # one line, whatever a file name or key holds
        self.source = _one_line(source)
        self.key = _one_line(key)
        self.message = " ".join(str(message).split())
        super().__init__(f"{self.source}: {self.key}: {self.message}")


def _one_line(text):
    text = str(text)
    if any(ch in text for ch in "\r\n\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029"):
        return repr(text)[1:-1]
    return text
