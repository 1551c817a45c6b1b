"""Builders the tests share: the demo files, a small machine from TOML-like tables, a circuit state.

Imported by test modules as ``builders`` (the tests folder is on the path when pytest runs them).
"""

import functools
from pathlib import Path

import numpy as np

from supplycfg.circuit import build_circuit, machine_state
from supplycfg.machine import load_machine, machine_from_dict
from supplycfg.profile import load_profile

ROOT = Path(__file__).resolve().parents[1]
MACHINES = ROOT / "profiles" / "machines"
LOADS = ROOT / "profiles" / "loads"
#: The demo machine and load profile of each job.
DEMOS = {"battery": ("charging-set", "battery-charging"), "welding": ("welding-set", "welding"),
         "lighting": ("lighting-set", "lighting"), "booster": ("feeder-booster", "booster")}


def demo_paths(kind):
    """The demo machine file and load profile of job ``kind``."""
    m, p = DEMOS[kind]
    return MACHINES / f"{m}.toml", LOADS / f"{p}.toml"


@functools.lru_cache(maxsize=None)
def demo(kind):
    """``(machine, profile, search result)`` of job ``kind``'s demo (solved once per test run)."""
    from supplycfg.search import search
    mp, pp = demo_paths(kind)
    m, p = load_machine(mp), load_profile(pp)
    return m, p, search(m, p)


def profile_variant(kind, folder, name, *pairs):
    """Job ``kind``'s demo profile with lines replaced (``(old, new)`` pairs, each asserted present),
    written to ``folder / name``; returns its path."""
    text = demo_paths(kind)[1].read_text(encoding="utf-8")
    for old, new in pairs:
        assert old in text, old
        text = text.replace(old, new)
    path = Path(folder) / name
    path.write_text(text, encoding="utf-8")
    return path


def make_machine(machine=None, occ=None, **tables):
    """A machine from TOML-like tables; ``machine`` and ``occ`` update the defaults (a 230 V, 100 A
    four-pole shunt machine with a linear five-point open-circuit curve)."""
    m = {"label": "check", "poles": 4, "rated_speed_rpm": 1000.0, "rated_voltage_v": 230.0,
         "rated_armature_current_a": 100.0, "armature_resistance_ohm": 0.05,
         "shunt_field_resistance_ohm": 100.0, "shunt_turns_per_pole": 1000.0,
         "rheostat_max_ohm": 200.0}
    m.update(machine or {})
    o = {"speed_rpm": m["rated_speed_rpm"], "field_current_a": [0.0, 0.5, 1.0, 1.5, 2.0],
         "emf_v": [2.0, 100.0, 180.0, 220.0, 240.0], "interpolation": "linear"}
    o.update(occ or {})
    return machine_from_dict({"machine": m, "open_circuit": o, **tables})


def state_at(machine, setting, v, il):
    """The engine's circuit state at a terminal voltage [V] and load current [A], as floats."""
    circ = build_circuit(machine, [setting])
    idx = np.array([0])
    p = dict(circ.take(idx), idx=idx)
    st = machine_state(circ, p, np.array([float(v)]), np.array([float(il)]))
    return {k: float(np.asarray(val)[0]) for k, val in st.items()}
