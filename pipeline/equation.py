"""Reaction equations: ``CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)`` → stoichiometry.

Grammar (inputs.md, reactions-csv)::

    equation := side "=" side
    side     := term ("+" term)*
    term     := [coefficient] key
    coefficient := integer | decimal | fraction        (2, 0.5, .5, 1/2, 3/2)
    key      := FORMULA(state[,label])                 (OH-(aq), Na+(aq), C(cr,graphite))

A ``+`` is a charge sign, not a separator, when what follows it is more charge signs or
digits and then the state in parentheses (``Fe+2(aq)``, ``Na++(aq)``, ``Ca(OH)+(aq)``);
``A(g) +(CH3)2O(g)`` still splits, because ``(CH3`` is not a state.
Commas only occur inside a key's parentheses. Coefficients are kept exact
(:class:`fractions.Fraction`), so ``1/2 O2(g)`` balances exactly.

The stoichiometric numbers ν follow the IUPAC sign convention: products positive,
reactants negative (IUPAC Green Book, 3rd ed., 2007, §2.11). A species on both sides is
netted; one that nets to zero is dropped.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from fractions import Fraction

from .formula import ELECTRON, FormulaError, parse_formula, parse_key

_COEF = re.compile(r"^\s*(?P<num>\d+(?:\.\d*)?|\.\d+)(?:\s*/\s*(?P<den>\d+))?\s*(?=[A-Za-z(\[])")
_CHARGE_AHEAD = re.compile(r"^[+]*\d*\(\s*(?:g|l|cr|aq)\s*[,)]", re.IGNORECASE)
_TOL = 1e-9


class EquationError(ValueError):
    """An equation that cannot be parsed or does not balance; ``str()`` is the reason."""

    def __init__(self, why: str, fix: str):
        super().__init__(why, fix)
        self.why, self.fix = why, fix

    def __str__(self) -> str:
        return f"{self.why} — fix: {self.fix}"


@dataclass(frozen=True)
class Reaction:
    """A parsed, balanced reaction.

    ``stoich`` maps species key → ν (float; products > 0, reactants < 0), in the order of
    first appearance. ``left`` and ``right`` are the sides as written: (key, coefficient).
    """

    stoich: dict
    left: tuple
    right: tuple


def _split_terms(side: str, which: str) -> list[str]:
    """Split one side at separator ``+`` signs (depth 0, not a charge)."""
    terms, depth, start = [], 0, 0
    for i, ch in enumerate(side):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
            if depth < 0:
                raise EquationError(f"unbalanced ')' on the {which} side", "balance the parentheses")
        elif ch == "+" and depth == 0 and not _CHARGE_AHEAD.match(side[i + 1:]):
            terms.append(side[start:i])
            start = i + 1
    if depth != 0:
        raise EquationError(f"unbalanced '(' on the {which} side", "balance the parentheses")
    terms.append(side[start:])
    return terms


def _parse_side(side: str, which: str) -> list[tuple[str, Fraction]]:
    out = []
    for term in _split_terms(side, which):
        t = term.strip()
        if not t:
            raise EquationError(f"an empty term on the {which} side (a stray '+')",
                                "write terms as 'coefficient SPECIES(state)' joined by ' + '")
        m = _COEF.match(t)
        coef = Fraction(1)
        if m:
            num, den = m.group("num"), m.group("den")
            if den is not None and int(den) == 0:
                raise EquationError(f"coefficient {m.group(0).strip()!r} divides by zero",
                                    "write a fraction such as 1/2")
            coef = Fraction(num) / (int(den) if den else 1)
            t = t[m.end():].strip()
        if coef <= 0:
            raise EquationError(f"coefficient {coef} of {t!r} is not positive",
                                "move the species to the other side instead of a negative or zero coefficient")
        try:
            key = parse_key(t)
            parse_formula(key.formula)
        except FormulaError as exc:
            raise EquationError(f"species {t!r} on the {which} side: {exc.why}", exc.fix) from None
        out.append((key.key, coef))
    return out


def _fmt(x: float) -> str:
    return f"{x:g}" if abs(x - round(x)) > _TOL else str(int(round(x)))


def _fmt_charge(x: float) -> str:
    return "0" if abs(x) < _TOL else f"{x:+g}"


def parse_equation(text: str) -> Reaction:
    """Parse and balance-check an equation.

    Raises
    ------
    EquationError
        Syntax errors, unknown species/elements, and imbalance in elements or charge,
        the latter spelled out per element: ``"O: left 2, right 3"``.
    """
    if not isinstance(text, str) or not text.strip():
        raise EquationError("an empty equation", "write e.g. CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)")
    parts = text.split("=")
    if len(parts) != 2:
        raise EquationError(f"{len(parts) - 1} '=' signs in {text.strip()!r}; expected exactly one",
                            "separate reactants and products with one '='")
    left = _parse_side(parts[0], "left")
    right = _parse_side(parts[1], "right")
    totals: dict[str, list[float]] = {}
    charge = [0.0, 0.0]
    for k, side in enumerate((left, right)):
        for key, coef in side:
            f = parse_formula(parse_key(key).formula)
            for el, n in f.elements.items():
                if el == ELECTRON:
                    continue
                totals.setdefault(el, [0.0, 0.0])[k] += float(coef) * n
            charge[k] += float(coef) * f.charge
    bad = [f"{el}: left {_fmt(a)}, right {_fmt(b)}" for el, (a, b) in sorted(totals.items())
           if abs(a - b) > _TOL * max(1.0, abs(a), abs(b))]
    if abs(charge[0] - charge[1]) > _TOL * max(1.0, abs(charge[0])):
        bad.append(f"charge: left {_fmt_charge(charge[0])}, right {_fmt_charge(charge[1])}")
    if bad:
        raise EquationError("equation does not balance (" + "; ".join(bad) + ")",
                            "correct the coefficients or the formulas")
    stoich: dict[str, Fraction] = {}
    for key, coef in left:
        stoich[key] = stoich.get(key, Fraction(0)) - coef
    for key, coef in right:
        stoich[key] = stoich.get(key, Fraction(0)) + coef
    stoich = {k: v for k, v in stoich.items() if v != 0}
    if not stoich:
        raise EquationError("every species cancels: the reaction is empty",
                            "write a reaction that changes something")
    return Reaction(stoich={k: float(v) for k, v in stoich.items()},
                    left=tuple((k, float(c)) for k, c in left),
                    right=tuple((k, float(c)) for k, c in right))
