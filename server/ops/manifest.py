"""The manifest of a backup folder: what was copied, from which schema, and how to tell it is whole.

A backup is worth only the proof that it is the one that was written. The manifest names the dump
file with its size and SHA-256, and counts every table's rows as the dump holds them (counted in
the same snapshot), so a restore refuses a damaged or swapped dump before it touches the target and
shows afterwards that every row came back. It is written last: a folder without one is a backup
that did not finish.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from server.ops.errors import BackupRefused

MANIFEST = "manifest.json"
FORMAT = 1
"""The manifest's own layout; a restore refuses a layout it does not know."""

_CHUNK = 1 << 20


@dataclass(frozen=True)
class Manifest:
    backend: str  # "sqlite" or "postgresql": a dump restores only into its own kind
    schema_revision: str  # the Alembic revision of the copied database (alembic_version)
    claybench_version: str
    created_at: str  # ISO 8601, UTC
    tool: str  # what made the dump, e.g. "SQLite 3.40.1 online backup", "pg_dump (PostgreSQL) 15.18"
    dump_file: str  # its name inside the folder
    dump_bytes: int
    dump_sha256: str
    tables: dict[str, int]  # every table's rows, as the dump holds them
    # PostgreSQL: each relation's grants to roles but its owner, "grantee:PRIVILEGE" (server/ops/pg_grants.py)
    grants: dict[str, list[str]] = field(default_factory=dict)
    format: int = FORMAT

    @property
    def rows(self) -> int:
        return sum(self.tables.values())

    def write(self, folder: Path) -> Path:
        path = folder / MANIFEST
        path.write_text(json.dumps(asdict(self), indent=2, sort_keys=True) + "\n", encoding="utf-8")
        return path


def sha256_of(path: Path) -> str:
    """The file's SHA-256, read in chunks: a dump may be far larger than memory allows."""
    digest = hashlib.sha256()
    with path.open("rb") as f:
        while chunk := f.read(_CHUNK):
            digest.update(chunk)
    return digest.hexdigest()


def read_manifest(folder: Path) -> Manifest:
    """The folder's manifest, refused with the reason when it is missing, unreadable or foreign."""
    path = folder / MANIFEST
    try:
        raw: Any = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError as exc:
        raise BackupRefused(f"{folder} has no {MANIFEST}: it is not a finished Claybench backup") from exc
    except (OSError, ValueError) as exc:
        raise BackupRefused(f"{path} cannot be read as a manifest: {exc}") from exc
    if not isinstance(raw, dict) or raw.get("format") != FORMAT:
        raise BackupRefused(f"{path} is not a Claybench backup manifest of format {FORMAT}")
    try:
        manifest = Manifest(**raw)
    except TypeError as exc:
        raise BackupRefused(f"{path} does not have the fields of a Claybench manifest: {exc}") from exc
    counts = manifest.tables
    if not isinstance(counts, dict) or not all(isinstance(n, int) for n in counts.values()):
        raise BackupRefused(f"{path}: 'tables' must map each table to its row count")
    return manifest


def check_dump(folder: Path, manifest: Manifest) -> Path:
    """The dump file, once its size and SHA-256 are the manifest's; refused when damaged or swapped."""
    path = folder / Path(manifest.dump_file).name
    if not path.is_file():
        raise BackupRefused(f"{path} is missing: the backup folder is incomplete")
    size = path.stat().st_size
    if size != manifest.dump_bytes:
        raise BackupRefused(
            f"{path} has {size} bytes but the manifest says {manifest.dump_bytes}: "
            "damaged or not this backup's dump"
        )
    found = sha256_of(path)
    if found != manifest.dump_sha256:
        raise BackupRefused(
            f"{path} has SHA-256 {found} but the manifest says {manifest.dump_sha256}: "
            "damaged or not this backup's dump"
        )
    return path
