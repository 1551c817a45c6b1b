"""Words shown to people: trade names of the connections, a short glossary, source lines, file text made visible.

The program's identifiers (``long-shunt-differential``) stay in files, JSON
and the command line's options; screens and sheets say what the trade says
("long-shunt differential compound"). Text that comes from a file or a form
is data: :func:`visible_text` shows every control, line-break, direction or
zero-width character as a visible escape before any format sees it.
"""

import re
import unicodedata

from .errors import InputError

#: Trade words for each connection of :data:`supplycfg.circuit.CONNECTIONS`.
CONNECTION_WORDS = {
    "separate": "separately excited",
    "separate-cumulative": "separately excited cumulative compound",
    "separate-differential": "separately excited differential compound",
    "shunt": "shunt (self-excited)",
    "series": "series",
    "long-shunt-cumulative": "long-shunt cumulative compound",
    "short-shunt-cumulative": "short-shunt cumulative compound",
    "long-shunt-differential": "long-shunt differential compound",
    "short-shunt-differential": "short-shunt differential compound",
}


def field_words(connection):
    """The field a connection has besides any series winding: ``"separate field"`` for a separately
    excited connection, ``"shunt field"`` for the others (a series machine has none; callers leave it out)."""
    return "separate field" if connection.startswith("separate") else "shunt field"


#: Trade names of the named tables' entries a reader meets (welding processes, battery chemistries).
NAME_WORDS = {"manual-metal-arc": "manual metal arc", "tungsten-inert-gas": "TIG (tungsten inert gas)",
              "metal-inert-gas": "MIG/MAG (metal inert gas)", "lead-acid-vented": "vented lead-acid",
              "lead-acid-valve-regulated": "valve-regulated lead-acid", "nickel-cadmium-vented": "vented nickel-cadmium",
              "increased-shock-hazard": "increased hazard of electric shock"}


def name_words(name):
    """A named-table entry (a process, a chemistry, an environment) in the trade's words."""
    return NAME_WORDS.get(name, str(name).replace("-", " "))


def connection_words(connection):
    """The trade name of a connection id, e.g. ``"long-shunt differential compound"``.

    Parameters
    ----------
    connection : str
        A connection id (``"shunt"``, ``"short-shunt-cumulative"``, ...).

    Returns
    -------
    str

    Raises
    ------
    InputError
        For an id that is not a connection (the message lists the valid ones).
    """
    try:
        return CONNECTION_WORDS[connection]
    except (KeyError, TypeError):
        raise InputError("setting", "connection",
                         f"is {str(connection)[:40]!r}; allowed: {', '.join(CONNECTION_WORDS)}") from None


#: A short glossary for the terms a newcomer meets on the page and the sheet (our own wording).
GLOSSARY = {
    "open-circuit characteristic": "the machine's generated voltage against its field current, measured at one "
                                   "speed with no load connected; its value at zero field current is the residual voltage.",
    "critical field resistance": "the field-circuit resistance above which a self-excited machine cannot build up "
                                 "its voltage at a given speed: the steepest slope of the open-circuit characteristic.",
    "field rheostat": "the adjustable resistor in series with the shunt field; more resistance, less field, lower voltage.",
    "diverter": "a resistor across the series field that takes part of the current, so the series field acts less.",
    "cumulative / differential compound": "a machine with both a shunt and a series field; cumulative when the series "
                                          "field helps the shunt field, differential when it opposes it.",
    "long shunt / short shunt": "where the shunt field is connected: across the machine's terminals (long shunt, "
                                "after the series field) or across the armature alone (short shunt).",
    "drooping characteristic": "a voltage that falls steeply as the current rises, as a welding arc needs: the "
                               "current changes little when the arc length changes.",
    "no-load voltage": "the voltage at the terminals with nothing connected (open circuit).",
    "margin": "how far a figure stays inside its limit, as a share of the limit; negative when the limit is broken. "
              "The smallest margin of an option is the tightest of all its limits.",
    "near miss": "a setting that breaks at least one limit, listed with the limit it breaks and by how much.",
    "reverse-current cut-out": "a relay (or a diode) that disconnects the battery when the machine's voltage falls "
                               "below the battery's, so the battery cannot drive the machine.",
    "gassing voltage": "the cell voltage above which a charging cell gives off hydrogen and oxygen.",
    "duty cycle": "the share of a ten-minute period for which a welding set may carry its current.",
    "series booster": "a series generator in a feeder: the line current is its field current, so the voltage it "
                      "adds rises with the load and makes up the feeder's drop.",
    "prospective short-circuit current": "the current a source would drive into a short at a point, limited only "
                                         "by its own resistance and the leads': what a fuse or breaker there must "
                                         "be able to break.",
}

#: Glossary terms that belong to one job only (the others are every job's).
GLOSSARY_JOBS = {"drooping characteristic": "welding", "duty cycle": "welding",
                 "reverse-current cut-out": "battery", "gassing voltage": "battery",
                 "prospective short-circuit current": "battery", "series booster": "booster"}


#: Glossary terms of a shunt field: a sheet of a series connection (a series booster) has none of them.
SHUNT_FIELD_TERMS = ("critical field resistance", "field rheostat", "cumulative / differential compound",
                     "long shunt / short shunt")


def glossary_for(kind=None, connection=None):
    """The glossary's entries a reader of a ``kind`` job meets (all of them for None); with a
    ``connection`` (a sheet of one setting), those of a shunt field are left out of a series one."""
    skip = SHUNT_FIELD_TERMS if connection == "series" else ()
    return {k: v for k, v in GLOSSARY.items()
            if (kind is None or GLOSSARY_JOBS.get(k, kind) == kind) and k not in skip}


_SEEN = re.compile(r"\s*\(\s*seen\s*\)", re.I)
#: "seen" leading a bracket or a clause of several, or closing one: "(seen; stationary ...)", "boost, seen; onset
#: ...", "(a local rule, ..., seen)"
_SEEN_IN = re.compile(r"(?<=\()\s*seen\s*;\s*|,\s*seen\s*(?=[;)])", re.I)
_MEMORY = re.compile(r"from memory", re.I)


#: A file key (``peak_armature_current_a``) as a reader's words: unit suffixes dropped, max/min said.
_FILE_KEY = re.compile(r"\b[a-z]+(?:_[a-z0-9]+)+\b")
_KEY_UNITS = ("a", "v", "kw", "w", "percent", "ohm", "rpm", "c", "h", "s", "ah", "mb")
_KEY_WORDS = {"max": "highest", "min": "lowest"}


def file_key_words(key):
    """``'peak_armature_current_a'`` -> ``'peak armature current'``: a file key in a source line, as words."""
    parts = key.split("_")
    if len(parts) > 1 and parts[-1] in _KEY_UNITS:
        parts = parts[:-1]
    return " ".join(_KEY_WORDS.get(p, p) for p in parts)


def source_text(basis):
    """What a rule or figure rests on, as a reader's line: ``"Source: IEC 60974-1"``.

    Markers meant for the project ("seen") are dropped; "from memory" becomes
    "recalled, not checked against the text".
    """
    s = _SEEN_IN.sub("", _SEEN.sub("", visible_text(basis))).strip()
    s = _FILE_KEY.sub(lambda m: file_key_words(m.group(0)), s)
    s = _MEMORY.sub("recalled, not checked against the text", s)
    s = re.sub(r"\s+;", ";", s)
    return f"Source: {s}" if s else "Source: not stated"


#: Named escapes for the commonest control characters.
_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}
#: Unicode categories shown as escapes: controls, format (direction and zero-width marks), line and
#: paragraph separators, surrogates, private use.
_HIDDEN = ("Cc", "Cf", "Zl", "Zp", "Cs", "Co")


def _escape_char(ch):
    named = _NAMED.get(ch)
    if named is not None:
        return named
    if unicodedata.category(ch) not in _HIDDEN:
        return ch
    code = ord(ch)
    if code < 0x100:
        return f"\\x{code:02x}"
    if code < 0x10000:
        return f"\\u{code:04x}"
    return f"\\U{code:08x}"


def visible_text(text):
    """File or form text with every hidden character shown as an escape (``\\n``, ``\\u202e``).

    Line breaks, controls, right-to-left overrides and zero-width characters
    can reorder, hide or forge what a reader sees; shown as escapes they
    cannot. Plain text (letters of any script, punctuation, spaces) is
    unchanged.
    """
    s = "" if text is None else str(text)
    if s.isprintable():
        return s
    return "".join(_escape_char(ch) for ch in s)


def caution_lines(cautions):
    """The cautions block of a command's text: severity first, each with its source."""
    if not cautions:
        return []
    out = ["", "Cautions:"]
    for c in sorted(cautions, key=lambda c: ["stop", "warn", "note"].index(c.severity)):
        out.append(f"  [{c.severity}] {c.message} ({source_text(c.basis)})")
    return out
