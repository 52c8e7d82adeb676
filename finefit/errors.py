"""The one error type users see: it names the offending item."""

from __future__ import annotations


class FinefitError(ValueError):
    """Bad input or an impossible request, with the offending field or token named.

    ``item`` is the token, field or line that caused the problem, so that
    front ends can point at it; ``str(err)`` is a complete sentence.
    """

    def __init__(self, message: str, item: str | None = None) -> None:
        super().__init__(message)
        self.item = item
