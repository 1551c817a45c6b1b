"""Files the tool writes: atomic writes, round trips, hostile text, safe parsing.

Project rules checked here: every written file goes through a temporary file
in the same folder and ``os.replace``; an existing file is never overwritten
unless asked; a machine or profile saved and loaded again equals the one
saved; files are parsed only as TOML with ``tomllib``.
"""

import os
import re
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings, strategies as st

from supplycfg import files
from supplycfg.errors import InputError
from supplycfg.files import dumps_toml, write_atomic
from supplycfg.profile import load_profile, profile_to_dict
from supplycfg.machine import load_machine, machine_to_dict

ROOT = Path(__file__).resolve().parent.parent
MACHINES = sorted((ROOT / "profiles" / "machines").glob("*.toml"))
PROFILES = sorted((ROOT / "profiles" / "loads").glob("*.toml"))
PACKAGE = ROOT / "supplycfg"


def _leftovers(folder, name):
    """Temporary files of a write to ``name`` still in ``folder``."""
    return [p.name for p in folder.iterdir() if p.name != name]


# ---------------------------------------------------------------------------
# write_atomic
# ---------------------------------------------------------------------------

def test_writes_text_and_bytes(tmp_path):
    """A new file gets exactly the data, text as UTF-8."""
    write_atomic(tmp_path / "a.txt", "Grüße ⚡\n")
    write_atomic(tmp_path / "b.bin", b"\x00\x01\xff")
    assert (tmp_path / "a.txt").read_bytes() == "Grüße ⚡\n".encode("utf-8")
    assert (tmp_path / "b.bin").read_bytes() == b"\x00\x01\xff"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt", "b.bin"]


def test_never_overwrites_without_force(tmp_path):
    """Project rule: an existing file is kept, and the message is one line naming it."""
    target = tmp_path / "sheet.html"
    target.write_text("the engineer's own notes")
    with pytest.raises(InputError) as info:
        write_atomic(target, "new content")
    msg = str(info.value)
    assert len(msg.splitlines()) == 1 and msg.startswith(f"{target}: ") and "--force" in msg
    assert target.read_text() == "the engineer's own notes"
    assert _leftovers(tmp_path, "sheet.html") == []


def test_overwrites_with_force(tmp_path):
    """With force the new content replaces the old, nothing else is left."""
    target = tmp_path / "sheet.html"
    target.write_text("old")
    write_atomic(target, "new", force=True)
    assert target.read_text() == "new"
    assert _leftovers(tmp_path, "sheet.html") == []


def test_folder_in_the_way_is_not_overwritten(tmp_path):
    """A folder of the target's name is refused without force."""
    (tmp_path / "out.json").mkdir()
    with pytest.raises(InputError):
        write_atomic(tmp_path / "out.json", "{}")
    assert (tmp_path / "out.json").is_dir()


def test_folder_in_the_way_is_refused_even_with_force(tmp_path):
    """Project rule: a target that cannot be written is an InputError, one line."""
    (tmp_path / "out.json").mkdir()
    with pytest.raises(InputError):
        write_atomic(tmp_path / "out.json", "{}", force=True)


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
def test_written_file_has_the_usual_mode(tmp_path):
    """A written file gets the mode an ordinary open() would give it (0666 less the umask)."""
    umask = os.umask(0o022)
    os.umask(umask)
    write_atomic(tmp_path / "sheet.html", "<p>sheet</p>")
    assert (tmp_path / "sheet.html").stat().st_mode & 0o777 == 0o666 & ~umask


def test_temporary_file_is_in_the_same_folder(tmp_path, monkeypatch):
    """Project rule: the temporary file sits beside the target (os.replace stays on one file system)."""
    seen = []
    real_replace = os.replace

    def spy(src, dst):
        seen.append((Path(src), Path(dst)))
        assert Path(src).exists()
        return real_replace(src, dst)

    monkeypatch.setattr(files.os, "replace", spy)
    target = tmp_path / "deep" / "machine.toml"
    target.parent.mkdir()
    write_atomic(target, "x = 1\n")
    assert len(seen) == 1
    src, dst = seen[0]
    assert src.parent == target.parent and dst == target and src != target
    assert _leftovers(target.parent, "machine.toml") == []


def test_relative_path_in_the_working_folder(tmp_path, monkeypatch):
    """A bare file name is written in the working folder."""
    monkeypatch.chdir(tmp_path)
    write_atomic("report.md", "# sheet\n")
    assert (tmp_path / "report.md").read_text() == "# sheet\n"
    assert _leftovers(tmp_path, "report.md") == []


def test_missing_folder_is_one_line(tmp_path):
    """Project rule: a target in a folder that does not exist is an InputError, one line."""
    target = tmp_path / "no-such-folder" / "out.json"
    with pytest.raises(InputError) as info:
        write_atomic(target, "{}")
    assert len(str(info.value).splitlines()) == 1
    assert str(info.value).startswith(f"{target}: output: ")
    assert str(tmp_path / "no-such-folder") in str(info.value)


def _fail_replace(src, dst):
    raise OSError(28, "No space left on device")


def _fail_fsync(fd):
    raise OSError(5, "Input/output error")


def _interrupt_fsync(fd):
    raise KeyboardInterrupt


@pytest.mark.parametrize("where, fault, raised", [
    ("replace", _fail_replace, (OSError, InputError)),
    ("fsync", _fail_fsync, (OSError, InputError)),
    ("fsync", _interrupt_fsync, KeyboardInterrupt),
])
@pytest.mark.parametrize("existing", [False, True])
def test_failed_write_leaves_nothing_behind(tmp_path, monkeypatch, where, fault, raised, existing):
    """Project rule: a write that fails (disk full, I/O error, Ctrl-C) leaves no temporary
    file and does not touch an existing target."""
    target = tmp_path / "charge.json"
    if existing:
        target.write_text("previous run")
    monkeypatch.setattr(files.os, where, fault)
    with pytest.raises(raised):
        write_atomic(target, "{\"new\": true}", force=True)
    monkeypatch.undo()
    assert _leftovers(tmp_path, "charge.json") == []
    if existing:
        assert target.read_text() == "previous run"
    else:
        assert not target.exists()


def test_data_of_wrong_type_leaves_nothing_behind(tmp_path):
    """A programming fault inside the write still removes the temporary file."""
    with pytest.raises(TypeError):
        write_atomic(tmp_path / "x.json", 12345)
    assert list(tmp_path.iterdir()) == []


def test_dangling_link_is_not_overwritten_without_force(tmp_path):
    """Project rule: an existing directory entry (here a dangling link) is kept unless asked."""
    link = tmp_path / "sheet.html"
    link.symlink_to(tmp_path / "gone.html")
    with pytest.raises(InputError):
        write_atomic(link, "new")
    assert link.is_symlink()


# ---------------------------------------------------------------------------
# round trips
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("path", MACHINES, ids=lambda p: p.name)
def test_machine_round_trip(path, tmp_path):
    """Project rule: machine_to_dict -> dumps_toml -> load_machine gives the machine back."""
    m = load_machine(path)
    text = dumps_toml(machine_to_dict(m), header="saved by the round-trip test")
    assert load_machine(path.name, text=text) == m
    out = write_atomic(tmp_path / path.name, text)
    again = load_machine(out)
    assert again == m
    # and a second save is byte-identical: nothing drifts on repeated saves
    assert dumps_toml(machine_to_dict(again), header="saved by the round-trip test") == text


@pytest.mark.parametrize("path", PROFILES, ids=lambda p: p.name)
def test_profile_round_trip(path, tmp_path):
    """Project rule: profile_to_dict -> dumps_toml -> load_profile gives the profile back."""
    p = load_profile(path)
    text = dumps_toml(profile_to_dict(p))
    assert load_profile(path.name, text=text) == p
    out = write_atomic(tmp_path / path.name, text)
    again = load_profile(out)
    assert again == p
    assert dumps_toml(profile_to_dict(again)) == text


HOSTILE_LABELS = [
    "<script>alert(1)</script>",
    "<img src=x onerror=alert(1)>",
    "\"double\" and 'single' quotes",
    "back\\slash \\n not a newline",
    "two\nlines\r\nand a tab\t",
    '"""triple""" \'\'\'quoted\'\'\'',
    "]] [machine] = # not a table",
    "Kühlwasser ⚡ 😀 ‮reversed‬ e\u0301",
    "line\u2028separator\u2029paragraph\x85next",
    "nul\x00 bell\x07 escape\x1b",
    "\ufeffbyte-order mark inside",
    "x" * 5000,
]


@pytest.mark.parametrize("label", HOSTILE_LABELS, ids=range(len(HOSTILE_LABELS)))
def test_hostile_label_survives_the_round_trip(label):
    """Project rule: a label is text, written escaped and read back unchanged."""
    m = load_machine(MACHINES[0])
    d = machine_to_dict(m)
    d["machine"]["label"] = label
    text = dumps_toml(d)
    assert tomllib.loads(text)["machine"]["label"] == label
    back = load_machine("m.toml", text=text)
    assert back.label == label
    p = load_profile(PROFILES[0])
    d = profile_to_dict(p)
    d["load"]["label"] = label
    assert load_profile("p.toml", text=dumps_toml(d)).label == label


def test_label_with_delete_character_survives_the_round_trip():
    """TOML 1.0 basic strings: control characters, DEL included, must be escaped."""
    d = machine_to_dict(load_machine(MACHINES[0]))
    d["machine"]["label"] = "rub\x7fout"
    assert load_machine("m.toml", text=dumps_toml(d)).label == "rub\x7fout"


# The conftest profile's settings with enough examples; a save and load is quick.
_MANY = settings(max_examples=max(200, settings().max_examples))


@_MANY
@given(label=st.text(max_size=200).filter(lambda s: "\x7f" not in s))
def test_any_label_survives_the_round_trip(label):
    """Project rule: any text a person types as a label comes back unchanged
    (DEL apart: see the test above)."""
    d = machine_to_dict(load_machine(MACHINES[0]))
    d["machine"]["label"] = label
    assert load_machine("m.toml", text=dumps_toml(d)).label == label


_NUMBER_LINE = re.compile(r"^(\w+) = (-?[0-9][0-9_.eE+-]*)\s*(#.*)?$")
_EDGE_VALUES = ["0", "1", "2", "-1", "0.1", "1e-6", "1e-3", "0.30000000000000004", "1e4", "1e6",
                "123456789.123456789", "5e-324", "1.7976931348623157e308", "7"]


@st.composite
def _edited_demo(draw, paths):
    """A demo file with a few numbers changed to edge values."""
    lines = draw(st.sampled_from(paths)).read_text(encoding="utf-8").splitlines()
    numeric = [i for i, ln in enumerate(lines) if _NUMBER_LINE.match(ln)]
    for i in draw(st.lists(st.sampled_from(numeric), min_size=1, max_size=3)):
        lines[i] = f"{_NUMBER_LINE.match(lines[i]).group(1)} = {draw(st.sampled_from(_EDGE_VALUES))}"
    return "\n".join(lines)


@_MANY
@given(text=_edited_demo(MACHINES))
def test_odd_but_valid_machines_round_trip(text):
    """Project rule: any machine the reader accepts (demo files with numbers changed)
    saves and loads back equal."""
    try:
        m = load_machine("m.toml", text=text)
    except InputError:
        return
    assert load_machine("m.toml", text=dumps_toml(machine_to_dict(m))) == m


@_MANY
@given(text=_edited_demo(PROFILES))
def test_odd_but_valid_profiles_round_trip(text):
    """Project rule: any profile the reader accepts saves and loads back equal."""
    try:
        p = load_profile("p.toml", text=text)
    except InputError:
        return
    assert load_profile("p.toml", text=dumps_toml(profile_to_dict(p))) == p


def test_non_finite_number_is_not_written():
    """A NaN never reaches a file: the writer refuses it with an InputError."""
    with pytest.raises(InputError):
        dumps_toml({"machine": {"rated_speed_rpm": float("nan")}})


# ---------------------------------------------------------------------------
# files are parsed only as TOML
# ---------------------------------------------------------------------------

def _sources():
    paths = sorted(PACKAGE.rglob("*.py"))
    if (ROOT / "app.py").exists():
        paths.append(ROOT / "app.py")
    return paths


@pytest.mark.parametrize("pattern", [r"\beval\s*\(", r"\bexec\s*\(", r"pickle", r"yaml", r"\bmarshal\b",
                                     r"\bshelve\b", r"\bimport\s+toml\b", r"\btomli\b"])
def test_no_loader_that_builds_objects(pattern):
    """Project rule: no eval, pickle or YAML anywhere in the package or the page."""
    hits = [f"{p.relative_to(ROOT)}:{n}" for p in _sources()
            for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1)
            if re.search(pattern, line)]
    assert hits == [], hits


def test_readers_parse_with_tomllib():
    """Project rule: the one parser the readers use is tomllib."""
    src = (PACKAGE / "validate.py").read_text(encoding="utf-8")
    assert "tomllib.loads(" in src
    users = [p.name for p in _sources() if re.search(r"\btomllib\.load", p.read_text(encoding="utf-8"))]
    assert users == ["validate.py"], users


def test_demo_profiles_show_every_key_of_their_job_table():
    """The README says the demo profiles show every key with a comment; a newcomer found four battery keys
    (open_circuit_voltage_per_cell_v among them) in no demo. Each job table's every field appears in its
    demo profile, set or commented out with its unit and default."""
    import dataclasses
    import re
    from supplycfg.jobs import JOBS
    loads = Path(__file__).resolve().parents[1] / "profiles" / "loads"
    files = {"battery": "battery-charging.toml", "welding": "welding.toml", "lighting": "lighting.toml",
             "booster": "booster.toml"}
    for kind, mod in JOBS.items():
        text = (loads / files[kind]).read_text(encoding="utf-8")
        for f in dataclasses.fields(mod.JOB_TABLE):
            assert re.search(rf"^#?\s*{f.name}\s*=", text, re.M), (kind, f.name)
