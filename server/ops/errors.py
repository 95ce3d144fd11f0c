"""What backup and restore can refuse, or find wrong after the fact, in words for the operator."""

from __future__ import annotations


class BackupRefused(Exception):
    """Nothing was written to the target: the message says what is wrong and what to do instead."""


class RestoreMismatch(Exception):
    """The restore ran, but the restored database does not hold the rows the manifest counted:
    it is not the backup and must not be put to use."""
