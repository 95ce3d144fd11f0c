"""PostgreSQL's own dump and restore programs (``pg_dump``, ``pg_restore``), run for Claybench.

They come with the system's PostgreSQL client package. pg_dump refuses a server newer than itself,
and an older pg_restore cannot read a newer dump, so the newest one installed is used: Debian keeps
each major version in /usr/lib/postgresql/N/bin beside whatever PATH offers.

The connection goes to the programs through libpq's environment (PGHOST, PGPORT, PGUSER,
PGPASSWORD, PGDATABASE, PGSSLMODE), never their command line, where any user of the machine could
read the password in the process list. ``-w`` makes them fail rather than wait for a password
prompt nobody will answer.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from glob import glob
from pathlib import Path

from sqlalchemy.engine import make_url

from server.ops.errors import BackupRefused

_VERSION = re.compile(r"(\d+)(?:\.(\d+))?")


def _version_of(program: str) -> tuple[tuple[int, int], str] | None:
    """(major, minor) and the line ``--version`` prints, or None for a program that does not run."""
    try:
        done = subprocess.run([program, "--version"], capture_output=True, text=True, timeout=30, check=False)
    except OSError:
        return None
    found = _VERSION.search(done.stdout)
    if done.returncode != 0 or found is None:
        return None
    return (int(found.group(1)), int(found.group(2) or 0)), done.stdout.strip()


def newest(name: str) -> tuple[str, str]:
    """The newest ``pg_dump`` or ``pg_restore`` on this machine, and its version line."""
    candidates = sorted(glob(f"/usr/lib/postgresql/*/bin/{name}"))
    on_path = shutil.which(name)
    if on_path:
        candidates.append(on_path)
    versions = [(found, program) for program in candidates if (found := _version_of(program))]
    if not versions:
        raise BackupRefused(
            f"{name} was not found (on PATH or in /usr/lib/postgresql/*/bin): "
            "install the PostgreSQL client package of your system (Debian: postgresql-client)"
        )
    ((_, line), program) = max(versions, key=lambda v: v[0][0])
    return program, line


def libpq_env(database_url: str) -> dict[str, str]:
    """The process environment with the URL's connection parts in libpq's variables."""
    url = make_url(database_url)
    parts = {
        "PGHOST": url.host or url.query.get("host"),
        "PGPORT": url.port,
        "PGUSER": url.username,
        "PGPASSWORD": url.password,
        "PGDATABASE": url.database,
        "PGSSLMODE": url.query.get("sslmode"),
    }
    env = dict(os.environ)
    for key, value in parts.items():  # a part the URL leaves out is not taken from a stray variable
        env.pop(key, None)
        if value:
            env[key] = str(value)
    return env


def _run(name: str, args: list[str], database_url: str) -> str:
    """Run one of the programs; its error text becomes the refusal, the password never appears."""
    program, line = newest(name)
    done = subprocess.run(
        [program, *args], env=libpq_env(database_url), capture_output=True, text=True, check=False
    )
    if done.returncode != 0:
        raise BackupRefused(
            f"{name} failed ({line}): {done.stderr.strip() or f'exit status {done.returncode}'}"
        )
    return line


def dump(database_url: str, snapshot: str, out: Path) -> str:
    """The whole database, every schema (the task queue's too), in custom format, as it was at the
    exported ``snapshot`` of a transaction the caller keeps open. Returns pg_dump's version line."""
    return _run("pg_dump", ["-w", "-Fc", f"--snapshot={snapshot}", f"--file={out}"], database_url)


def restore(database_url: str, archive: Path) -> str:
    """The archive into the (empty) database of the URL in one transaction: on the first error
    everything is rolled back and nothing stays half-restored. Owners and grants come back as
    dumped (the application's role keeps its rights and still cannot change the audit trail), so
    the roles must exist first and the connecting role must be the owner (or a superuser)."""
    dbname = make_url(database_url).database or ""
    return _run(
        "pg_restore",
        ["-w", "--exit-on-error", "--single-transaction", f"--dbname={dbname}", str(archive)],
        database_url,
    )
