"""Words shown to people: connection names, source lines, file text made visible."""

import re

import pytest

from supplycfg.circuit import CONNECTIONS
from supplycfg.errors import InputError
from supplycfg.wording import GLOSSARY, connection_words, source_text, visible_text

try:
    from .builders import DEMOS, demo
except ImportError:
    from builders import DEMOS, demo


def test_every_connection_has_trade_words():
    words = [connection_words(c) for c in CONNECTIONS]
    assert len(set(words)) == len(CONNECTIONS)
    assert connection_words("long-shunt-differential") == "long-shunt differential compound"
    assert connection_words("separate") == "separately excited"
    assert not any("-" in w.replace("long-shunt", "").replace("short-shunt", "").replace("self-excited", "")
                   for w in words)
    with pytest.raises(InputError, match="allowed: separate"):
        connection_words("compound")


def test_glossary_has_the_newcomers_terms():
    for term in ("critical field resistance", "diverter", "drooping characteristic", "near miss", "margin"):
        assert term in GLOSSARY and GLOSSARY[term]


def test_source_lines():
    assert source_text("common practice") == "Source: common practice"
    assert source_text("IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); lower limits") == \
        "Source: IEC 60974-1 rated no-load voltage, DC 113 V peak; lower limits"
    line = source_text("rating plate; IEC 60034-1 overspeed test (from memory)")
    assert "from memory" not in line and "(recalled, not checked against the text)" in line
    assert "seen" not in source_text("IEC 62485-2 ventilation formula (seen)")


def test_seen_marker_leading_a_bracket_or_clause_is_dropped():
    """Regression: the battery's ventilation basis read "(seen; stationary batteries, ...)" on the
    sheet; the project's marker is dropped wherever it stands, the words around it kept."""
    assert source_text("formula A = 28 Q (seen; stationary batteries)") == \
        "Source: formula A = 28 Q (stationary batteries)"
    assert source_text("(IEC 62485-2 boost, seen; onset from memory)") == \
        "Source: (IEC 62485-2 boost; onset recalled, not checked against the text)"
    assert source_text("foreseen load; common practice") == "Source: foreseen load; common practice"

    from supplycfg.jobs import profile_cautions
    for kind in DEMOS:
        m, p, res = demo(kind)
        for c in [c for o in res.options[:3] for c in o.cautions] + profile_cautions(m, p):
            assert not re.search(r"\bseen\b", source_text(c.basis)), (kind, c.rule, c.basis)


@pytest.mark.parametrize("raw, shown", [
    ("plain label", "plain label"),
    ("two\nlines", "two\\nlines"),
    ("cr\r", "cr\\r"),
    ("abc\u202edcb", "abc\\u202edcb"),        # right-to-left override
    ("zero\u200bwidth", "zero\\u200bwidth"),  # zero-width space
    ("joiner\u2060", "joiner\\u2060"),
    ("bell\x07 esc\x1b[8m", "bell\\x07 esc\\x1b[8m"),
    ("sep\u2028par\u2029", "sep\\u2028par\\u2029"),
    ("Ω °C – ü 中文", "Ω °C – ü 中文"),
])
def test_visible_text(raw, shown):
    assert visible_text(raw) == shown


def test_series_booster_sheet_glossary_has_no_shunt_field_terms():
    """A series booster has no shunt field: its sheet's glossary leaves out critical field resistance, the
    rheostat and the shunt connections, and says what a series booster is. (Regression: a series booster's
    sheet explained the field rheostat and long shunt.)"""
    from supplycfg.report import sheet_markdown
    from supplycfg.wording import glossary_for
    try:
        from .builders import demo
    except ImportError:
        from builders import demo
    words = glossary_for("booster", "series")
    assert "series booster" in words and "field rheostat" not in words and "critical field resistance" not in words
    assert "field rheostat" in glossary_for("booster") and "series booster" not in glossary_for("lighting")
    _, _, res = demo("booster")
    assert res.options[0].setting.connection == "series"
    md = sheet_markdown(res).split("## Words used here")[1]
    assert "**series booster**" in md and "critical field resistance" not in md


def test_source_lines_say_file_keys_in_words():
    """Regression: sources read '(Source: the job's target_hours)' and 'machine file peak_armature_current_a'."""
    assert source_text("the job's target_hours") == "Source: the job's target hours"
    assert source_text("machine file peak_armature_current_a (default 2 x rated, common practice)") == \
        "Source: machine file peak armature current (default 2 x rated, common practice)"
    assert source_text("the job's max_charge_current_a") == "Source: the job's highest charge current"
    assert "_" not in source_text("the profile's rated_power_kw; ISO 3046-1")


def test_seen_closing_a_bracket_is_dropped():
    """Regression: '(a local rule, e.g. US 29 CFR 1910.254(b)(3): 100 V DC for manual welding, seen)' reached a
    welding near miss's source line."""
    assert source_text("the job's limit (a local rule, e.g. 100 V DC, seen)") == \
        "Source: the job's limit (a local rule, e.g. 100 V DC)"
