"""The one error type users see: it names the offending item."""

from __future__ import annotations

import re

# A message quotes at most this many characters of one token (a 5 MB label must not
# produce 5 MB on stderr); a whole message is kept below MAX_MESSAGE characters.
MAX_TOKEN = 80
MAX_MESSAGE = 2000
_LONG_RUN = re.compile(rf"\S{{{MAX_TOKEN + 40},}}")  # quoted tokens stay below


def shorten(text: str, limit: int = MAX_TOKEN) -> str:
    """``text`` cut to about ``limit`` characters, saying how long it was."""
    text = str(text)
    if len(text) <= limit:
        return text
    head = max(limit - 20, 10)
    return f"{text[:head]}…[{len(text)} characters]"


def quote(token: object, limit: int = MAX_TOKEN) -> str:
    """``repr`` of a token for a message, at most about ``limit`` characters of it."""
    if isinstance(token, str):
        if len(token) <= limit:
            return repr(token)
        return repr(token[: max(limit - 20, 10)])[:-1] + f"…' ({len(token)} characters)"
    return shorten(repr(token), limit)


def quote_path(path: object, limit: int = MAX_TOKEN) -> str:
    """A file path for a message: long paths keep their end (the file's own name)."""
    text = str(path)
    if len(text) <= limit:
        return repr(text)
    return repr("…" + text[-(limit - 1):])


def clip_message(message: str) -> str:
    """Safety net for messages built elsewhere: long runs and long messages are cut."""
    message = _LONG_RUN.sub(lambda m: shorten(m.group(0), MAX_TOKEN + 20), message)
    if len(message) > MAX_MESSAGE:
        message = message[: MAX_MESSAGE - 40] + f" …[message cut, {len(message)} characters]"
    return message


class FinefitError(ValueError):
    """Bad input or an impossible request, with the offending field or token named.

    ``item`` is the token, field or line that caused the problem, so that
    front ends can point at it; ``str(err)`` is a complete sentence. Long tokens are
    cut (see :func:`quote`), so a message stays readable whatever the input was.
    """

    def __init__(self, message: str, item: str | None = None) -> None:
        super().__init__(clip_message(str(message)))
        self.item = None if item is None else shorten(str(item), 200)
