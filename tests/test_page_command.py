"""``supplycfg page``: the page served with the package's own settings from any folder.

Issue 8 item 17: ``.streamlit/config.toml`` is read only from the folder the
server starts in, so started elsewhere the page listened on every interface
with a 200 MB upload limit. The command passes every setting as a flag, which
Streamlit ranks above any configuration file. The test starts the real server
in a stranger's folder (whose own configuration asks for every interface) and
reads the kernel's table of listening sockets.
"""

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

from supplycfg import cli

ROOT = Path(__file__).resolve().parent.parent
#: Longest wait for the server's health endpoint [s]: a bound, not a sleep.
STARTUP_LIMIT_S = 120.0
POLL_S = 0.2


def test_page_command_carries_every_setting_as_a_flag():
    """The settings the README promises, each a command-line flag of ``streamlit run``."""
    argv = cli.page_command(8600)
    assert argv[1:4] == ["-m", "streamlit", "run"] and Path(argv[4]) == cli.PAGE_SCRIPT
    flags = dict(zip(argv[5::2], argv[6::2]))
    assert flags == {"--server.address": "127.0.0.1", "--server.headless": "true", "--server.maxUploadSize": "1",
                     "--browser.gatherUsageStats": "false", "--client.toolbarMode": "minimal",
                     "--server.port": "8600"}
    assert cli.PAGE_SCRIPT.is_file()
    assert dict(zip(*[iter(cli.page_command(8600, "0.0.0.0")[5:])] * 2))["--server.address"] == "0.0.0.0"


def test_readme_first_command_starts_the_page():
    """The README's first set-up command installs and starts the page with ``supplycfg page``."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = readme.split("```")[1::2]
    assert blocks[0].strip() == "python3 -m venv .venv && . .venv/bin/activate && pip install -e . && supplycfg page"
    assert blocks[1].strip().endswith('pip install -e ".[test]" && pytest')


def _free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _listening(port):
    """Local addresses of the sockets listening on ``port``, from /proc/net/tcp and tcp6."""
    found = []
    for table in ("/proc/net/tcp", "/proc/net/tcp6"):
        try:
            rows = Path(table).read_text().splitlines()[1:]
        except OSError:
            continue
        for row in rows:
            local, state = row.split()[1], row.split()[3]
            addr, hexport = local.split(":")
            if state == "0A" and int(hexport, 16) == port:  # 0A = LISTEN
                found.append(addr)
    return found


def _wait_healthy(port, proc):
    """Poll the health endpoint until it answers ``ok``, the server exits, or the bound passes."""
    deadline = time.monotonic() + STARTUP_LIMIT_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            return False
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/_stcore/health", timeout=2) as r:
                if r.read().decode().strip() == "ok":
                    return True
        except OSError:
            pass
        time.sleep(POLL_S)
    return False


@pytest.mark.skipif(not Path("/proc/net/tcp").exists(), reason="reads Linux's table of listening sockets")
def test_page_from_another_folder_listens_on_loopback_only(tmp_path):
    """Issue 8 item 17: started from a folder whose own Streamlit configuration asks
    for every interface, ``supplycfg page`` still listens on 127.0.0.1 only."""
    (tmp_path / ".streamlit").mkdir()
    (tmp_path / ".streamlit" / "config.toml").write_text(
        '[server]\naddress = "0.0.0.0"\nmaxUploadSize = 200\nheadless = false\n', encoding="utf-8")
    port = _free_port()
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-m", "supplycfg.cli", "page", "--port", str(port)], cwd=tmp_path,
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    try:
        healthy = _wait_healthy(port, proc)
        listening = _listening(port)
    finally:
        proc.terminate()
        try:
            out, _ = proc.communicate(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            out, _ = proc.communicate()
    assert healthy, f"the page did not answer on 127.0.0.1:{port}: {out[-2000:]}"
    # 0100007F is 127.0.0.1 in the kernel's byte order; anything else (0.0.0.0, ::) is wider
    assert listening and set(listening) == {"0100007F"}, listening


def test_entry_script_draws_the_demo_page_from_another_folder(tmp_path, monkeypatch):
    """The script ``supplycfg page`` serves draws the demo job wherever it starts."""
    from streamlit.testing.v1 import AppTest
    monkeypatch.chdir(tmp_path)
    at = AppTest.from_file(str(cli.PAGE_SCRIPT), default_timeout=60).run()
    assert not at.exception
    assert any("Kestrel Ridge" in m.value for m in at.markdown)
