"""User-defined cycles: a Born-Haber cycle for NaCl written as steps, solved and closed."""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetcycle.chem.reactions import parse_reaction
from sheetcycle.engine.user_cycles import CycleStep, LoopStatus, check_chain, solve_one_unknown

NAN = math.nan

# Step enthalpies, kJ/mol at 298.15 K:
#  Na(s) -> Na(g): ΔfH°(Na, g) = 107.5 ± 0.7 (CODATA Key Values 1989; from memory)
#  Cl2(g) -> 2 Cl(g): 2 × ΔfH°(Cl, g) = 2 × 121.301 ± 0.008 (CODATA 1989; from memory)
#  Na(g) -> Na+(g) + e-: IE1(Na) = 5.139 eV = 495.8 kJ/mol (NIST ASD; from memory)
#  Cl(g) + e- -> Cl-(g): −EA(Cl) = −3.613 eV = −348.6 kJ/mol (NIST; from memory)
#  NaCl(s) -> Na(s) + 1/2 Cl2(g): −ΔfH°(NaCl, s) = +411.15 (NBS 1982; from memory)
# The lattice step Na+(g) + Cl-(g) -> NaCl(s) closes the loop; the CRC "Lattice energies"
# table gives 787 kJ/mol for NaCl (from memory).


def nacl_steps(lattice: float = NAN, *, order: list[int] | None = None) -> list[CycleStep]:
    steps = [
        CycleStep(parse_reaction("Na(s) -> Na(g)"), 107.5, 1.0, 0.7),
        CycleStep(parse_reaction("Cl2(g) -> 2 Cl(g)"), 242.602, 0.5, 0.016),
        CycleStep(parse_reaction("Na(g) -> Na+(g) + e-"), 495.8, 1.0, 0.1),
        CycleStep(parse_reaction("Cl(g) + e- -> Cl-(g)"), -348.6, 1.0, 0.1),
        CycleStep(parse_reaction("Na+(g) + Cl-(g) -> NaCl(s)"), lattice, 1.0, NAN),
        CycleStep(parse_reaction("NaCl(s) -> Na(s) + 1/2 Cl2(g)"), 411.15, 1.0, NAN),
    ]
    return [steps[i] for i in order] if order else steps


def test_lattice_step_solved_from_the_loop() -> None:
    out = solve_one_unknown(nacl_steps())
    assert out.status == LoopStatus.SOLVED
    assert out.solved_step == 4
    # The formation-convention lattice enthalpy: −787 kJ/mol within the few kJ/mol that the
    # ±5/2 RT conventions and table differences move it (common practice, no source).
    assert out.value == pytest.approx(-787.0, abs=3.0)
    assert out.sigma > 0


def test_closed_loop_reports_its_residual() -> None:
    out = solve_one_unknown(nacl_steps(lattice=-787.0))
    assert out.status == LoopStatus.CLOSED
    assert out.residual == pytest.approx(107.5 + 121.301 + 495.8 - 348.6 - 787.0 + 411.15)
    assert not out.chain.sigma_complete


def test_a_step_taken_backwards_with_multiplier_minus_one() -> None:
    steps = nacl_steps()
    steps[4] = CycleStep(parse_reaction("NaCl(s) -> Na+(g) + Cl-(g)"), NAN, -1.0)
    out = solve_one_unknown(steps)
    assert out.status == LoopStatus.SOLVED
    assert out.value == pytest.approx(787.0, abs=3.0)  # dissociation convention


def test_open_loop_names_what_is_left_over() -> None:
    steps = nacl_steps()
    steps[1] = CycleStep(parse_reaction("Cl2(g) -> 2 Cl(g)"), 242.602, 1.0)  # should be ½
    chain = check_chain(steps)
    assert not chain.closes
    assert dict(chain.leftover) == {"Cl(g)": Fraction(1), "Cl2(g)": Fraction(-1, 2)}
    assert chain.describe_leftover() == "Cl2(g): 1/2 consumed; Cl(g): 1 left over as product"
    assert solve_one_unknown(steps).status == LoopStatus.OPEN


def test_forgotten_electron_step_leaves_the_electron_over() -> None:
    steps = [s for i, s in enumerate(nacl_steps()) if i != 3]
    chain = check_chain(steps)
    assert chain.leftover["e-"] == 1
    assert chain.leftover["Cl(g)"] == 1 and chain.leftover["Cl-(g)"] == -1


def test_two_unknowns_cannot_be_solved() -> None:
    steps = nacl_steps()
    steps[0] = CycleStep(steps[0].reaction, NAN, 1.0)
    out = solve_one_unknown(steps)
    assert out.status == LoopStatus.UNDERDETERMINED
    assert out.chain.unknown == (0, 4)
    assert math.isnan(out.value)


@settings(max_examples=100, deadline=None)
@given(st.permutations(list(range(6))))
def test_the_order_of_the_steps_does_not_matter(order: list[int]) -> None:
    base = solve_one_unknown(nacl_steps())
    shuffled = solve_one_unknown(nacl_steps(order=order))
    assert shuffled.status == LoopStatus.SOLVED
    assert shuffled.value == pytest.approx(base.value)
    assert shuffled.sigma == pytest.approx(base.sigma)
