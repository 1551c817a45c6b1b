"""Files the tool writes: JSON, TOML and reports, always atomically.

The TOML writer covers what the machine and profile files hold (tables of
strings, numbers, booleans and flat lists), so a saved file loads back equal.
"""

import json
import math
import os
import sys
import tempfile
from pathlib import Path

from .errors import InputError


def _numpy_types():
    """numpy's array, bool, integer and float types, or empty tuples while numpy is not loaded.

    A value cannot be a numpy one before numpy is imported, so commands that
    never need it (``--version``, ``--help``) start without it.
    """
    np = sys.modules.get("numpy")
    if np is None:
        return (), (), (), ()
    return (np.ndarray,), (np.bool_,), (np.integer,), (np.floating,)


def jsonable(obj):
    """Convert numpy types, tuples and dataclasses to JSON-safe values; NaN/inf -> None."""
    if hasattr(obj, "as_dict") and callable(obj.as_dict):
        return jsonable(obj.as_dict())
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    arr, npbool, npint, npfloat = _numpy_types()
    if isinstance(obj, arr):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (bool, *npbool)):
        return bool(obj)
    if isinstance(obj, (int, *npint)):
        return int(obj)
    if isinstance(obj, (float, *npfloat)):
        f = float(obj)
        return f if math.isfinite(f) else None
    return obj


def dumps_json(obj):
    """One JSON document, sorted keys, no NaN."""
    return json.dumps(jsonable(obj), indent=2, sort_keys=True, allow_nan=False)


def _toml_value(v, key):
    _, _, npint, npfloat = _numpy_types()
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, *npint)) and not isinstance(v, bool):
        return str(int(v))
    if isinstance(v, (float, *npfloat)):
        f = float(v)
        if not math.isfinite(f):
            raise InputError("toml", key, "is not a finite number; cannot be written")
        return repr(f)
    if isinstance(v, str):
        # JSON escapes are TOML basic-string escapes; TOML also forbids a raw DEL
        return json.dumps(v, ensure_ascii=False).replace("\x7f", "\\u007f")
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x, key) for x in v) + "]"
    raise InputError("toml", key, f"has a value of type {type(v).__name__} that TOML files here do not hold")


def dumps_toml(tables, header=None):
    """Write ``{table: {key: value}}`` as TOML text."""
    lines = []
    if header:
        clean = "".join(ch if ch == "\n" or (ch >= " " and ch != "\x7f") else "?" for ch in header)
        lines += [f"# {h}" for h in clean.splitlines()] + [""]
    for name, body in tables.items():
        lines.append(f"[{name}]")
        for k, v in body.items():
            if v is None:
                continue
            lines.append(f"{k} = {_toml_value(v, f'{name}.{k}')}")
        lines.append("")
    return "\n".join(lines)


#: Longest file name and path assumed where the system does not say (POSIX NAME_MAX, PATH_MAX).
DEFAULT_NAME_MAX = 255
DEFAULT_PATH_MAX = 4096


def check_output_path(path, force=False):
    """Refuse, before any work is done, a file that :func:`write_atomic` could not write.

    Parameters
    ----------
    path : str or Path
        The file as the person gave it; messages name it that way.
    force : bool
        An existing file may be replaced.

    Returns
    -------
    Path

    Raises
    ------
    InputError
        One line: a name too long, a folder that does not exist or cannot be
        written, a folder in the file's place, or an existing file without
        ``force``.
    """
    given = str(path)
    if not given:
        raise InputError("command line", "output", "is empty; give a file name")
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    try:
        name_max = os.pathconf(folder if folder.is_dir() else ".", "PC_NAME_MAX")
    except (OSError, ValueError, AttributeError):
        name_max = DEFAULT_NAME_MAX
    name_max = name_max if isinstance(name_max, int) and name_max > 0 else DEFAULT_NAME_MAX
    for part in p.parts:
        size = len(os.fsencode(part))
        if size > name_max:
            raise InputError(given, "output", f"holds a name of {size} bytes ({part[:24]!r}...); "
                             f"allowed: at most {name_max} bytes per file or folder name")
    if len(os.fsencode(given)) > DEFAULT_PATH_MAX:
        raise InputError(given, "output", f"is {len(os.fsencode(given))} bytes long; allowed: at most {DEFAULT_PATH_MAX}")
    try:
        if not folder.is_dir():
            raise InputError(given, "output", f"its folder {str(folder)!r} does not exist; create it first "
                             "or give a file in a folder that exists")
        if not os.access(folder, os.W_OK | os.X_OK):
            raise InputError(given, "output", f"its folder {str(folder)!r} cannot be written; give another folder")
        if p.is_dir():
            raise InputError(given, "output", "is a folder; give a file name")
        if os.path.lexists(p) and not force:
            raise InputError(given, "output", "exists already; pass --force to overwrite it")
    except OSError as exc:
        raise InputError(given, "output", f"cannot be checked ({exc.strerror or type(exc).__name__})") from None
    return p


def write_atomic(path, data, force=False):
    """Write ``data`` (str or bytes) to ``path`` through a temporary file and ``os.replace``.

    The file gets the usual permissions (0666 less the umask, or the mode of
    the file it replaces).

    Raises
    ------
    InputError
        When the file exists (or is a link) and ``force`` is false, when it is
        a folder, when its name is too long, or when the folder does not exist
        or cannot be written (see :func:`check_output_path`).
    """
    given = str(path)
    path = check_output_path(path, force)
    name = path.name or given
    folder = path.parent if str(path.parent) else Path(".")
    raw = data.encode("utf-8") if isinstance(data, str) else data
    try:
        mode = os.stat(path).st_mode & 0o7777 if path.exists() else None
    except OSError:
        mode = None
    if mode is None:
        umask = os.umask(0)
        os.umask(umask)
        mode = 0o666 & ~umask
    tmp = None
    try:
        # a short prefix: the temporary name must fit where the full name just fits
        fd, tmp = tempfile.mkstemp(prefix=f".{name[:40]}.", suffix=".tmp", dir=folder)
        with os.fdopen(fd, "wb") as fh:
            fh.write(raw)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise InputError(given, "output", f"cannot be written ({exc.strerror or type(exc).__name__})") from None
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
    return path
