"""The wiring drawing of a setting, per connection: parts present, the series field's sense, long against short shunt."""

from pathlib import Path

import pytest

from supplycfg.circuit import CONNECTIONS, SELF_EXCITED, SEPARATE, Setting, check_setting
from supplycfg.machine import load_machine
from supplycfg.wiring import wiring, wiring_svg
from supplycfg.wording import connection_words

DEMO = Path(__file__).resolve().parent.parent / "profiles"


@pytest.fixture(scope="module")
def welder():
    return load_machine(DEMO / "machines" / "welding-set.toml")


def setting(m, conn, **kw):
    turns = None if conn in ("separate", "shunt") else 8.0
    return check_setting(m, Setting(conn, rheostat_ohm=12.0, series_turns=turns, **kw))


@pytest.mark.parametrize("conn", CONNECTIONS)
@pytest.mark.parametrize("kind", ["battery", "welding", "lighting"])
def test_parts_of_every_connection(welder, conn, kind):
    """Armature, voltmeter and load always; the series field (with its tap) where the connection uses it; the
    shunt field with the field ammeter where there is one; rheostat for self-excited; exciter for separate."""
    w = wiring(welder, setting(welder, conn), kind)
    roles = w.roles()
    assert {"armature", "voltmeter", "load"} <= set(roles)
    uses_series = conn not in ("separate", "shunt")
    assert ("series-field" in roles) == uses_series
    if uses_series:
        assert "tap 8 of 12 turns per pole" in w.part("series-field").label
    assert ("shunt-field" in roles) == (conn != "series")
    assert ("field-ammeter" in roles) == (conn != "series")
    assert ("exciter" in roles) == (conn in SEPARATE)
    if conn in SELF_EXCITED:
        assert "rheostat" in roles and "12 Ω" in w.part("rheostat").label
    if kind == "battery":
        # the bank's fault current is broken and isolated at its end (second battery review)
        assert {"cut-out", "fuse", "isolator"} <= set(roles)
        assert roles.index("line-ammeter") < roles.index("fuse") < roles.index("isolator") < roles.index("load")
    else:
        assert "fuse" not in roles and "isolator" not in roles
    if kind == "lighting":
        assert "feeder" in roles
    svg = wiring_svg(w)
    assert svg.startswith("<svg") and "viewBox" in svg
    assert connection_words(conn) in svg
    assert "A1 +" in svg and "A2 −" in svg
    if conn != "series":
        # one field winding besides the series one: E1–E2 however it is fed (IEC 60034-8, from memory)
        assert "E1–E2" in svg and "F1–F2" not in svg


@pytest.mark.parametrize("conn", [c for c in CONNECTIONS if c.endswith(("cumulative", "differential"))])
def test_differential_turns_the_series_field_round(welder, conn):
    """Cumulative: current enters the series field at D1 (aiding); differential: at D2 (opposing), drawn so."""
    w = wiring(welder, setting(welder, conn), "welding")
    if conn.endswith("differential"):
        assert (w.series_sense, w.series_terminals) == ("opposing", ("D2", "D1"))
        assert "OPPOSING" in wiring_svg(w)
    else:
        assert (w.series_sense, w.series_terminals) == ("aiding", ("D1", "D2"))
        assert "aiding" in wiring_svg(w)
    twin = conn.replace("differential", "cumulative") if conn.endswith("differential") else \
        conn.replace("cumulative", "differential")
    assert wiring(welder, setting(welder, twin), "welding").series_terminals == tuple(reversed(w.series_terminals))


@pytest.mark.parametrize("sense", ["cumulative", "differential"])
def test_long_and_short_shunt_differ(welder, sense):
    """Long shunt: the shunt field across the line terminals, after the series field; short shunt: across the
    brushes, before it. The drawings differ."""
    long_ = wiring(welder, setting(welder, f"long-shunt-{sense}"), "lighting")
    short = wiring(welder, setting(welder, f"short-shunt-{sense}"), "lighting")
    assert (long_.shunt_across, short.shunt_across) == ("terminals", "armature")
    assert "after the series field" in " ".join(long_.steps)
    assert "brushes" in " ".join(short.steps)
    assert wiring_svg(long_) != wiring_svg(short)


def test_diverter_and_exciter_drawn(welder):
    w = wiring(welder, setting(welder, "separate-differential", diverter_ohm=0.02), "welding")
    assert "diverter" in w.roles() and "0.02 Ω" in w.part("diverter").label
    assert w.part("exciter").label == "exciter 48 V"
    svg = wiring_svg(w)
    assert "diverter" in svg and "exciter 48 V" in svg


def test_booster_in_the_feeder():
    m = load_machine(DEMO / "machines" / "feeder-booster.toml")
    w = wiring(m, check_setting(m, Setting("series")), "booster")
    assert w.roles()[:3] == ["bus", "armature", "series-field"]
    assert "booster in the feeder" in wiring_svg(w)


def test_booster_adds_to_the_bus():
    """Regression: the booster's wiring put the bus's + bar on A1, its + brush, and A1 also to the series field,
    which drives the booster's EMF against the bus (and reads as A1 wired to both sides). For the EMF to add, the
    line current leaves by the + brush towards the feeder: bus + to A2 (−), A1 (+) on through the series field
    to the feeder (Theraja Vol II, boosters; from memory)."""
    m = load_machine(DEMO / "machines" / "feeder-booster.toml")
    w = wiring(m, check_setting(m, Setting("series", series_turns=11)), "booster")
    assert w.steps[0].startswith("From the bus's + bar to the booster's A2 (−) brush")
    assert w.steps[1].startswith("A1 (+) to series field") and "feeder's + line" in w.steps[1]
    assert not any("to the booster's A1" in s for s in w.steps)
    assert "A2 −  booster  A1 +" in wiring_svg(w)


@pytest.mark.parametrize("conn", ["separate-differential", "long-shunt-differential", "short-shunt-differential"])
def test_differential_words_name_the_field_it_opposes(welder, conn):
    """Regression: a separately excited differential set was told its series field is "turned round against
    the shunt field"; its field is fed separately (a separate field), and the words say so."""
    w = wiring(welder, setting(welder, conn), "welding")
    said = " ".join(w.steps)
    field = "separate" if conn.startswith("separate") else "shunt"
    assert f"Turned round against the {field} field: differential." in said


def test_separately_fed_winding_keeps_its_shunt_marking(welder):
    """The machine file has one field winding besides the series one: fed from an exciter it is still the
    winding marked E1–E2, and the fitter is told so (F1–F2 marks a winding built for separate excitation,
    IEC 60034-8, from memory). (Regression: the steps sent the fitter to F1–F2 terminals that do not exist.)"""
    w = wiring(welder, setting(welder, "separate-differential"), "welding")
    said = " ".join(w.steps)
    assert "Shunt winding E1–E2, fed as a separate field" in said and "F1" not in said
