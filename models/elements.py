"""Chemical formulas: parsing into element counts and molar masses.

Atomic masses are the IUPAC 2021 standard atomic weights (abridged, conventional values), in kg/mol."""

from __future__ import annotations

import re

ATOMIC_MASS = {
    "H": 1.008e-3, "He": 4.0026e-3, "C": 12.011e-3, "N": 14.007e-3, "O": 15.999e-3, "F": 18.998e-3,
    "Ne": 20.180e-3, "Na": 22.990e-3, "Mg": 24.305e-3, "Al": 26.982e-3, "Si": 28.085e-3, "P": 30.974e-3,
    "S": 32.06e-3, "Cl": 35.45e-3, "Ar": 39.95e-3, "K": 39.098e-3, "Ca": 40.078e-3, "Fe": 55.845e-3,
    "Ni": 58.693e-3, "Cu": 63.546e-3, "Br": 79.904e-3, "I": 126.90e-3,
}

_TOKEN = re.compile(r"([A-Z][a-z]?|\(|\)|\d+)")


def parse_formula(formula: str) -> dict[str, int]:
    """Element counts of a formula such as ``C2H4O`` or ``Ca(OH)2``. Raises ValueError when unreadable."""
    text = formula.replace(" ", "")
    tokens = _TOKEN.findall(text)
    if "".join(tokens) != text or not tokens:
        raise ValueError(f'cannot read formula "{formula}"')
    stack: list[dict[str, int]] = [{}]
    i = 0
    while i < len(tokens):
        tok = tokens[i]
        count = 1
        if i + 1 < len(tokens) and tokens[i + 1].isdigit():
            count = int(tokens[i + 1])
        if tok == "(":
            stack.append({})
            i += 1
            continue
        if tok == ")":
            if len(stack) == 1:
                raise ValueError(f'unbalanced ")" in formula "{formula}"')
            group = stack.pop()
            for el, n in group.items():
                stack[-1][el] = stack[-1].get(el, 0) + n * count
        elif tok.isdigit():
            raise ValueError(f'a number without an element in formula "{formula}"')
        else:
            if tok not in ATOMIC_MASS:
                raise ValueError(f'unknown element "{tok}" in formula "{formula}"')
            stack[-1][tok] = stack[-1].get(tok, 0) + count
        i += 2 if count != 1 or (i + 1 < len(tokens) and tokens[i + 1].isdigit()) else 1
    if len(stack) != 1:
        raise ValueError(f'unbalanced "(" in formula "{formula}"')
    return stack[0]


def molar_mass(elements: dict[str, int]) -> float:
    """Molar mass in kg/mol from element counts."""
    return sum(ATOMIC_MASS[el] * n for el, n in elements.items())
