"""The README's cluster commands bind dask to the address they name, not to every interface.

The listening sockets are read from the Linux kernel's own tables (/proc/PID/net/tcp
and tcp6 with /proc/PID/fd, proc(5) man page), for the scheduler command exactly as
the README prints it (HOST as 127.0.0.1, the port a free one) and for the same command
without --host, which is what the README warns about.
"""

import os
import re
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
LISTEN = "0A"  # TCP_LISTEN in the kernel's st column (include/net/tcp_states.h)


def _readme_command(prefix: str) -> list[str]:
    block = re.search(r"### Breeding on a Dask cluster\n.*?```\n(.*?)```", (ROOT / "README.md").read_text(), re.S)
    lines = [line.split("#")[0].split() for line in block.group(1).splitlines()]
    found = [words for words in lines if " ".join(words).startswith(prefix)]
    assert len(found) == 1, f"the README's cluster block should show one `{prefix}` line"
    return found[0]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _hex_ip(text: str) -> str:
    """An address of /proc/net/tcp (IPv4: 8 hex digits, little-endian words) as text."""
    if len(text) == 8:
        return socket.inet_ntop(socket.AF_INET, bytes.fromhex(text)[::-1])
    words = bytes.fromhex(text)
    return socket.inet_ntop(socket.AF_INET6, b"".join(words[i:i + 4][::-1] for i in range(0, 16, 4)))


def _listening(pid: int) -> set[tuple[str, int]]:
    """(address, port) of every TCP socket process ``pid`` listens on."""
    inodes = set()
    for fd in os.listdir(f"/proc/{pid}/fd"):
        try:
            target = os.readlink(f"/proc/{pid}/fd/{fd}")
        except OSError:
            continue
        if target.startswith("socket:["):
            inodes.add(target[8:-1])
    found = set()
    for table in ("tcp", "tcp6"):
        try:
            rows = Path(f"/proc/{pid}/net/{table}").read_text().splitlines()[1:]
        except FileNotFoundError:
            continue
        for row in rows:
            cols = row.split()
            if cols[3] == LISTEN and cols[9] in inodes:
                addr, port = cols[1].split(":")
                found.add((_hex_ip(addr), int(port, 16)))
    return found


def _listening_after_start(argv: list[str], port: int) -> set[tuple[str, int]]:
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 90
        while True:
            assert proc.poll() is None and time.monotonic() < deadline, "dask scheduler did not start"
            got = _listening(proc.pid)
            if any(p == port for _, p in got):
                return got
            time.sleep(0.2)
    finally:
        proc.kill()
        proc.wait()


@pytest.mark.slow
def test_readme_scheduler_command_listens_on_the_given_host_only():
    dask = str(Path(sys.executable).with_name("dask"))
    words = _readme_command("dask scheduler")
    assert words[words.index("--port") + 1] == "8786"  # dask's default port (`dask scheduler --help`)
    port, status = _free_port(), _free_port()  # (8787 may be taken on a shared machine)
    argv = [dask] + [w.replace("HOST", "127.0.0.1").replace("8786", str(port)).replace("8787", str(status))
                     for w in words[1:]]
    assert _listening_after_start(argv, port) == {("127.0.0.1", port), ("127.0.0.1", status)}
    # Without --host and --dashboard-address, dask binds every interface (0.0.0.0 or ::), even with
    # --no-dashboard (its status server still serves health and metrics): what the README warns about.
    port = _free_port()
    plain = [dask, "scheduler", "--port", str(port), "--no-dashboard"]
    addresses = {a for a, p in _listening_after_start(plain, port)}
    assert addresses & {"0.0.0.0", "::"}, addresses


def test_readme_worker_command_binds_its_own_address_and_names_the_scheduler_host():
    words = _readme_command("dask worker")
    assert words[2] == "tcp://HOST:8786"
    assert words[words.index("--host") + 1] == "WORKER_HOST" and "--no-dashboard" in words
