"""Messages between the workspace app and its views."""

from __future__ import annotations

from textual.message import Message

from finefit.fitting.results import FitResult


class FitFinished(Message):
    """A fit result for the current session landed: every view redraws (the visible one
    at once, the others when they are shown)."""

    def __init__(self, result: FitResult | None) -> None:
        super().__init__()
        self.result = result
