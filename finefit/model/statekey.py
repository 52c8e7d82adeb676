"""The key of one computed eigenstate: parity, J block (2J) and energy rank in that block.

One type shared by the session API and the workspace, so that an observed level's
attached state, a computed level and a predicted line's end are compared the same way.
"""

from __future__ import annotations

from typing import NamedTuple


class StateKey(NamedTuple):
    """A computed state: ``parity``, ``block`` = 2J, ``position`` = 0-based energy rank
    within the J block of that parity."""

    parity: str
    block: int
    position: int

    @classmethod
    def of(cls, state) -> StateKey:
        """The key of a computed level (``block``, ``position``) or of an attached level
        row or prediction (``J``, 1-based ``state_rank``)."""
        if hasattr(state, "block"):
            return cls(state.parity, int(state.block), int(state.position))
        return cls(state.parity, round(2 * state.J), int(state.state_rank) - 1)

    @property
    def rank(self) -> int:
        """The 1-based energy rank within the J block (what a level's ``state`` pin holds)."""
        return self.position + 1
