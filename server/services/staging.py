"""Schedule files held between the import page's preview and the person's confirmation.

The preview reads the upload and shows what it would store; the confirmation must import the
very bytes that were previewed, by the same person. The file waits here under a random token
(not in the form: a hidden field is capped at 1 MB and a schedule may be 5 MB). Nothing here is
part of the laboratory's record: a staged file is removed once imported, and any left
unconfirmed for a day is removed when the next one is staged.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass
from datetime import timedelta

from sqlmodel import col, delete, select

from server.db.session import Database
from server.db.tables import StagedImport, User, utcnow
from server.services.errors import invalid

KEPT_FOR = timedelta(days=1)


@dataclass(frozen=True)
class Staged:
    token: str
    filename: str
    sha256: str
    content: bytes


def stage(db: Database, user: User, filename: str, content: bytes) -> Staged:
    """Keep an uploaded file for its confirmation; drop the stale ones."""
    token = secrets.token_urlsafe(32)
    digest = hashlib.sha256(content).hexdigest()
    with db.transaction() as s:
        s.exec(delete(StagedImport).where(col(StagedImport.created_at) < utcnow() - KEPT_FOR))
        s.add(
            StagedImport(
                token=token, user_id=user.id or 0, filename=filename[:255], sha256=digest, content=content
            )
        )
    return Staged(token, filename[:255], digest, content)


def staged(db: Database, user: User, token: str) -> Staged:
    """The file this person staged under ``token``; refused when it is gone (imported, expired)."""
    with db.session() as s:
        found = s.exec(
            select(StagedImport).where(StagedImport.token == token[:64], StagedImport.user_id == user.id)
        ).first()
    if found is None or found.created_at < utcnow() - KEPT_FOR:
        raise invalid("file", "the previewed file is no longer here: upload it again")
    return Staged(found.token, found.filename, found.sha256, found.content)


def discard(db: Database, token: str) -> None:
    with db.transaction() as s:
        s.exec(delete(StagedImport).where(col(StagedImport.token) == token))
