"""Argon2 password hashes (pwdlib's recommended parameters).

A verification costs ~120 ms and 64 MiB; a semaphore caps how many run at once so a burst of
sign-ins cannot exhaust memory (STACK-NOTES "Sessions, CSRF, passwords").
"""

from __future__ import annotations

import threading

from pwdlib import PasswordHash

_hasher = PasswordHash.recommended()
_slots = threading.BoundedSemaphore(4)

# A real hash of a random password, verified against when the user does not exist, so that
# an unknown username takes as long to refuse as a wrong password.
_DUMMY_HASH = _hasher.hash("claybench-no-such-user")

MIN_LENGTH = 10


def hash_password(password: str) -> str:
    with _slots:
        return _hasher.hash(password)


def verify_password(password: str, password_hash: str | None) -> bool:
    with _slots:
        if password_hash is None:
            _hasher.verify(password, _DUMMY_HASH)
            return False
        return _hasher.verify(password, password_hash)


def password_problem(password: str) -> str | None:
    """Why a new password is refused, or None when it is acceptable."""
    if len(password) < MIN_LENGTH:
        return f"password must be at least {MIN_LENGTH} characters"
    return None
