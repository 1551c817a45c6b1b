"""Small checkers shared by the machine and load-profile readers.

Each checker takes the parsed TOML table, the key and the source name and
returns a clean Python value or raises :class:`~supplycfg.errors.InputError`
with one line that names the file, the dotted key and what is allowed.
"""

import difflib
import json
import math
import re
import stat
import tomllib
from pathlib import Path

from .errors import InputError
from .text import visible

#: Largest file the readers accept [bytes]; a machine or profile is a few kB.
MAX_FILE_BYTES = 1_000_000
#: Most values in any list of a machine or profile file unless its key says
#: fewer: each value multiplies the work of a search (README, "What it checks").
MAX_LIST_VALUES = 500

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
    """The file as the person gave it (the whole path as typed), on one visible line."""
    return visible(str(path)) if str(path) else "''"


def nearest_name(name, valid):
    """The valid name closest to a mistyped ``name``, or None when none is close."""
    found = difflib.get_close_matches(str(name), [str(v) for v in valid], n=1, cutoff=0.6)
    return found[0] if found else None


def unknown_key_message(name, valid, line=None, what="key", valid_what="valid keys"):
    """What to say about an unknown key: its line, the nearest valid name, the valid ones."""
    where = f" (line {line})" if line else ""
    near = nearest_name(name, valid)
    guess = f"; did you mean {near}?" if near else ""
    return f"is not a known {what}{where}{guess}; {valid_what}: {', '.join(valid)}"


def check_tables(data, source, known, what, other_tables=(), other_what=""):
    """Refuse top-level tables and keys other than ``known``, unknown ones first.

    Parameters
    ----------
    data : dict
        The parsed file.
    known : sequence of str
        The tables this kind of file may hold.
    what : str
        This kind of file, e.g. ``"machine file"``.
    other_tables, other_what : sequence of str, str
        The tables of the other kind of file: a file holding only those looks
        swapped with it, and the message says so.
    """
    if not isinstance(data, dict):
        raise InputError(source, "file", "must hold TOML tables")
    extra = [k for k in data if k not in known]
    if not extra:
        return
    if other_tables and not any(k in known for k in data) and any(k in other_tables for k in data):
        theirs = ", ".join(f"[{k}]" for k in data if k in other_tables)
        raise InputError(source, "file", f"looks like a {other_what} ({theirs}), not a {what}; "
                         f"the {what} and the {other_what} look swapped")
    lines = getattr(data, "key_lines", {})
    k = extra[0]
    raise InputError(source, show_key(k), unknown_key_message(k, known, lines.get(k), "table or key", "valid tables"))


def refuse_unknown_keys(data, source, keys):
    """Refuse the first unknown key of any table present, before any value is read.

    A misspelt key is the likelier fault than the missing key it was meant to
    be, so it is reported first, with the nearest valid name and its line.

    Parameters
    ----------
    data : dict
        The parsed file.
    keys : dict
        ``{table: valid keys}`` for each table the file may hold.
    """
    for table, body in data.items():
        if table in keys and isinstance(body, dict):
            lines = getattr(body, "key_lines", {})
            for k in body:
                if k not in keys[table]:
                    raise InputError(source, f"{table}.{show_key(k)}", unknown_key_message(k, keys[table], lines.get(k)))


# Plain words for the TOML reader's messages; the line the reader names follows them.
_TOML_WORDS = (
    ("Invalid statement", "this line is not key = value, a [table] header or a comment"),
    ("Expected '=' after a key", "a key must be followed by = and its value"),
    ("Invalid initial character for a key", "a key starts with a letter, digit, _ or - (or is quoted)"),
    ("Found invalid character", "an unexpected character"),
    ("Expected newline or end of document after a statement",
     "something follows the value on its line (one key = value per line; decimals use a point)"),
    ("Cannot declare", "a [table] is declared twice"),
    ("Cannot overwrite a value", "a key is given twice"),
    ("Cannot mutate immutable namespace", "a key or table is given twice"),
    ("Cannot redefine namespace", "a key or table is given twice"),
    ("Duplicate inline table key", "a key is given twice in a { } table"),
    ("Expected ']' at the end of a table declaration", "a [table] header is not closed with ]"),
    ("Expected ']]' at the end of an array declaration", "a [[table]] header is not closed with ]]"),
    ("Unclosed array", "a list [ ... ] misses a comma between values or its closing ]"),
    ("Unclosed inline table", "a { ... } table is not closed with }"),
    ("Unterminated string", "quoted text is not closed on its line"),
    ('Expected "\'"', "quoted text is not closed"),
    ("Expected '\"'", "quoted text is not closed"),
    ("Unescaped '\\' in a string", "a backslash in double-quoted text starts an escape: write \\\\ or use 'single quotes'"),
    ("Illegal character", "quoted text holds a control character; write it as an escape such as \\t"),
    ("Invalid hex value", "a \\u or \\U escape in quoted text is not a valid character"),
    ("Escaped character is not a Unicode scalar value", "a \\u or \\U escape in quoted text is not a valid character"),
    ("Invalid date or datetime", "a date or time that does not exist"),
    ("Invalid value", "the value is not a number, \"quoted text\", true, false, a date or a [list]"),
)
_AT = re.compile(r"\s*\((?:at line (\d+), column (\d+)|at end of document)\)\s*$")
_COMMENT_LOOKALIKE = re.compile(r"^\s*(//|;|--|%|/\*|<!--)")
_COLON_KEY = re.compile(r"^\s*[A-Za-z0-9_-]+\s*:")
_BARE_WORD_VALUE = re.compile(r"=\s*[A-Za-z][^#\"']*$")


def plain_toml_error(message, text):
    """The TOML reader's ``message`` in plain words, with its line and a hint where one fits."""
    at = _AT.search(message)
    head = message[:at.start()] if at else message
    plain = next((words for start, words in _TOML_WORDS if head.startswith(start)), head)
    lines = text.splitlines()
    line = int(at.group(1)) if at and at.group(1) else None
    if head.startswith(("Cannot overwrite a value", "Cannot mutate")):
        dup = _duplicate_key_line(text)
        if dup and line in (None, dup[0]):
            line, plain = dup[0], f"{plain} ({show_key(dup[1])} again)"
    where = f"line {line}, column {at.group(2)}" if at and at.group(2) else (f"line {line}" if line else "at the end")
    hint = ""
    src = lines[line - 1] if line and 0 < line <= len(lines) else ""
    if _COMMENT_LOOKALIKE.match(src):
        hint = "; a comment starts with #"
    elif _COLON_KEY.match(src) and "=" not in src.split("#")[0]:
        hint = "; write key = value, with =, not :"
    elif head.startswith("Invalid value") and _BARE_WORD_VALUE.search(src.split("#")[0] if "#" in src else src):
        hint = "; text needs quotes, e.g. label = \"Pump set 2\" (true and false are lower case)"
    return f"is not valid TOML: {where}: {plain}{hint}"


# key = value lines under [table] headers, for the line numbers of messages
_HEADER = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(?:#.*)?$")
_KEY_LINE = re.compile(r"^\s*([A-Za-z0-9_-]+|\"(?:[^\"\\]|\\.)*\"|'[^']*')\s*=")


def _unquote(k):
    if k.startswith('"'):
        try:
            return json.loads(k)
        except ValueError:
            return k
    if k.startswith("'"):
        return k[1:-1]
    return k


def key_lines(text):
    """Line numbers of ``key = value`` lines: ``{(table, key): [line, ...]}``, table "" at the top.

    A plain scan, not a parser: dotted keys, inline tables and the insides of
    multi-line strings are skipped, so a key found there has no line number.
    """
    found, table, in_multi = {}, "", None
    for n, line in enumerate(text.splitlines(), 1):
        if in_multi:
            if line.count(in_multi) % 2:
                in_multi = None
            continue
        head = _HEADER.match(line)
        if head and not line.lstrip().startswith("[["):
            table = head.group(1)
            found.setdefault(("", _unquote(table)), []).append(n)
            continue
        kl = _KEY_LINE.match(line)
        if kl:
            found.setdefault((table, _unquote(kl.group(1))), []).append(n)
        for q in ('"""', "'''"):
            if line.count(q) % 2:
                in_multi = q
                break
    return found


def _duplicate_key_line(text):
    """(line, key) of the first key given twice in one table, or None."""
    dups = [(where[1], key) for (_, key), where in key_lines(text).items() if len(where) > 1]
    return min(dups) if dups else None


class TomlTable(dict):
    """A parsed TOML table that remembers the line of each of its keys (``key_lines``)."""

    key_lines = {}


def _with_lines(data, text):
    lines = key_lines(text)
    top = TomlTable(data)
    top.key_lines = {k: w[0] for (t, k), w in lines.items() if t == ""}
    for name, value in data.items():
        if isinstance(value, dict):
            sub = TomlTable(value)
            sub.key_lines = {k: w[0] for (t, k), w in lines.items() if t == name}
            top[name] = sub
    return top


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
        raise InputError(name, "file", plain_toml_error(str(exc), decoded)) from None
    except RecursionError:
        raise InputError(name, "file", "nests arrays or tables too deeply; allowed: the flat tables documented") from None
    except ValueError as exc:
        if "digits" in str(exc):  # an integer past Python's conversion limit
            raise InputError(name, "file", "holds an integer of thousands of digits; allowed: ordinary numbers") from None
        raise InputError(name, "file", f"is not valid TOML ({exc})") from None
    if not data:
        raise InputError(name, "file", "holds only comments; a TOML file with the documented tables is expected")
    return _with_lines(data, decoded)


class Table:
    """A TOML table being read: remembers the keys taken to reject unknown ones.

    Given ``keys`` (every key the table may hold) an unknown key is refused at
    once, before any missing or bad value is reported: a misspelt key is the
    likelier fault than the missing key it was meant to be.
    """

    def __init__(self, data, source, prefix, required=True, keys=None):
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
        self.lines = getattr(data, "key_lines", {})
        self.keys = None if keys is None else tuple(keys)
        if self.keys is not None:
            extra = [k for k in data if k not in self.keys]
            if extra:
                raise InputError(source, self.key(extra[0]),
                                 unknown_key_message(extra[0], self.keys, self.lines.get(extra[0])))

    def key(self, k):
        return f"{self.prefix}.{show_key(k)}"

    def has(self, k):
        return k in self.data

    def raw(self, k, default=_MISSING, allowed=None):
        self.known.append(k)
        if k not in self.data:
            if default is _MISSING:
                raise InputError(self.source, self.key(k), f"is missing; it is required in [{self.prefix}]"
                                 + (f"; allowed: {allowed}" if allowed else ""))
            return default
        return self.data[k]

    def finish(self):
        """Reject keys that were not read, listing the valid ones."""
        extra = [k for k in self.data if k not in self.known]
        if extra:
            valid = self.keys if self.keys is not None else self.known
            raise InputError(self.source, self.key(extra[0]),
                             unknown_key_message(extra[0], valid, self.lines.get(extra[0])))

    # typed readers -----------------------------------------------------
    def text(self, k, default=_MISSING, choices=None):
        v = self.raw(k, default, ", ".join(choices) if choices is not None else "text")
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
        v = self.raw(k, default, f"{what} {_bounds(low, high, low_open, high_open)}")
        if v is default and default is not _MISSING:
            return v
        return check_number(v, self.source, self.key(k), low=low, high=high,
                            low_open=low_open, high_open=high_open, what=what)

    def integer(self, k, default=_MISSING, *, low=None, high=None):
        v = self.raw(k, default, f"a whole number {_bounds(low, high, False, False)}")
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
                min_len=1, max_len=MAX_LIST_VALUES):
        size = f"{min_len}" if min_len == max_len else f"{min_len} to {max_len}"
        v = self.raw(k, default, f"a list of {size} numbers, each {_bounds(low, high, low_open, False)}")
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


def _plain(x):
    # a bound such as 1e-06 ohm reads as program notation to a technician: write it out
    return f"{x:g}" if x == 0 or 1e-4 <= abs(x) < 1e15 else f"{x:.15f}".rstrip("0") if abs(x) < 1 else f"{x:g}"


def _bounds(low, high, low_open, high_open):
    lo = "" if low is None else (f"> {_plain(low)}" if low_open else f">= {_plain(low)}")
    hi = "" if high is None else (f"< {_plain(high)}" if high_open else f"<= {_plain(high)}")
    return " and ".join(s for s in (lo, hi) if s) or "within the float range"


def _range(v, source, key, low, high, low_open, high_open, what):
    bad_low = low is not None and (v <= low if low_open else v < low)
    bad_high = high is not None and (v >= high if high_open else v > high)
    if bad_low or bad_high:
        shown = f"{v:g}"
        if shown in (_plain(low) if low is not None else None, _plain(high) if high is not None else None):
            shown = f"{v:.15g}"  # 4.99999999 is not 5: say so
        raise InputError(source, key, f"is {shown}; allowed: {what} {_bounds(low, high, low_open, high_open)}")


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
