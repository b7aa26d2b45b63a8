"""A throwaway PostgreSQL server on loopback, for the server half of the store tests.

Used by ``tests/conftest.py`` (session fixture) and by
``tests/benchmarks/bench_snapshot_pg.py``. :func:`start` runs ``initdb`` and
``pg_ctl`` in a fresh temporary directory on a free loopback port; when the
process runs as root (as CI does) they run as the ``postgres`` user, because the
server refuses to run as root. Authentication (``pg_hba.conf``): the
superuser ``postgres`` is trusted on loopback, every other role must give its
password (scram-sha-256), so tests can use password-protected and read-only
roles. :meth:`Server.stop` stops the server and removes the directory.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import tempfile
from dataclasses import dataclass

BIN_DIRS = ("/usr/lib/postgresql/15/bin", "/usr/local/bin", "/usr/lib/postgresql/16/bin", "/usr/lib/postgresql/14/bin")
SUPERUSER = "postgres"


def find_bin(name: str) -> str | None:
    """The path of a PostgreSQL server program, or None when not installed."""
    for d in BIN_DIRS:
        p = os.path.join(d, name)
        if os.path.isfile(p) and os.access(p, os.X_OK):
            return p
    return shutil.which(name)


def available() -> str | None:
    """None when a throwaway server can be started here, else why not."""
    missing = [b for b in ("initdb", "pg_ctl") if find_bin(b) is None]
    if missing:
        return f"PostgreSQL server binaries not found ({', '.join(missing)})"
    if os.geteuid() == 0:
        import pwd

        try:
            pwd.getpwnam("postgres")
        except KeyError:
            return "running as root and there is no 'postgres' user to run the server as"
        if shutil.which("runuser") is None and shutil.which("su") is None:
            return "running as root and neither runuser nor su is available"
    return None


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _as_server_user(cmd: list[str]) -> list[str]:
    if os.geteuid() != 0:
        return cmd
    if shutil.which("runuser"):
        return ["runuser", "-u", "postgres", "--", *cmd]
    import shlex

    return ["su", "postgres", "-s", "/bin/sh", "-c", " ".join(shlex.quote(c) for c in cmd)]


def _run(cmd: list[str]) -> None:
    res = subprocess.run(_as_server_user(cmd), capture_output=True, text=True, timeout=120)
    if res.returncode != 0:
        raise RuntimeError(f"{os.path.basename(cmd[0])} failed ({res.returncode}): {res.stderr.strip() or res.stdout.strip()}")


@dataclass
class Server:
    folder: str
    port: int
    started: bool = False

    @property
    def data(self) -> str:
        return os.path.join(self.folder, "data")

    def url(self, database: str = "postgres", user: str = SUPERUSER) -> str:
        return f"postgresql+psycopg://{user}@127.0.0.1:{self.port}/{database}"

    def stop(self) -> None:
        if self.started:
            try:
                _run([find_bin("pg_ctl"), "-D", self.data, "-m", "immediate", "-w", "stop"])
            except Exception:  # already gone; still remove the folder
                pass
            self.started = False
        shutil.rmtree(self.folder, ignore_errors=True)


HBA = """# throwaway test server: superuser trusted on loopback, every other role needs its password
local all all trust
host all postgres 127.0.0.1/32 trust
host all postgres ::1/128 trust
host all all 127.0.0.1/32 scram-sha-256
host all all ::1/128 scram-sha-256
"""


def start(port: int | None = None) -> Server:
    """Create and start a server in a new temporary folder; :meth:`Server.stop` removes it."""
    why = available()
    if why:
        raise RuntimeError(why)
    folder = tempfile.mkdtemp(prefix="matcher-pg-")
    server = Server(folder=folder, port=port or free_port())
    try:
        if os.geteuid() == 0:
            import pwd

            pw = pwd.getpwnam("postgres")
            os.chown(folder, pw.pw_uid, pw.pw_gid)
        os.chmod(folder, 0o700)
        _run([find_bin("initdb"), "-D", server.data, "-U", SUPERUSER, "-A", "trust", "-E", "UTF8",
              "--locale=C", "--no-sync"])
        with open(os.path.join(server.data, "pg_hba.conf"), "w") as fh:
            fh.write(HBA)
        if os.geteuid() == 0:
            os.chown(os.path.join(server.data, "pg_hba.conf"), pw.pw_uid, pw.pw_gid)
        opts = (f"-c listen_addresses=127.0.0.1 -c port={server.port} -c unix_socket_directories={folder} "
                "-c fsync=off -c synchronous_commit=off -c full_page_writes=off -c max_connections=60")
        _run([find_bin("pg_ctl"), "-D", server.data, "-o", opts, "-l", os.path.join(folder, "server.log"),
              "-w", "-t", "60", "start"])
        server.started = True
    except BaseException:
        server.stop()
        raise
    return server


__all__ = ["Server", "start", "available", "find_bin", "free_port", "SUPERUSER"]
