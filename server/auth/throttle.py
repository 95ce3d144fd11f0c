"""Throttling of guesses: wrong passwords, unknown share links, unknown API tokens.

Only failures are counted, with the ``limits`` library's moving windows. A throttle has tiers
of growing windows (for sign-in by default 5 failures a minute, 10 in 15 minutes, 20 an hour):
past the first, the key waits until its failures age out of that window; past the next, longer,
so the delays grow with persistence and end in a temporary lock of up to the longest window.
A correct answer does not reset the count: someone who knows the password waits like anyone.

Counts are kept in the storage ``Settings.throttle_storage`` names (``limits``' URI notation):
``memory://`` counts within one process; several app servers share one count with a storage
they all reach (``redis://...``), see the ``limits`` documentation.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass

from limits import RateLimitItem, parse_many
from limits.storage import MemoryStorage, MovingWindowSupport, Storage, storage_from_string
from limits.strategies import MovingWindowRateLimiter
from starlette.requests import Request

from server.config import Settings


class Throttle:
    """Failures per key over tiers of moving windows; ``wait`` says how long a key must wait."""

    def __init__(
        self, name: str, tiers: str, storage: Storage | None = None, clock: Callable[[], float] = time.time
    ):
        self.name = name
        self.tiers: list[RateLimitItem] = parse_many(tiers)
        self.limiter = MovingWindowRateLimiter(storage or MemoryStorage())
        self.clock = clock

    def wait(self, *keys: str) -> int:
        """Seconds before any of these keys may try again (0: it may try now)."""
        longest = 0.0
        for key in keys:
            for tier in self.tiers:
                if not self.limiter.test(tier, self.name, key):
                    reset = self.limiter.get_window_stats(tier, self.name, key).reset_time
                    longest = max(longest, reset - self.clock())
        return max(1, math.ceil(longest)) if longest > 0 else 0

    def fail(self, *keys: str) -> None:
        """Count one failure against each key in every tier."""
        for key in keys:
            for tier in self.tiers:
                self.limiter.hit(tier, self.name, key)


def storage_for(uri: str) -> Storage:
    """The ``limits`` storage a URI names; it must support moving windows."""
    storage = storage_from_string(uri)
    if not isinstance(storage, Storage) or not isinstance(storage, MovingWindowSupport):
        raise ValueError(f"the throttle storage {uri!r} does not support moving windows")
    return storage


@dataclass(frozen=True)
class Throttles:
    """The app's throttles, built once from its settings and kept on ``app.state``."""

    signin_account: Throttle
    signin_address: Throttle
    token_address: Throttle

    @classmethod
    def from_settings(cls, settings: Settings, clock: Callable[[], float] = time.time) -> Throttles:
        """``clock`` must be the one the storage counts by (tests move both together)."""
        storage = storage_for(settings.throttle_storage)
        return cls(
            Throttle("signin-account", settings.signin_throttle_account, storage, clock),
            Throttle("signin-address", settings.signin_throttle_address, storage, clock),
            Throttle("token-address", settings.token_throttle_address, storage, clock),
        )


def throttles(request: Request) -> Throttles:
    """The throttles of the app serving this request."""
    found: Throttles | None = getattr(request.app.state, "throttles", None)
    if found is None:
        found = Throttles.from_settings(request.app.state.settings)
        request.app.state.throttles = found
    return found


def client_address(request: Request) -> str:
    """The address the request came from, as the server saw it (behind a proxy, uvicorn's
    ``--proxy-headers`` and ``--forwarded-allow-ips`` make it the client's)."""
    return request.client.host if request.client else ""
