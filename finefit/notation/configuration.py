"""Electron configurations written the trade's way: ``3d6 4s``, ``3d6.4s``, ``2p5 3p``.

A configuration is a sequence of subshells ``nl^N`` (occupancy 1 implicit);
closed inner shells are implicit. Parity is (-1)^(sum of l over electrons).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from finefit.errors import FinefitError

ORBITAL_LETTERS = "spdfghi"

_TOKEN = re.compile(r"^(\d+)([a-zA-Z])(\d*)$")


@dataclass(frozen=True, order=True)
class Subshell:
    """One subshell n l with N electrons (capacity 4l+2)."""

    n: int
    l: int
    occupancy: int

    @property
    def name(self) -> str:
        """Orbital name without occupancy, e.g. ``3d``."""
        return f"{self.n}{ORBITAL_LETTERS[self.l]}"

    @property
    def capacity(self) -> int:
        return 4 * self.l + 2

    @property
    def is_closed(self) -> bool:
        return self.occupancy == self.capacity

    @property
    def is_open(self) -> bool:
        return 0 < self.occupancy < self.capacity

    def __str__(self) -> str:
        return self.name + (str(self.occupancy) if self.occupancy != 1 else "")


@dataclass(frozen=True)
class Configuration:
    """An electron configuration: subshells in the order the user wrote them."""

    subshells: tuple[Subshell, ...]

    @property
    def parity(self) -> str:
        """``"even"`` or ``"odd"``: (-1)^(sum of l over electrons)."""
        total = sum(s.l * s.occupancy for s in self.subshells)
        return "odd" if total % 2 else "even"

    @property
    def n_electrons(self) -> int:
        return sum(s.occupancy for s in self.subshells)

    def occupancy(self, orbital: str) -> int:
        """Electrons in orbital ``orbital`` (e.g. ``"3d"``), 0 when absent."""
        for s in self.subshells:
            if s.name == orbital:
                return s.occupancy
        return 0

    @property
    def open_subshells(self) -> tuple[Subshell, ...]:
        return tuple(s for s in self.subshells if s.is_open)

    def __str__(self) -> str:
        return " ".join(str(s) for s in self.subshells)


def parse_subshell(token: str) -> Subshell:
    """Parse one token such as ``3d6`` or ``4s`` into a :class:`Subshell`."""
    m = _TOKEN.match(token)
    if not m:
        raise FinefitError(
            f"cannot read subshell {token!r}: expected n, an orbital letter and an "
            f"optional occupancy, e.g. '3d6' or '4s'",
            token,
        )
    n = int(m.group(1))
    letter = m.group(2).lower()
    if letter not in ORBITAL_LETTERS:
        raise FinefitError(
            f"unknown orbital letter {m.group(2)!r} in {token!r}: use one of "
            f"{', '.join(ORBITAL_LETTERS)}",
            token,
        )
    l = ORBITAL_LETTERS.index(letter)
    if n < 1 or l >= n:
        raise FinefitError(f"subshell {token!r} is impossible: l must be smaller than n", token)
    occupancy = int(m.group(3)) if m.group(3) else 1
    if occupancy < 1:
        raise FinefitError(f"subshell {token!r} has no electrons", token)
    if occupancy > 4 * l + 2:
        raise FinefitError(
            f"subshell {token!r} is over-full: {letter} holds at most {4 * l + 2} electrons",
            token,
        )
    return Subshell(n, l, occupancy)


def parse_configuration(text: str | Configuration) -> Configuration:
    """Parse ``3d6 4s`` / ``3d6.4s`` / ``2p5 3p``; a subshell may appear once."""
    if isinstance(text, Configuration):
        return text
    if not isinstance(text, str) or not text.strip():
        raise FinefitError(f"configuration {text!r} is empty or not text", str(text))
    tokens = [t for t in re.split(r"[\s.]+", text.strip()) if t]
    subshells = [parse_subshell(t) for t in tokens]
    seen: set[str] = set()
    for s, tok in zip(subshells, tokens, strict=True):
        if s.name in seen:
            raise FinefitError(f"subshell {s.name} appears twice in configuration {text!r}", tok)
        seen.add(s.name)
    return Configuration(tuple(subshells))
