"""Password hashes: argon2id in the PHC string format, verification, the length rule."""

from __future__ import annotations

import pytest

from server.auth.passwords import MIN_LENGTH, hash_password, password_problem, verify_password

PASSWORD = "correct-horse-battery"


@pytest.fixture(scope="module")
def stored() -> str:
    """One hash for the module: each costs about half a second (argon2 is slow on purpose)."""
    return hash_password(PASSWORD)


def test_a_hash_is_argon2id_in_the_phc_string_format(stored: str) -> None:
    # RFC 9106 recommends the argon2id variant; "$argon2id$v=19$m=...,t=...,p=...$salt$hash" is the
    # PHC string format the argon2 reference implementation writes (v=19 is version 0x13).
    assert stored.startswith("$argon2id$v=19$m=")
    assert PASSWORD not in stored
    assert len(stored.split("$")) == 6


def test_the_same_password_hashes_differently_each_time(stored: str) -> None:
    # A random salt per hash (RFC 9106 section 3.1): equal passwords do not give equal hashes.
    again = hash_password(PASSWORD)
    assert again != stored
    assert verify_password(PASSWORD, again)


def test_the_right_password_verifies(stored: str) -> None:
    assert verify_password(PASSWORD, stored) is True


@pytest.mark.parametrize("attempt", [PASSWORD + " ", PASSWORD.capitalize(), "", "wrong-password-1"])
def test_any_other_password_does_not_verify(stored: str, attempt: str) -> None:
    assert verify_password(attempt, stored) is False


def test_a_user_with_no_hash_never_verifies() -> None:
    # An unknown username is checked against a dummy hash, so it is refused like a wrong password.
    assert verify_password(PASSWORD, None) is False


@pytest.mark.parametrize("password", ["", "short", "x" * (MIN_LENGTH - 1)])
def test_a_password_shorter_than_the_minimum_is_refused_with_a_reason(password: str) -> None:
    problem = password_problem(password)
    assert problem == f"password must be at least {MIN_LENGTH} characters"


@pytest.mark.parametrize("password", ["x" * MIN_LENGTH, PASSWORD, "a much longer pass phrase with spaces"])
def test_a_password_of_the_minimum_length_or_longer_is_accepted(password: str) -> None:
    assert password_problem(password) is None


def test_the_minimum_length_is_at_least_ten_characters() -> None:
    # NIST SP 800-63B section 5.1.1.1 asks for at least 8; the laboratory asks for 10 (common practice).
    assert MIN_LENGTH >= 10
