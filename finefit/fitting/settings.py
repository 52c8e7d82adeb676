"""What the user says about each parameter and each observed level (plain data, no I/O)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from finefit.errors import FinefitError, quote


@dataclass
class ParameterSetting:
    """One radial parameter: value, fixed or varied, bounds, link group, ab initio value.

    Parameters in one ``link`` group vary together with the ratios they have when
    the fit starts (the usual practice for, e.g., all F^k of a configuration).
    """

    value: float = 0.0
    vary: bool = False
    min: float | None = None
    max: float | None = None
    link: str | None = None
    ab_initio: float | None = None

    def copy(self) -> ParameterSetting:
        return replace(self)

    def check(self, name: str) -> None:
        if not math.isfinite(self.value):
            raise FinefitError(f"parameter {quote(name)}: value must be a finite number", name)
        if self.min is not None and self.max is not None and self.min >= self.max:
            raise FinefitError(f"parameter {quote(name)}: min must be below max", name)
        if self.min is not None and self.value < self.min:
            raise FinefitError(f"parameter {quote(name)}: value {self.value} is below min", name)
        if self.max is not None and self.value > self.max:
            raise FinefitError(f"parameter {quote(name)}: value {self.value} is above max", name)


@dataclass
class ObservedLevel:
    """One observed level. ``state`` optionally pins it to a computed eigenstate:
    an integer (1-based energy rank among the computed states of its J and parity at
    the start of the fit) or an LS label of the eigenstate's leading component."""

    id: str
    energy: float
    J: float
    parity: str
    uncertainty: float | None = None
    configuration: str | None = None
    label: str | None = None
    include: bool = True
    g: float | None = None
    note: str = ""
    state: int | str | None = None

    def copy(self) -> ObservedLevel:
        return replace(self)


@dataclass
class FitOptions:
    """How the fit runs and how its statistics are reported."""

    weighting: str = "none"  # "none": every level counts alike; "uncertainty": weights 1/u^2
    default_uncertainty: float = 1.0  # cm^-1, for levels without one when weighting by them
    max_iterations: int = 200
    tolerance: float = 1e-10
    scale_covariance: bool = True  # scale the covariance by the reduced chi-square
    correlation_threshold: float = 0.9
    assignment: str = "energy-order"  # unlabelled levels: "energy-order" or "nearest"
    follow_eigenvectors: bool = True
    extra: dict = field(default_factory=dict)

    def check(self) -> None:
        if self.weighting not in ("none", "uncertainty"):
            raise FinefitError(
                f"fit option weighting = {quote(self.weighting)}: use 'none' or 'uncertainty'",
                "weighting",
            )
        if self.assignment not in ("energy-order", "nearest"):
            raise FinefitError(
                f"fit option assignment = {quote(self.assignment)}: use 'energy-order' or "
                "'nearest'",
                "assignment",
            )
        if self.max_iterations < 1:
            raise FinefitError("fit option max_iterations must be at least 1", "max_iterations")
        if not self.default_uncertainty > 0:
            raise FinefitError("fit option default_uncertainty must be positive",
                               "default_uncertainty")
        if not 0 < self.correlation_threshold <= 1:
            raise FinefitError("fit option correlation_threshold must be in (0, 1]",
                               "correlation_threshold")
