"""A throwaway PostgreSQL server for the tests (session-scoped pytest fixture ``pg_url``).

The fixture finds the PostgreSQL server binaries (``pg_config --bindir``, then
``/usr/lib/postgresql/*/bin``), runs ``initdb`` into a temporary folder and
``pg_ctl start`` on 127.0.0.1 at a free port, with its unix socket in that
folder and trust authentication (a test cluster only: it accepts local
connections without a password and is deleted afterwards). When the tests run
as root, the cluster is owned and run by the ``postgres`` OS user, since the
server refuses to run as root. It yields a SQLAlchemy URL
``postgresql+psycopg://postgres@127.0.0.1:<port>/postgres`` and stops and
removes the cluster at the end of the session.

If the binaries are missing the fixture fails (it never skips): ``make test``
installs them (``apt-get install postgresql``).
"""

from __future__ import annotations

import glob
import os
import shutil
import socket
import subprocess
import tempfile
from pathlib import Path

import pytest

_INSTALL_HINT = ("PostgreSQL server binaries (initdb, pg_ctl) not found; `make test` installs them "
                 "(apt-get install postgresql), or install them yourself")


def find_bindir() -> Path | None:
    """Folder holding ``initdb`` and ``pg_ctl``, or None."""
    cands = []
    try:
        out = subprocess.run(["pg_config", "--bindir"], capture_output=True, text=True, timeout=10)
        if out.returncode == 0:
            cands.append(out.stdout.strip())
    except (OSError, subprocess.SubprocessError):
        pass
    cands += sorted(glob.glob("/usr/lib/postgresql/*/bin"), reverse=True)
    for c in cands:
        p = Path(c)
        if (p / "initdb").exists() and (p / "pg_ctl").exists():
            return p
    which = shutil.which("initdb")
    if which and shutil.which("pg_ctl"):
        return Path(which).parent
    return None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _as_owner(cmd: list[str], user: str | None) -> list[str]:
    if user is None:
        return cmd
    if shutil.which("runuser"):
        return ["runuser", "-u", user, "--", *cmd]
    return ["su", user, "-c", " ".join(f"'{c}'" for c in cmd)]


class PgCluster:
    """A temporary PostgreSQL cluster: ``start()``, ``url``, ``stop()``."""

    def __init__(self, bindir: Path):
        self.bindir = bindir
        self.user = "postgres" if os.geteuid() == 0 else None
        self.tmp = Path(tempfile.mkdtemp(prefix="kt-pg-"))
        self.data = self.tmp / "data"
        self.sock = self.tmp / "sock"
        self.port = _free_port()
        self.log = self.tmp / "server.log"

    def _run(self, cmd: list[str], timeout: float = 120) -> subprocess.CompletedProcess:
        return subprocess.run(_as_owner(cmd, self.user), capture_output=True, text=True, timeout=timeout)

    def start(self) -> None:
        self.sock.mkdir()
        if self.user:
            shutil.chown(self.tmp, self.user)
            shutil.chown(self.sock, self.user)
        os.chmod(self.tmp, 0o700)
        r = self._run([str(self.bindir / "initdb"), "-D", str(self.data), "-U", "postgres", "--auth=trust",
                       "-E", "UTF8", "--no-sync", "--locale=C"])
        if r.returncode != 0:
            raise RuntimeError(f"initdb failed:\n{r.stdout}\n{r.stderr}")
        opts = (f"-c listen_addresses=127.0.0.1 -c port={self.port} -c unix_socket_directories={self.sock} "
                "-c fsync=off -c full_page_writes=off -c synchronous_commit=off -c max_connections=20 "
                "-c shared_buffers=32MB")
        r = self._run([str(self.bindir / "pg_ctl"), "-D", str(self.data), "-l", str(self.log), "-o", opts,
                       "-w", "-t", "60", "start"])
        if r.returncode != 0:
            log = self.log.read_text() if self.log.exists() else ""
            raise RuntimeError(f"pg_ctl start failed:\n{r.stdout}\n{r.stderr}\n{log}")
        # pg_ctl -w has waited for the server; pg_isready confirms the TCP listener it will be used on
        r = self._run([str(self.bindir / "pg_isready"), "-h", "127.0.0.1", "-p", str(self.port), "-t", "30"])
        if r.returncode != 0:
            raise RuntimeError(f"PostgreSQL does not accept connections on 127.0.0.1:{self.port}: {r.stdout}")

    @property
    def url(self) -> str:
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/postgres"

    def stop(self) -> None:
        try:
            self._run([str(self.bindir / "pg_ctl"), "-D", str(self.data), "-m", "fast", "-w", "stop"], timeout=60)
        finally:
            shutil.rmtree(self.tmp, ignore_errors=True)


def start_cluster() -> PgCluster:
    """Start a throwaway cluster; RuntimeError (naming ``make test``) if the binaries are missing."""
    bindir = find_bindir()
    if bindir is None:
        raise RuntimeError(_INSTALL_HINT)
    cluster = PgCluster(bindir)
    try:
        cluster.start()
    except Exception as exc:  # noqa: BLE001 - any start failure: clean up, report with the server log
        cluster.stop()
        raise RuntimeError(f"could not start the test PostgreSQL server: {exc}") from exc
    return cluster


@pytest.fixture(scope="session")
def pg_url():
    """SQLAlchemy URL of a throwaway PostgreSQL server, running for the whole test session."""
    try:
        cluster = start_cluster()
    except RuntimeError as exc:
        pytest.fail(str(exc), pytrace=False)
    try:
        yield cluster.url
    finally:
        cluster.stop()
