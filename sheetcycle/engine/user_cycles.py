"""Cycles that users define as a table of steps.

Each step is a process (a parsed reaction: ``Na(s) -> Na(g)``, ``Na(g) -> Na+(g) + e-``,
``NaCl(s) -> Na+(aq) + Cl-(aq)`` ...) with its enthalpy (kJ/mol, NaN when unknown) and a
multiplier m (how many times the step is taken; −1 runs it backwards).

The steps form a closed loop when the species balance over the loop is zero,

    Σ_k m_k · (products_k − reactants_k) = 0   for every species (electrons included),

computed in exact arithmetic from the steps' exact coefficients. Then Hess's law says the
enthalpies sum to zero around the loop, Σ m_k ΔH_k = 0:

* every ΔH given: the sum is the residual (a closure check), with its σ;
* exactly one ΔH missing: it is ΔH_j = −Σ_{k≠j} m_k ΔH_k / m_j;
* more than one missing: nothing can be solved; the caller reports which.

A loop that does not close gets no solution and no residual; ``leftover`` says which
species remain (for a flag naming them). Uncertainties: distinct steps are independent,
|m_k|·σ_k added in quadrature (a step taken twice is one value used twice); NaN σ is left out
and marked.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from enum import IntEnum
from fractions import Fraction
from types import MappingProxyType

from sheetcycle.chem.reactions import Reaction

__all__ = [
    "ChainCheck",
    "CycleOutcome",
    "CycleStep",
    "LoopStatus",
    "check_chain",
    "solve_one_unknown",
]


@dataclass(frozen=True)
class CycleStep:
    """One step of a user cycle."""

    reaction: Reaction
    enthalpy: float = math.nan  # kJ/mol as written, NaN when unknown
    multiplier: float = 1.0
    sigma: float = math.nan  # kJ/mol, NaN when unknown
    label: str = ""


def _exact(x: float) -> Fraction:
    return Fraction(repr(float(x)))


@dataclass(frozen=True)
class ChainCheck:
    """The species balance of a loop and the enthalpy residual over its known steps.

    ``leftover`` maps each species key that does not cancel to its net amount (products
    positive); empty for a closed loop. ``residual`` is Σ m_k ΔH_k over the steps with a
    value, ``unknown`` the indices of the steps without one.
    """

    leftover: Mapping[str, Fraction] = field(hash=False)
    residual: float
    residual_sigma: float
    sigma_complete: bool
    unknown: tuple[int, ...]

    def __post_init__(self) -> None:
        object.__setattr__(self, "leftover", MappingProxyType(dict(self.leftover)))

    @property
    def closes(self) -> bool:
        return not self.leftover

    def describe_leftover(self) -> str:
        """e.g. "Cl2(g): 1/2 left over as product; e-: 1 consumed" ("" for a closed loop)."""
        parts = []
        for key, n in self.leftover.items():
            amount = str(abs(n)) if abs(n).denominator != 1 else str(abs(n).numerator)
            parts.append(f"{key}: {amount} {'left over as product' if n > 0 else 'consumed'}")
        return "; ".join(parts)


def check_chain(steps: Sequence[CycleStep]) -> ChainCheck:
    """Species balance over the loop and Σ m ΔH over the steps whose ΔH is known."""
    net: dict[str, Fraction] = {}
    for step in steps:
        if not math.isfinite(step.multiplier):
            raise ValueError(f"a step multiplier must be a finite number, got {step.multiplier!r}")
        m = _exact(step.multiplier)
        for key, n in step.reaction.net().items():
            net[key] = net.get(key, Fraction(0)) + m * n
    leftover = {k: v for k, v in net.items() if v != 0}
    residual = 0.0
    var = 0.0
    complete = True
    unknown: list[int] = []
    for i, step in enumerate(steps):
        if math.isnan(step.enthalpy):
            unknown.append(i)
            continue
        residual += step.multiplier * step.enthalpy
        if math.isnan(step.sigma):
            complete = False
        else:
            var += (step.multiplier * step.sigma) ** 2
    return ChainCheck(leftover, residual, math.sqrt(var), complete, tuple(unknown))


class LoopStatus(IntEnum):
    SOLVED = 1  # exactly one step enthalpy was missing and has been derived
    CLOSED = 2  # every step enthalpy was given: residual computed
    UNDERDETERMINED = 3  # two or more step enthalpies missing
    OPEN = 4  # the species do not cancel around the loop
    ZERO_MULTIPLIER = 5  # the one unknown step has multiplier 0 and cannot be solved


@dataclass(frozen=True)
class CycleOutcome:
    """What a loop gives: the solved step and its value, or the residual."""

    status: LoopStatus
    chain: ChainCheck
    solved_step: int = -1
    value: float = math.nan
    sigma: float = math.nan
    residual: float = math.nan
    residual_sigma: float = math.nan


def solve_one_unknown(steps: Sequence[CycleStep]) -> CycleOutcome:
    """Solve a closed loop for its one missing step enthalpy, or report its residual."""
    chain = check_chain(steps)
    if not chain.closes:
        return CycleOutcome(LoopStatus.OPEN, chain)
    if not chain.unknown:
        return CycleOutcome(
            LoopStatus.CLOSED, chain, residual=chain.residual, residual_sigma=chain.residual_sigma
        )
    if len(chain.unknown) > 1:
        return CycleOutcome(LoopStatus.UNDERDETERMINED, chain)
    (j,) = chain.unknown
    m = steps[j].multiplier
    if m == 0:
        return CycleOutcome(LoopStatus.ZERO_MULTIPLIER, chain, solved_step=j)
    return CycleOutcome(
        LoopStatus.SOLVED,
        chain,
        solved_step=j,
        value=-chain.residual / m,
        sigma=chain.residual_sigma / abs(m),
    )
