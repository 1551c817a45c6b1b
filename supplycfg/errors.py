"""Exceptions of the project.

Every input problem is an :class:`InputError`, a ``ValueError`` whose text is
one line naming the file (or option), the key and what is allowed.
"""

from .text import visible


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
        # one visible line, whatever a file name, key or quoted value holds
        self.source = visible(source)
        self.key = visible(key)
        self.message = visible(" ".join(str(message).split()))
        super().__init__(f"{self.source}: {self.key}: {self.message}")
