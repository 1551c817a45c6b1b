"""Bad input: the corpus of broken files, bad command-line options, random bytes.

Project rule for every case here: one line naming the file (or "command
line"), the key and what is allowed; an InputError from the readers, exit
code 2 from the command line; never a traceback or a hang.

``tests/data/bad/index.toml`` maps each corpus file to the key its message
must name and the one rule it breaks.
"""

import os
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings, strategies as st

from supplycfg import cli
from supplycfg.errors import InputError
from supplycfg.profile import load_profile
from supplycfg.machine import load_machine
from supplycfg.validate import MAX_FILE_BYTES

ROOT = Path(__file__).resolve().parent.parent
BAD = Path(__file__).resolve().parent / "data" / "bad"
INDEX = tomllib.loads((BAD / "index.toml").read_text(encoding="utf-8"))
MACHINES = sorted((ROOT / "profiles" / "machines").glob("*.toml"))
PROFILES = sorted((ROOT / "profiles" / "loads").glob("*.toml"))
GOOD_MACHINE = ROOT / "profiles" / "machines" / "charging-set.toml"

MACHINE_CASES = sorted(n for n in INDEX if n.startswith("machine-"))
PROFILE_CASES = sorted(n for n in INDEX if n.startswith("profile-"))


def _reader(name):
    return load_machine if name.startswith("machine-") else load_profile


def _argv(name, path):
    if name.startswith("machine-"):
        return ["curve", str(path), "--connection", "shunt"]
    return ["search", str(GOOD_MACHINE), str(path)]


def _assert_one_line(text, name, key):
    assert text.strip(), "empty message"
    assert len(text.splitlines()) == 1, f"more than one line: {text!r}"
    assert "Traceback" not in text
    assert f"{name}: {key}: " in text, f"{text!r} does not name {name} and {key}"
    assert text.split(f"{name}: {key}: ", 1)[1].strip(), "nothing said about what is allowed"


# ---------------------------------------------------------------------------
# the corpus
# ---------------------------------------------------------------------------

def test_corpus_is_complete():
    """Project rule: at least 40 broken machine files and 20 broken profiles, all indexed."""
    on_disk = {p.name for p in BAD.iterdir()} - {"index.toml"}
    assert on_disk == set(INDEX), f"not indexed: {sorted(on_disk - set(INDEX))}; missing: {sorted(set(INDEX) - on_disk)}"
    assert len(MACHINE_CASES) >= 40
    assert len(PROFILE_CASES) >= 20
    assert len(MACHINE_CASES) + len(PROFILE_CASES) == len(INDEX)
    for name, entry in INDEX.items():
        assert set(entry) == {"key", "breaks"}, name


@pytest.mark.parametrize("name", MACHINE_CASES + PROFILE_CASES)
def test_reader_gives_one_line(name):
    """Project rule: each broken file raises InputError, one line naming file and key."""
    key = INDEX[name]["key"]
    with pytest.raises(InputError) as info:
        _reader(name)(BAD / name)
    msg = str(info.value)
    _assert_one_line(msg, name, key)
    assert msg.startswith(f"{name}: {key}: ")
    assert info.value.source == name and info.value.key == key


@pytest.mark.parametrize("name", MACHINE_CASES + PROFILE_CASES)
def test_reader_same_message_for_uploaded_content(name):
    """Project rule: an upload (content in memory) gets the same message as the file."""
    with pytest.raises(InputError) as from_file:
        _reader(name)(BAD / name)
    with pytest.raises(InputError) as from_text:
        _reader(name)(name, text=(BAD / name).read_bytes())
    assert str(from_text.value) == str(from_file.value)


@pytest.mark.parametrize("name", MACHINE_CASES + PROFILE_CASES)
def test_command_line_exit_2_one_line(name, capsys):
    """Project rule: exit code 2, one line on standard error, nothing on standard output."""
    rc = cli.main(_argv(name, BAD / name))
    out, err = capsys.readouterr()
    assert rc == 2
    assert out == ""
    _assert_one_line(err, name, INDEX[name]["key"])
    assert err.startswith("supplycfg: ")


@pytest.mark.parametrize("name", ["machine-binary.toml", "machine-occ-falls.toml",
                                  "machine-deeply-nested.toml", "profile-soc-outside.toml"])
def test_real_process_prints_no_traceback(name):
    """Project rule: through a real interpreter no traceback reaches the terminal."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.run([sys.executable, "-m", "supplycfg.cli", *_argv(name, BAD / name)],
                          capture_output=True, text=True, cwd=ROOT, env=env, timeout=60)
    assert proc.returncode == 2, proc.stderr
    assert proc.stdout == ""
    _assert_one_line(proc.stderr, name, INDEX[name]["key"])


# ---------------------------------------------------------------------------
# files made at test time: too big, binary, not a regular file
# ---------------------------------------------------------------------------

def _ten_megabytes(path):
    # a valid-looking start, then comment lines up to 10 MB
    head = GOOD_MACHINE.read_bytes()
    line = b"# " + b"x" * 77 + b"\n"
    with open(path, "wb") as fh:
        fh.write(head)
        fh.write(line * ((10 * 1024 * 1024 - len(head)) // len(line) + 1))
    assert path.stat().st_size >= 10 * 1024 * 1024


@pytest.mark.parametrize("reader, stem", [(load_machine, "machine"), (load_profile, "profile")])
def test_ten_megabyte_file(tmp_path, reader, stem):
    """Project rule: a 10 MB file is refused by size before it is parsed."""
    path = tmp_path / f"{stem}-ten-megabytes.toml"
    _ten_megabytes(path)
    with pytest.raises(InputError) as info:
        reader(path)
    _assert_one_line(str(info.value), path.name, "file")
    assert str(MAX_FILE_BYTES) in str(info.value)
    with pytest.raises(InputError) as info:
        reader(path.name, text=path.read_bytes())
    _assert_one_line(str(info.value), path.name, "file")


def test_ten_megabyte_file_command_line(tmp_path, capsys):
    """Project rule: exit 2 and one line for a 10 MB machine file and profile."""
    big = tmp_path / "big.toml"
    _ten_megabytes(big)
    for argv in (["curve", str(big), "--connection", "shunt"], ["search", str(GOOD_MACHINE), str(big)]):
        assert cli.main(argv) == 2
        out, err = capsys.readouterr()
        assert out == ""
        _assert_one_line(err, "big.toml", "file")


@pytest.mark.parametrize("reader", [load_machine, load_profile])
def test_binary_written_at_test_time(tmp_path, reader):
    """Project rule: random binary content is refused as binary."""
    path = tmp_path / "random.toml"
    path.write_bytes(bytes(range(256)) * 16 + os.urandom(4096))
    with pytest.raises(InputError) as info:
        reader(path)
    _assert_one_line(str(info.value), "random.toml", "file")


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes need a POSIX system")
def test_named_pipe_is_refused_without_hanging(tmp_path):
    """Project rule: never a hang; a pipe is not read (it would block until written)."""
    fifo = tmp_path / "machine.toml"
    os.mkfifo(fifo)
    with pytest.raises(InputError) as info:
        load_machine(fifo)
    _assert_one_line(str(info.value), "machine.toml", "file")


def test_file_name_with_a_newline_stays_on_one_line(tmp_path, capsys):
    """Project rule: one line, even when the file's own name holds a line break."""
    path = tmp_path / "odd\nname\u2028.toml"
    path.write_bytes((BAD / "machine-odd-poles.toml").read_bytes())
    with pytest.raises(InputError) as info:
        load_machine(path)
    _assert_one_line(str(info.value), "odd\\nname\\u2028.toml", "machine.poles")
    assert cli.main(["curve", str(path), "--connection", "shunt"]) == 2
    _assert_one_line(capsys.readouterr().err, "odd\\nname\\u2028.toml", "machine.poles")


def test_lone_surrogate_in_uploaded_text():
    """Project rule: text from a form that cannot be UTF-8 is refused, not crashed on."""
    text = GOOD_MACHINE.read_text(encoding="utf-8").replace("CS-1", "CS-\ud800")
    with pytest.raises(InputError) as info:
        load_machine("form.toml", text=text)
    _assert_one_line(str(info.value), "form.toml", "file")


# ---------------------------------------------------------------------------
# command-line options
# ---------------------------------------------------------------------------

M = str(GOOD_MACHINE)
BAD_OPTIONS = {
    "unknown connection": (["curve", M, "--connection", "triangle"], "--connection"),
    "no connection": (["curve", M], "--connection"),
    "rheostat above the machine's range": (["curve", M, "--connection", "shunt", "--rheostat-ohm", "500"], "--rheostat-ohm"),
    "negative rheostat": (["curve", M, "--connection", "shunt", "--rheostat-ohm", "-1"], "--rheostat-ohm"),
    "rheostat and field current both": (["curve", M, "--connection", "separate", "--rheostat-ohm", "10",
                                         "--field-current-a", "1"], "--field-current-a"),
    "field current on a self-excited connection": (["curve", M, "--connection", "shunt", "--field-current-a", "1"],
                                                   "--field-current-a"),
    "no load given to point": (["point", M, "--connection", "shunt"], "load"),
    "two loads given to point": (["point", M, "--connection", "shunt", "--load-ohm", "3", "--load-current-a", "20"], "load"),
    "negative load resistance": (["point", M, "--connection", "shunt", "--load-ohm", "-2"], "--load-ohm"),
    "battery without its resistance": (["point", M, "--connection", "shunt", "--battery-emf-v", "120"], "--battery-ohm"),
    "points 0": (["curve", M, "--connection", "shunt", "--points", "0"], "--points"),
    "points as text": (["curve", M, "--connection", "shunt", "--points", "many"], "--points"),
    "text where a number belongs": (["curve", M, "--connection", "shunt", "--rheostat-ohm", "ten"], "--rheostat-ohm"),
    "nan speed": (["curve", M, "--connection", "shunt", "--speed-rpm", "nan"], "--speed-rpm"),
    "infinite load": (["point", M, "--connection", "shunt", "--load-ohm", "inf"], "--load-ohm"),
    "negative speed": (["curve", M, "--connection", "shunt", "--speed-rpm", "-1450"], "--speed-rpm"),
    "series turns not a tap": (["curve", M, "--connection", "long-shunt-cumulative", "--series-turns", "4"], "--series-turns"),
    "missing machine file": (["curve", "no-such-machine.toml", "--connection", "shunt"], "file"),
    "folder instead of a file": (["curve", str(ROOT / "profiles"), "--connection", "shunt"], "file"),
    "missing profile file": (["search", M, "no-such-profile.toml"], "file"),
    "unknown command": (["tune", M], "command"),
}


@pytest.mark.parametrize("case", sorted(BAD_OPTIONS))
def test_bad_option_exit_2_one_line(case, capsys):
    """Project rule: a bad option gives exit 2 and one line naming the option."""
    argv, key = BAD_OPTIONS[case]
    rc = cli.main(argv)
    out, err = capsys.readouterr()
    assert rc == 2
    assert out == ""
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err
    assert key in err, err
    if key == "file":
        assert Path(argv[-1] if argv[0] == "search" else argv[1]).name + ": file: " in err
    else:
        assert "command line" in err


# ---------------------------------------------------------------------------
# the demo files load
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("path", MACHINES, ids=lambda p: p.name)
def test_demo_machines_load(path):
    """The demo machines obey every rule the corpus breaks."""
    m = load_machine(path)
    assert m.source == path.name


@pytest.mark.parametrize("path", PROFILES, ids=lambda p: p.name)
def test_demo_profiles_load(path):
    """The demo load profiles obey every rule the corpus breaks."""
    p = load_profile(path)
    assert p.source == path.name


def test_demo_machine_on_command_line(capsys):
    """A good file on the command line: exit 0, nothing on standard error."""
    assert cli.main(["curve", M, "--connection", "shunt", "--rheostat-ohm", "0", "--points", "5", "--json"]) == 0
    out, err = capsys.readouterr()
    assert err == "" and out.lstrip().startswith("{")


# ---------------------------------------------------------------------------
# random content: only InputError, never another exception
# ---------------------------------------------------------------------------

# The conftest profile's settings (derandomised in CI), with enough examples:
# one read costs about a millisecond.
_RANDOM = settings(max_examples=max(200, settings().max_examples))

_GOOD = {load_machine: [p.read_text(encoding="utf-8") for p in MACHINES],
         load_profile: [p.read_text(encoding="utf-8") for p in PROFILES]}
_GOOD_TEXTS = _GOOD[load_machine] + _GOOD[load_profile]
_KEYS = sorted({line.split("=")[0].strip() for t in _GOOD_TEXTS for line in t.splitlines()
                if "=" in line and not line.lstrip().startswith("#")})
_TABLES = ["machine", "open_circuit", "armature_reaction", "winding", "load", "drive",
           "battery", "welding", "lighting", "booster", "extra"]
_VALUES = ["0", "-0", "1", "-1", "2", "4", "5", "0.0", "1e400", "-1e400", "nan", "+inf", "-inf", "1e-320", "1e-300", "1e300", "1e-9", "0.5",
           "9" * 30, "0x10", "true", "false", '""', '"shunt"', '"lead-acid-vented"', '"manual-metal-arc"',
           '"normal"', '"incandescent"', '"battery"', '"welding"', '"lighting"', '"booster"', '"linear"',
           "1979-05-27", "07:32:00", "[]", "[0]", "[0, 0]", "[0, 1]", "[1, 0]", "[0, 1, 2, 3]", "[0.0, 0.1, 0.2, 0.3]",
           "[0, 1, 2, 2]", "[3, 2, 1, 0]", "[0, nan, 2, 3]", "[0, 1, inf, 3]", '[0, "1", 2, 3]', "[[0, 1], [2]]",
           "{}", "{ a = 1 }", "[0.2, 1.0]", "[1980, 2020]", "[60, 180]", "[0, 3, 6]", "[0, 300]"]


@st.composite
def _tomlish(draw):
    """Text built from the tables, keys and value shapes of the real files."""
    lines = []
    for _ in range(draw(st.integers(0, 30))):
        kind = draw(st.integers(0, 9))
        if kind == 0:
            lines.append(f"[{draw(st.sampled_from(_TABLES))}]")
        elif kind == 1:
            lines.append(draw(st.text(max_size=30)))
        else:
            key = draw(st.sampled_from(_KEYS) | st.from_regex(r"[a-z_]{1,12}", fullmatch=True))
            lines.append(f"{key} = {draw(st.sampled_from(_VALUES))}")
    return "\n".join(lines)


@st.composite
def _mutated_good_file(draw, texts):
    """A demo file with a few lines dropped, given another line's value or an odd one, or typed into."""
    lines = draw(st.sampled_from(texts)).splitlines()
    for _ in range(draw(st.integers(1, 4))):
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.integers(0, 4))
        if op == 0:
            del lines[i]
        elif op in (1, 2) and "=" in lines[i]:
            others = [ln.split("=", 1)[1] for ln in lines if "=" in ln]
            value = draw(st.sampled_from(others)) if op == 1 else " " + draw(st.sampled_from(_VALUES))
            lines[i] = lines[i].split("=")[0] + "=" + value
        else:
            pos = draw(st.integers(0, len(lines[i])))
            lines[i] = lines[i][:pos] + draw(st.text(max_size=3)) + lines[i][pos:]
    return "\n".join(lines)


def _only_input_error(reader, content):
    try:
        reader("random.toml", text=content)
    except InputError as exc:
        assert len(str(exc).splitlines()) == 1
        assert str(exc).startswith("random.toml: ")


@pytest.mark.parametrize("reader", [load_machine, load_profile])
@_RANDOM
@given(content=st.binary(max_size=2000))
def test_random_bytes_raise_only_input_error(reader, content):
    """Project rule: random bytes never raise anything but InputError."""
    _only_input_error(reader, content)


@pytest.mark.parametrize("reader", [load_machine, load_profile])
@_RANDOM
@given(content=_tomlish())
def test_random_tomlish_text_raises_only_input_error(reader, content):
    """Project rule: TOML-ish text from the real keys and odd values raises only InputError."""
    _only_input_error(reader, content)


@pytest.mark.parametrize("reader", [load_machine, load_profile])
@_RANDOM
@given(data=st.data())
def test_mutated_demo_files_raise_only_input_error(reader, data):
    """Project rule: a demo file with a few lines broken loads or raises only InputError."""
    _only_input_error(reader, data.draw(_mutated_good_file(_GOOD[reader])))
