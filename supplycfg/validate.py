"""Small checkers shared by the machine and load-profile readers.

Each checker takes the parsed TOML table, the key and the source name and
returns a clean Python value or raises :class:`~supplycfg.errors.InputError`
with one line that names the file, the dotted key and what is allowed.
"""

import math
import re
import stat
import tomllib
from pathlib import Path

from .errors import InputError

#: Largest file the readers accept [bytes]; a machine or profile is a few kB.
MAX_FILE_BYTES = 1_000_000

_MISSING = object()
#: Keys shown as typed when they match TOML's bare-key form; others are quoted.
_BARE_KEY = re.compile(r"[A-Za-z0-9_-]{1,60}")


def show_key(k):
    """A key as it would be written in TOML, safe on one line of a message."""
    k = str(k)
    if _BARE_KEY.fullmatch(k):
        return k
    return ascii(k[:60])


def source_name(path):
    """The file name used in messages: the last part of ``path``, on one printable line."""
    name = Path(str(path)).name or str(path)
    if name.isprintable():
        return name
    return "".join(c if c.isprintable() else ascii(c)[1:-1] for c in name)


def read_toml(path, text=None):
    """Parse a TOML file (or its text) safely, with one-line errors.

    Parameters
    ----------
    path : str or Path
        File name, used in messages; read unless ``text`` is given.
    text : str or bytes, optional
        Content already in memory (an upload).

    Returns
    -------
    dict
    """
    name = source_name(path)
    if text is None:
        p = Path(path)
        try:
            st = p.stat()
        except (OSError, ValueError) as exc:
            raise InputError(name, "file", f"cannot be read ({getattr(exc, 'strerror', None) or exc})") from None
        if stat.S_ISDIR(st.st_mode):
            raise InputError(name, "file", "is a folder; give a TOML file")
        if not stat.S_ISREG(st.st_mode):
            # a pipe or device could block or never end
            raise InputError(name, "file", "is not a regular file; give a TOML file")
        if st.st_size > MAX_FILE_BYTES:
            raise InputError(name, "file", f"is {st.st_size} bytes; at most {MAX_FILE_BYTES} allowed")
        try:
            with open(p, "rb") as fh:
                raw = fh.read(MAX_FILE_BYTES + 1)  # the file may have grown since stat
        except OSError as exc:
            raise InputError(name, "file", f"cannot be read ({exc.strerror or exc})") from None
        if len(raw) > MAX_FILE_BYTES:
            raise InputError(name, "file", f"is over {MAX_FILE_BYTES} bytes; at most {MAX_FILE_BYTES} allowed")
    else:
        if isinstance(text, str):
            # lone surrogates (from a form) survive here and fail the UTF-8 check below
            raw = text.encode("utf-8", "surrogatepass")
        elif isinstance(text, (bytes, bytearray, memoryview)):
            raw = bytes(text)
        else:
            raise InputError(name, "file", f"content must be text or bytes, got {type(text).__name__}")
        if len(raw) > MAX_FILE_BYTES:
            raise InputError(name, "file", f"is {len(raw)} bytes; at most {MAX_FILE_BYTES} allowed")
    if raw.startswith(b"\xef\xbb\xbf"):
        raise InputError(name, "file", "starts with a UTF-8 byte-order mark; save it as UTF-8 without BOM")
    if b"\x00" in raw:
        raise InputError(name, "file", "is binary; a TOML text file is expected")
    try:
        decoded = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(name, "file", f"is not UTF-8 text (byte {exc.start})") from None
    if not decoded.strip():
        raise InputError(name, "file", "is empty; a TOML file with the documented tables is expected")
    try:
        data = tomllib.loads(decoded)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(name, "file", f"is not valid TOML ({exc})") from None
    except RecursionError:
        raise InputError(name, "file", "nests arrays or tables too deeply; allowed: the flat tables documented") from None
    except ValueError as exc:
        if "digits" in str(exc):  # an integer past Python's conversion limit
            raise InputError(name, "file", "holds an integer of thousands of digits; allowed: ordinary numbers") from None
        raise InputError(name, "file", f"is not valid TOML ({exc})") from None
    if not data:
        raise InputError(name, "file", "holds only comments; a TOML file with the documented tables is expected")
    return data


class Table:
    """A TOML table being read: remembers the keys taken to reject unknown ones."""

    def __init__(self, data, source, prefix, required=True):
        self.source = source
        self.prefix = prefix
        if data is _MISSING or data is None:
            if required:
                raise InputError(source, prefix, "table is missing")
            data = {}
        if not isinstance(data, dict):
            raise InputError(source, prefix, f"must be a table [{prefix}], got {type(data).__name__}")
        self.data = data
        self.known = []

    def key(self, k):
        return f"{self.prefix}.{show_key(k)}"

    def has(self, k):
        return k in self.data

    def raw(self, k, default=_MISSING):
        self.known.append(k)
        if k not in self.data:
            if default is _MISSING:
                raise InputError(self.source, self.key(k), f"is missing; it is required in [{self.prefix}]")
            return default
        return self.data[k]

    def finish(self):
        """Reject keys that were not read, listing the valid ones."""
        extra = sorted(set(self.data) - set(self.known))
        if extra:
            raise InputError(self.source, self.key(extra[0]),
                             f"is not a known key; valid keys: {', '.join(self.known)}")

    # typed readers -----------------------------------------------------
    def text(self, k, default=_MISSING, choices=None):
        v = self.raw(k, default)
        if v is default and default is not _MISSING:
            return v
        if not isinstance(v, str):
            raise InputError(self.source, self.key(k), f"must be text, got {_describe(v)}")
        if choices is not None and v not in choices:
            raise InputError(self.source, self.key(k),
                             f"is {v[:40]!r}; allowed: {', '.join(choices)}")
        return v

    def number(self, k, default=_MISSING, *, low=None, high=None, low_open=False,
               high_open=False, what="a number"):
        v = self.raw(k, default)
        if v is default and default is not _MISSING:
            return v
        return check_number(v, self.source, self.key(k), low=low, high=high,
                            low_open=low_open, high_open=high_open, what=what)

    def integer(self, k, default=_MISSING, *, low=None, high=None):
        v = self.raw(k, default)
        if v is default and default is not _MISSING:
            return v
        if isinstance(v, bool) or not isinstance(v, int):
            raise InputError(self.source, self.key(k), f"must be a whole number, got {_describe(v)}")
        if _too_long(v):
            raise InputError(self.source, self.key(k), f"is {_describe(v)}; allowed: a whole number "
                             + _bounds(low, high, False, False))
        _range(v, self.source, self.key(k), low, high, False, False, "a whole number")
        return int(v)

    def numbers(self, k, default=_MISSING, *, low=None, high=None, low_open=False,
                min_len=1, max_len=100_000):
        v = self.raw(k, default)
        if v is default and default is not _MISSING:
            return v
        if not isinstance(v, list):
            raise InputError(self.source, self.key(k), f"must be a list of numbers, got {_describe(v)}")
        if not (min_len <= len(v) <= max_len):
            size = f"exactly {min_len}" if min_len == max_len else f"{min_len} to {max_len}"
            raise InputError(self.source, self.key(k), f"has {len(v)} values; {size} allowed")
        out = []
        for i, item in enumerate(v):
            out.append(check_number(item, self.source, f"{self.key(k)}[{i}]", low=low,
                                    high=high, low_open=low_open))
        return tuple(out)


def _describe(v):
    if isinstance(v, str):
        return f"text {v[:40]!r}"
    if isinstance(v, bool):
        return f"{str(v).lower()} (a true/false value)"
    if isinstance(v, int) and _too_long(v):
        return f"a whole number of about {int(v.bit_length() * math.log10(2)) + 1} digits"
    if isinstance(v, list):
        return "a list"
    if isinstance(v, dict):
        return "a table"
    return f"{type(v).__name__} {v!r}"


def check_number(v, source, key, *, low=None, high=None, low_open=False, high_open=False,
                 what="a number"):
    """Return ``v`` as a finite float inside the bounds or raise InputError."""
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InputError(source, key, f"must be {what}, got {_describe(v)}")
    if isinstance(v, int) and _too_long(v):
        raise InputError(source, key, f"is {_describe(v)}; allowed: {what} "
                         + _bounds(low, high, low_open, high_open))
    v = float(v)
    if not math.isfinite(v):
        raise InputError(source, key, f"must be a finite number, got {v}")
    _range(v, source, key, low, high, low_open, high_open, what)
    return v


def _too_long(v):
    """True for an integer beyond the float range (it cannot be converted or printed with :g)."""
    return v.bit_length() > 1023


def _bounds(low, high, low_open, high_open):
    lo = "" if low is None else (f"> {low:g}" if low_open else f">= {low:g}")
    hi = "" if high is None else (f"< {high:g}" if high_open else f"<= {high:g}")
    return " and ".join(s for s in (lo, hi) if s) or "within the float range"


def _range(v, source, key, low, high, low_open, high_open, what):
    bad_low = low is not None and (v <= low if low_open else v < low)
    bad_high = high is not None and (v >= high if high_open else v > high)
    if bad_low or bad_high:
        raise InputError(source, key, f"is {v:g}; allowed: {what} {_bounds(low, high, low_open, high_open)}")


# ---------------------------------------------------------------------------
# named tables and the bounds every reader shares
# ---------------------------------------------------------------------------

#: Largest and smallest values the readers accept: far outside any real job,
#: and small or large enough that no accepted value overflows the solver
#: (1e-300 passes "> 0" but overflows the lamp laws).
MAX_SPEED_RPM = 100_000.0
MAX_VOLTAGE_V = 100_000.0
MAX_CURRENT_A = 1e6
MAX_OHM = 1e4
MIN_SPEED_RPM = 1.0
MIN_VOLTAGE_V = 0.1


def named_entry(table, name, what):
    """Entry ``name`` of a named table, or an InputError listing the valid names."""
    if isinstance(name, str) and name in table:
        return table[name]
    raise InputError(what, "name", f"is {name!r}; allowed: {', '.join(table)}")


def table_entry(cls, name, spec):
    """A named-table entry from ``{field: (value, source)}``; the sources go to ``basis``."""
    values = {k: v for k, (v, _) in spec.items()}
    basis = {k: s for k, (_, s) in spec.items()}
    return cls(name=name, basis=basis, **values)


def read_pair(t, k, source, *, low=None, low_open=False, high=None, strict=False, names=("low", "high"),
              default=None, required=True):
    """Read ``[a, b]`` from table ``t`` with ``a <= b`` (``a < b`` when strict)."""
    if not required and not t.has(k):
        t.raw(k, None)
        return default
    v = t.numbers(k, low=low, low_open=low_open, high=high, min_len=2, max_len=2)
    if v[0] > v[1] or (strict and v[0] == v[1]):
        rel = "<" if strict else "<="
        raise InputError(source, t.key(k), f"is [{v[0]:g}, {v[1]:g}]; allowed: [{names[0]}, {names[1]}] "
                                           f"with {names[0]} {rel} {names[1]}")
    return v
