"""The cycle pass: tables of steps that users write as their own cycles.

A cycle table is a table with a process column ('Step', 'Process') and neither a formula
nor a reaction-equation column. Its other columns: the step enthalpy ('ΔH (step)',
'step ΔH', 'step enthalpy'; blank for the one unknown), the multiplier ('Multiplier',
'factor', 'times', '×', 'n'; blank means 1, −1 runs the step backwards) and, optionally, a
cycle id ('Cycle', 'Loop'): consecutive rows with the same id form one cycle, a blank id
continues the cycle above; without the column the whole table is one cycle.

Each cycle is checked and solved by :mod:`sheetcycle.engine.user_cycles`:

* the steps must chain, Σ m·(products − reactants) = 0 for every species (electrons
  included); otherwise ``cycle-steps-unchained`` names what is left over, and says which
  single multiplier change (a step run backwards, a factor 2 …) would close the loop;
* one blank ΔH: it is solved, ``step_enthalpy`` on that row;
* no blank ΔH: ``cycle_residual`` = Σ m·ΔH on the cycle's first row, ``cycle-residual``
  when it exceeds max(2σ, ``Settings.tolerance``);
* two or more blank: ``cycle-unknowns`` on each of them.

Step texts that cannot be read are ``cycle-step-unreadable`` (the cycle is then not
checked); a step whose own elements or charge do not balance gets ``cycle-step-unbalanced``
(a warning: the loop may still close). States are compared after the usual synonyms are
folded ('cr', 'solid' → 's'; 'gas' → 'g').
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from fractions import Fraction

from sheetcycle.chem.reactions import Reaction, Species, parse_reaction, species_key
from sheetcycle.engine.user_cycles import CycleStep, LoopStatus, solve_one_unknown
from sheetcycle.errors import SheetcycleError
from sheetcycle.io.headers import split_header
from sheetcycle.io.tables import a1
from sheetcycle.model import Column, ComputedValue, Flag, RowResult, Severity, Table
from sheetcycle.reaction_pass import norm_state

__all__ = ["cycle_pass", "cycle_tables"]

KJ = "kJ/mol"
_Cell = Callable[[int, Column], str]  # (data-row offset, column) -> A1 reference
SOLVED_METHOD = "user-defined cycle solved for this step"
RESIDUAL_METHOD = (
    "user-defined cycle: Σ multiplier × ΔH over its steps (Hess's law: 0 for a cycle that closes)"
)
_ARROWS = ("->", "→", "=>", "⇌", "=", "⟶", "↔", "⇄", "⇒", "⟹")
_BARE_ENTHALPY = ("ΔH", "∆H", "dH", "delta H", "H", "enthalpy", "enthalpy change", "heat")


def cycle_tables(tables: Sequence[Table]) -> list[Table]:
    """The tables of cycle steps: a process column, no formula or reaction-equation column."""
    return [
        t for t in tables
        if _process_column(t) is not None
        and t.column("formula") is None and t.column("reaction_equation") is None
    ]  # fmt: skip


def _process_column(table: Table) -> Column | None:
    """The process column; of several ('Step' numbers beside 'Process' texts) the one whose
    cells look most like processes (an arrow)."""
    cols = [c for c in table.columns if c.quantity == "process" and c.texts is not None]
    if not cols:
        return None
    return max(cols, key=lambda c: sum(1 for t in c.texts or () if t and _has_arrow(t)))


def _has_arrow(text: str) -> bool:
    return any(a in text for a in _ARROWS)


def cycle_pass(ctx: object) -> list[RowResult]:
    """One :class:`RowResult` per step row of every cycle table of the workbook.

    ``ctx`` is a :class:`sheetcycle.pipeline.WorkbookContext`.
    """
    tables = cycle_tables(ctx.tables)  # type: ignore[attr-defined]
    out: list[RowResult] = []
    for t in tables:
        out.extend(_cycle_table(t, ctx))
    return out


@dataclass
class _Step:
    i: int  # data-row offset in the table
    rr: RowResult
    reaction: Reaction | None
    enthalpy: float
    sigma: float
    multiplier: float
    readable: bool


@dataclass
class _Group:
    cid: str | None
    steps: list[_Step]


def _fold_states(r: Reaction) -> Reaction:
    """The same reaction with every state in its short form ('cr' → 's', 'gas' → 'g')."""

    def side(sps: tuple[Species, ...]) -> tuple[Species, ...]:
        return tuple(replace(sp, state=norm_state(sp.state)) for sp in sps)

    return Reaction(side(r.reactants), side(r.products), r.text, r.reversible)


def _cycle_table(table: Table, ctx: object) -> list[RowResult]:
    settings = ctx.settings  # type: ignore[attr-defined]
    file_flags: list[Flag] = ctx.file_flags  # type: ignore[attr-defined]
    pcol = _process_column(table)
    assert pcol is not None and pcol.texts is not None
    hcol = table.column("step_enthalpy")
    mcol = table.column("step_multiplier")
    ccol = table.column("cycle_id")
    if ccol is not None and ccol.texts is None:
        ccol = None
    flagged = {f.cell for f in file_flags if f.sheet == table.sheet and f.cell}

    def cell(i: int, col: Column) -> str:
        return a1(table.first_row - 1 + i, col.col)

    if hcol is None or hcol.values is None:
        hcol = None
        file_flags.append(_no_enthalpy_column(table, pcol))

    groups: list[_Group] = []
    current: str | None = None
    pending_new = True
    seen_ids: set[str] = set()
    rows: list[RowResult] = []
    for i, text in enumerate(pcol.texts):
        cid = ccol.texts[i] if ccol is not None and ccol.texts is not None else None
        if cid and cid != current:
            current, pending_new = cid, True
        if not text:
            continue
        rr = RowResult(sheet=table.sheet, row=table.first_row + i, formula=text)
        rows.append(rr)
        if pending_new or not groups:
            if current is not None and current in seen_ids:
                rr.flags.append(
                    Flag(
                        "cycle-id-repeated",
                        Severity.NOTE,
                        f"cycle '{current}' appears again after other rows; only consecutive rows "
                        "with the same id form one cycle, so this is checked as a cycle of its own",
                        table.sheet,
                        cell(i, ccol) if ccol is not None else cell(i, pcol),
                    )
                )
            if current is not None:
                seen_ids.add(current)
            groups.append(_Group(current, []))
            pending_new = False
        groups[-1].steps.append(_read_step(i, text, rr, table, pcol, hcol, mcol, flagged, cell))

    for g in groups:
        _check_group(g, table, pcol, hcol, mcol, settings.tolerance, cell)
    return rows


def _no_enthalpy_column(table: Table, pcol: Column) -> Flag:
    bare = next(
        (c for c in table.columns if c.quantity is None and c.header
         and _label(c.header) in {b.lower() for b in _BARE_ENTHALPY}),
        None,
    )  # fmt: skip
    if bare is not None:
        return Flag(
            "cycle-enthalpy-column", Severity.ERROR,
            f"column '{bare.header}' was not read: a bare 'ΔH' does not say which enthalpy. "
            "In a table of cycle steps head it 'ΔH (step)' (e.g. 'ΔH (step) / kJ mol-1') or "
            "'step enthalpy'; until then the steps are only checked for chaining",
            table.sheet, a1(table.header_row - 1, bare.col))  # fmt: skip
    return Flag(
        "cycle-enthalpy-column", Severity.ERROR,
        "this table of cycle steps has no column of step enthalpies; add one headed "
        "'ΔH (step) / kJ mol-1' (blank for the step to solve); until then the steps are only "
        "checked for chaining", table.sheet, a1(table.header_row - 1, pcol.col))  # fmt: skip


def _label(header: str) -> str:
    """The header's label without its unit, lower case, without a standard-state mark."""
    label = split_header(header)[0].replace("∆", "Δ").replace("_", " ")
    return " ".join(label.split()).rstrip("°⦵ ").lower()


def _read_step(
    i: int,
    text: str,
    rr: RowResult,
    table: Table,
    pcol: Column,
    hcol: Column | None,
    mcol: Column | None,
    flagged: set[str],
    cell: _Cell,
) -> _Step:
    readable = True
    reaction: Reaction | None = None
    try:
        reaction = _fold_states(parse_reaction(text))
    except SheetcycleError as exc:
        readable = False
        problem = getattr(exc, "problem", None) or str(exc)
        rr.flags.append(
            Flag(
                "cycle-step-unreadable",
                Severity.ERROR,
                f"cannot read the step '{text}' as a process: {problem}. Write it like "
                "'Na(s) -> Na(g)', '1/2 Cl2(g) -> Cl(g)' or 'Cl(g) + e- -> Cl-(g)'; this step's "
                "cycle was not checked",
                table.sheet,
                cell(i, pcol),
            )
        )
    if reaction is not None and not reaction.is_balanced:
        rr.flags.append(
            Flag(
                "cycle-step-unbalanced",
                Severity.WARNING,
                f"the step '{text}' does not balance on its own ({reaction.balance().describe()}); "
                "an ionization or electron gain needs its e- written",
                table.sheet,
                cell(i, pcol),
            )
        )
    multiplier = 1.0
    if mcol is not None and mcol.values is not None:
        m = float(mcol.values[i])
        mcell = cell(i, mcol)
        if (math.isnan(m) and mcell in flagged) or math.isinf(m):
            readable = False
            rr.flags.append(
                Flag(
                    "cycle-step-unreadable",
                    Severity.ERROR,
                    f"the multiplier of the step '{text}' is not a number; write how many times "
                    "the step enters the cycle (blank means 1, -1 runs it backwards); this step's "
                    "cycle was not checked",
                    table.sheet,
                    mcell,
                )
            )
        elif not math.isnan(m):
            multiplier = m
    enthalpy = sigma = math.nan
    if hcol is not None and hcol.values is not None:
        enthalpy = float(hcol.values[i])
        if hcol.uncertainties is not None:
            sigma = float(hcol.uncertainties[i])
    return _Step(i, rr, reaction, enthalpy, sigma, multiplier, readable)


def _rows_text(g: _Group) -> str:
    first, last = g.steps[0].rr.row, g.steps[-1].rr.row
    name = f"cycle '{g.cid}'" if g.cid else "the cycle"
    return f"{name} (row {first})" if first == last else f"{name} (rows {first}–{last})"


def _check_group(
    g: _Group,
    table: Table,
    pcol: Column,
    hcol: Column | None,
    mcol: Column | None,
    tolerance: float,
    cell: _Cell,
) -> None:
    if not g.steps or not all(s.readable for s in g.steps):
        return
    steps = [
        CycleStep(r, s.enthalpy, s.multiplier, s.sigma, s.rr.formula or "")
        for s in g.steps
        if (r := s.reaction) is not None
    ]
    out = solve_one_unknown(steps)
    first = g.steps[0]
    sheet = table.sheet

    def at(s: _Step, col: Column | None) -> str:
        return cell(s.i, col if col is not None else pcol)

    def source(s: _Step) -> str:
        ref = f"{sheet}!{at(s, hcol)}"
        return ref if s.multiplier == 1 else f"{ref} × {s.multiplier:g}"

    known = [s for s in g.steps if not math.isnan(s.enthalpy)]
    with_sigma = [s for s in known if not math.isnan(s.sigma)]
    partial = bool(with_sigma) and len(with_sigma) < len(known)

    if out.status == LoopStatus.OPEN:
        first.rr.flags.append(
            Flag(
                "cycle-steps-unchained",
                Severity.ERROR,
                f"the steps of {_rows_text(g)} do not chain: "
                f"{_leftover_words(out.chain.leftover, g)}."
                " Around a cycle every species a step forms must be used again by another step "
                "(Σ multiplier × (products − reactants) = 0); nothing was solved"
                + _chain_hints(out.chain.leftover, g),
                sheet,
                at(first, pcol),
            )
        )
        return
    if out.status == LoopStatus.UNDERDETERMINED:
        if hcol is None:
            return  # the missing column is flagged once, at its header
        blank = [g.steps[k] for k in out.chain.unknown]
        where = ", ".join(str(s.rr.row) for s in blank)
        for s in blank:
            s.rr.flags.append(
                Flag(
                    "cycle-unknowns",
                    Severity.ERROR,
                    f"{_rows_text(g)} has {len(blank)} steps without a ΔH (rows {where}); a cycle "
                    "can be solved for one missing step only: give all but one",
                    sheet,
                    at(s, hcol),
                )
            )
        return
    if out.status == LoopStatus.ZERO_MULTIPLIER:
        s = g.steps[out.solved_step]
        s.rr.flags.append(
            Flag(
                "cycle-step-unreadable",
                Severity.ERROR,
                f"the step to solve, '{s.rr.formula}', has multiplier 0, so the cycle says nothing "
                "about it; give its multiplier",
                sheet,
                at(s, mcol),
            )
        )
        return
    sigma_note = "; the uncertainty counts only the steps whose ΔH has one" if partial else ""
    if out.status == LoopStatus.SOLVED:
        s = g.steps[out.solved_step]
        sig = out.sigma if with_sigma else math.nan
        s.rr.values["step_enthalpy"] = ComputedValue(
            float(out.value), float(sig), KJ, SOLVED_METHOD, tuple(source(k) for k in known)
        )
        s.rr.flags.append(
            Flag(
                "term-derived",
                Severity.NOTE,
                f"the ΔH of the step '{s.rr.formula}' was blank; from the other steps of "
                f"{_rows_text(g)} it is {out.value:.1f} kJ/mol{sigma_note}",
                sheet,
                at(s, hcol),
            )
        )
        return
    # CLOSED: every ΔH given
    res = float(out.residual)
    sig = float(out.residual_sigma) if with_sigma else math.nan
    first.rr.values["cycle_residual"] = ComputedValue(
        res, sig, KJ, RESIDUAL_METHOD + sigma_note, tuple(source(k) for k in known)
    )
    limit = max(2 * (0.0 if math.isnan(sig) else sig), tolerance)
    if abs(res) > limit:
        first.rr.flags.append(
            Flag(
                "cycle-residual",
                Severity.WARNING,
                f"{_rows_text(g)} chains but does not close: Σ multiplier × ΔH = {res:+.1f}"
                + (f" ± {sig:.1f}" if not math.isnan(sig) else "")
                + f" kJ/mol, more than max(2σ, {tolerance:g} kJ/mol)"
                + _residual_hint(res, limit, g),
                sheet,
                at(first, hcol),
            )
        )


def _names(g: _Group) -> dict[str, str]:
    """Species key → the text the user wrote (first appearance)."""
    out: dict[str, str] = {}
    for s in g.steps:
        if s.reaction is not None:
            for key, sp in s.reaction.species().items():
                out.setdefault(key, sp.text)
    return out


def _amount(x: Fraction) -> str:
    x = abs(x)
    return str(x.numerator) if x.denominator == 1 else f"{x.numerator}/{x.denominator}"


def _leftover_words(leftover: Mapping[str, Fraction], g: _Group) -> str:
    names = _names(g)
    parts = []
    for key, n in leftover.items():
        words = "more formed than used" if n > 0 else "more used than formed"
        parts.append(f"{names.get(key, key)}: {_amount(n)} {words}")
    return "left over around the loop, " + "; ".join(parts)


def _chain_hints(leftover: Mapping[str, Fraction], g: _Group) -> str:
    total: dict[str, Fraction] = dict(leftover)
    hints: list[str] = []
    for s in g.steps:
        assert s.reaction is not None
        net = {k: v for k, v in s.reaction.net().items() if v != 0}
        key = next(iter(total))
        if key not in net:
            continue
        d = -total[key] / net[key]
        if all(total.get(k, 0) + d * net.get(k, 0) == 0 for k in set(total) | set(net)):
            m_new = Fraction(repr(s.multiplier)) + d
            what = (
                " (the step run backwards)"
                if m_new == -Fraction(repr(s.multiplier))
                else " (that is, without the step)"
                if m_new == 0
                else ""
            )
            hints.append(
                f"row {s.rr.row} with multiplier {_signed(m_new)} instead of {s.multiplier:g}{what}"
            )
    out = ""
    if hints:
        out += ". The steps would chain with " + ", or ".join(hints[:3])
    # The same species written with different states in different steps.
    species = {}
    for s in g.steps:
        assert s.reaction is not None
        for key, sp in s.reaction.species().items():
            species.setdefault(key, sp)
    by_formula: dict[str, list[str]] = {}
    for key in total:
        sp = species.get(key)
        if sp is not None:
            by_formula.setdefault(species_key(sp.formula, None), []).append(sp.text)
    for texts in by_formula.values():
        if len(texts) > 1:
            out += (
                f". {' and '.join(texts)} are the same species written with different "
                "states: a state must be the same in every step"
            )
    return out


def _signed(x: Fraction) -> str:
    return ("-" if x < 0 else "") + _amount(x)


def _residual_hint(res: float, limit: float, g: _Group) -> str:
    """Name a step whose sign, reversed, would close the cycle."""
    for s in g.steps:
        if math.isnan(s.enthalpy) or s.enthalpy == 0:
            continue
        if abs(res - 2 * s.multiplier * s.enthalpy) <= limit:
            return (
                f". The residual is twice the step '{s.rr.formula}' (row {s.rr.row}): is "
                "its sign reversed (e.g. an electron affinity where the electron-gain "
                "enthalpy belongs, or a step written the other way round)?"
            )
    return ". Check the signs, the multipliers and the units of the steps"
