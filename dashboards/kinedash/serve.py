"""Launching the dashboard with Streamlit on the loopback interface (used by the CLI, tests, benchmark)."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

ENTRY = Path(__file__).resolve().parents[1] / "app.py"
#: Starts Streamlit with the pages' modules imported first (see dashboards/launch.py).
LAUNCH = ENTRY.with_name("launch.py")
#: Accent colour of widgets (the "measured" teal of :data:`kinedash.ui.COLOURS`).
PRIMARY = "#1f6f8b"


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port nobody listens on right now. [-]"""
    with socket.socket() as s:
        s.bind((host, 0))
        return s.getsockname()[1]


def streamlit_command(port: int, host: str = "127.0.0.1", python: str | None = None) -> list[str]:
    """``streamlit run`` of the entry point (through :data:`LAUNCH`), headless, bound to ``host``, no
    telemetry, no file watcher.

    >>> streamlit_command(8601)[4:8]
    ['--server.address', '127.0.0.1', '--server.port', '8601']
    """
    return [python or sys.executable, str(LAUNCH), "run", str(ENTRY),
            "--server.address", host, "--server.port", str(port), "--server.headless", "true",
            "--browser.gatherUsageStats", "false", "--server.fileWatcherType", "none",
            "--client.toolbarMode", "minimal", "--theme.primaryColor", PRIMARY]


def start(env_extra: dict, port: int | None = None, timeout: float = 60.0, log=None):
    """Start the app in a subprocess and wait for its health endpoint; returns (process, base URL).

    Raises RuntimeError with the server's output if it does not answer within ``timeout`` [s].
    """
    port = port or free_port()
    env = dict(os.environ, **env_extra)
    src = str(ENTRY.parents[1] / "src")
    env["PYTHONPATH"] = src + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    logf = log or tempfile.TemporaryFile()
    proc = subprocess.Popen(streamlit_command(port), env=env, stdout=logf, stderr=subprocess.STDOUT,
                            start_new_session=True)
    base = f"http://127.0.0.1:{port}"
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        if proc.poll() is not None:
            logf.seek(0)
            out = logf.read().decode(errors="replace")
            raise RuntimeError(f"streamlit exited with code {proc.returncode}: {out[-2000:]}")
        try:
            with urllib.request.urlopen(base + "/_stcore/health", timeout=2) as r:
                if r.read().strip() == b"ok":
                    return proc, base
        except OSError:
            time.sleep(0.2)
    stop(proc)
    raise RuntimeError(f"streamlit did not answer on {base} within {timeout} s")


def stop(proc) -> None:
    """Stop a server started by :func:`start` (its own process group only)."""
    if proc.poll() is None:
        os.killpg(proc.pid, 15)
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, 9)
            proc.wait(10)
