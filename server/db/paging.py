"""Pages of a list that can grow: how many there are, which one is shown, and its neighbours.
One rule for every paged list (jobs, a job's samples, the review desk, turnaround sections)."""

from __future__ import annotations

import math


def page_of(total: int, wanted: int, per_page: int) -> tuple[int, int]:
    """The page shown and the number of pages: at least one page (an empty list is "page 1 of
    1"), and a wanted page outside 1..pages clamped to the nearest end."""
    pages = max(1, math.ceil(total / max(1, per_page)))
    return min(max(1, wanted), pages), pages


class Neighbours:
    """The pages before and after this one, for a pager's links (a mixin for a result that has
    ``page`` and ``pages``)."""

    page: int
    pages: int

    @property
    def previous_page(self) -> int | None:
        return self.page - 1 if self.page > 1 else None

    @property
    def next_page(self) -> int | None:
        return self.page + 1 if self.page < self.pages else None
