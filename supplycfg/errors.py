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
        self.source = str(source)
        self.key = str(key)
        self.message = " ".join(str(message).split())
        super().__init__(f"{self.source}: {self.key}: {self.message}")
