"""The floor a bench save is measured against: the least an HTTP write of one field can cost.

A bare FastAPI app on the same database with the app's own engine settings (``Database``: the
same pool, pragmas, write transactions and, on SQLite, the same writer queue). Each request
reads the user it names and inserts one row holding the request's JSON, in one transaction:
what any save must do, without the bench's field guard, version, engine or audit. Served by
``bench_http.py`` through uvicorn exactly as the app is:

    DATABASE_URL=... python -m uvicorn tests.benchmarks.floor_app:create_floor --factory

Not collected by pytest.
"""

from __future__ import annotations

import os
from typing import Annotated, Any

from fastapi import Body, FastAPI, HTTPException
from fastapi.responses import JSONResponse
from sqlalchemy import JSON, Column, DateTime, Integer, MetaData, Table, insert, select

from server.db.session import Database
from server.db.tables import User, utcnow

FLOOR = Table(
    "bench_floor",
    MetaData(),
    Column("id", Integer, primary_key=True),
    Column("user_id", Integer, nullable=False),  # read from user just before: no constraint needed
    Column("body", JSON, nullable=False),
    Column("at", DateTime(timezone=True), nullable=False),
)


def create_floor() -> FastAPI:
    """The floor app on ``DATABASE_URL`` (its table made if missing)."""
    db = Database(os.environ["DATABASE_URL"])
    FLOOR.create(db.engine, checkfirst=True)
    app = FastAPI()

    @app.get("/healthz")
    def healthz() -> dict[str, str]:
        return {"status": "ok"}

    @app.post("/floor/{user_id}")
    def save(user_id: int, body: Annotated[dict[str, Any], Body()]) -> JSONResponse:
        """A plain ``def``, as the bench's save route: run in the thread pool, like it."""
        return JSONResponse(_insert(db, user_id, body))

    return app


def _insert(db: Database, user_id: int, body: Any) -> dict[str, Any]:
    with db.transaction() as s:
        user = s.exec(select(User).where(User.id == user_id)).first()  # type: ignore[call-overload]
        if user is None:
            raise HTTPException(404, "no such user")
        row = s.execute(insert(FLOOR).values(user_id=user_id, body=body, at=utcnow()).returning(FLOOR.c.id))
        return {"id": row.scalar_one(), "values": body}
