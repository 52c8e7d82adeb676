"""Configurations for the solver: parsing (via finefit.notation) and the implicit closed core."""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from finefit.errors import FinefitError
from finefit.notation.configuration import Configuration, Subshell, parse_configuration

#: Usual aufbau (Madelung) order used to complete an implicit closed core.
AUFBAU_ORDER: tuple[str, ...] = (
    "1s", "2s", "2p", "3s", "3p", "4s", "3d", "4p", "5s", "4d", "5p", "6s",
    "4f", "5d", "6p", "7s", "5f", "6d", "7p", "8s",
)  # fmt: skip

_LETTERS = "spdfghi"


@dataclass(frozen=True)
class Shell:
    """One subshell as the solver sees it: n, l, occupation w (1 .. 4l+2)."""

    n: int
    l: int
    w: int

    @property
    def name(self) -> str:
        return f"{self.n}{_LETTERS[self.l]}"

    @property
    def closed(self) -> bool:
        return self.w == 4 * self.l + 2


@dataclass(frozen=True)
class FullConfiguration:
    """A configuration with its closed core made explicit.

    ``shells`` are sorted by (n, l); ``written`` is the user's configuration with the
    subshells in the order written (used for parameter names).
    """

    written: Configuration
    shells: tuple[Shell, ...]

    @property
    def n_electrons(self) -> int:
        return sum(s.w for s in self.shells)

    def key(self) -> tuple[tuple[int, int, int], ...]:
        """Occupations as a hashable key: equal keys mean the same physical configuration."""
        return tuple((s.n, s.l, s.w) for s in self.shells)

    @property
    def label(self) -> str:
        """Written configuration in normal form (``3d6.4s`` -> ``3d6 4s``)."""
        return str(self.written)

    def __str__(self) -> str:
        return " ".join(s.name + (str(s.w) if s.w != 1 else "") for s in self.shells)


def _is_whole(value: object) -> bool:
    return (
        isinstance(value, numbers.Real)
        and not isinstance(value, bool)
        and math.isfinite(value)
        and int(value) == value
    )


def check_z(Z: object, charge: object) -> tuple[int, int]:
    """Validate nuclear charge and ionic charge (whole numbers, numpy ints accepted)."""
    if not _is_whole(Z) or not 1 <= Z <= 120:  # type: ignore[operator]
        raise FinefitError(f"nuclear charge Z={Z!r} must be an integer from 1 to 120", "Z")
    if not _is_whole(charge):
        raise FinefitError(f"ionic charge {charge!r} must be an integer", "charge")
    Z, charge = int(Z), int(charge)  # type: ignore[call-overload]
    if charge >= Z:
        raise FinefitError(f"ionic charge {charge} leaves no electrons for Z={Z}", "charge")
    return Z, charge


def complete_configuration(
    configuration: str | Configuration, Z: int, charge: int = 0
) -> FullConfiguration:
    """Add the implicit closed core: closed subshells not written, taken in aufbau order,
    until the electron count is Z - charge.  Raise :class:`FinefitError` when that is
    impossible (too many electrons written, or a core that cannot be made of closed shells).
    """
    written = parse_configuration(configuration)
    text = str(configuration)
    target = Z - charge
    have = written.n_electrons
    if have > target:
        raise FinefitError(
            f"configuration {text!r} has {have} electrons, more than the {target} of "
            f"Z={Z} with charge {charge}",
            text,
        )
    listed = {s.name for s in written.subshells}
    core: list[Subshell] = []
    missing = target - have
    for name in AUFBAU_ORDER:
        if missing == 0:
            break
        if name in listed:
            continue
        l = _LETTERS.index(name[-1])
        cap = 4 * l + 2
        if cap > missing:
            raise FinefitError(
                f"cannot complete configuration {text!r} with closed shells: {missing} "
                f"electrons are missing for Z={Z}, charge {charge}, and the next closed "
                f"subshell {name} holds {cap}; write the open subshells explicitly",
                text,
            )
        core.append(Subshell(int(name[:-1]), l, cap))
        missing -= cap
    if missing:
        raise FinefitError(f"cannot complete configuration {text!r} for Z={Z}", text)
    shells = sorted(
        (Shell(s.n, s.l, s.occupancy) for s in (*core, *written.subshells)),
        key=lambda s: (s.n, s.l),
    )
    return FullConfiguration(written, tuple(shells))
