"""Unit strings written the way users write them (``m2 s-2``), squared, halved and typeset.

Units in netCDF files follow the UDUNITS habit: factors separated by spaces
(or ``.``), each a name with an optional whole exponent (``m s-1``,
``kg m-2``, ``m2 s-2``).  A spectrum of a field in ``m s-1`` is in
``m2 s-2``, its RMS back in ``m s-1``.  Forms this module cannot read (a
number, brackets, a word with digits inside) are kept whole and marked, for
example ``(10 m)^2``, rather than guessed.

Standard library only.

Examples
--------
>>> squared_units("m s-1"), squared_units("K"), squared_units("m/s")
('m2 s-2', 'K2', 'm2 s-2')
>>> root_units("m2 s-2"), root_units("K2")
('m s-1', 'K')
>>> typeset_units("m2 s-2")
'm² s⁻²'
"""
from __future__ import annotations

import re

__all__ = ["squared_units", "root_units", "product_units", "typeset_units"]

_FACTOR = re.compile(r"^([A-Za-z_%\u00b0]+)(?:\^|\*\*)?\(?([-+]?\d+)?\)?$")
_SUPERSCRIPT = str.maketrans("0123456789-+", "\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077"
                                             "\u2078\u2079\u207b\u207a")


def _factors(units: str) -> list[tuple[str, int]] | None:
    """``[(name, exponent), ...]`` of a UDUNITS-style product, or None if it is not one."""
    text = units.strip().replace("**", "^")
    if not text:
        return []
    parts = text.split("/")
    if len(parts) > 2:
        return None
    out: list[tuple[str, int]] = []
    for part, sign in zip(parts, (1, -1)):
        tokens = [t for t in re.split(r"[\s.*]+", part.strip()) if t]
        if not tokens:
            return None
        for tok in tokens:
            match = _FACTOR.match(tok)
            if match is None:
                return None
            exponent = int(match.group(2)) if match.group(2) else 1
            out.append((match.group(1), sign * exponent))
    return out


def _join(factors: list[tuple[str, int]]) -> str:
    return " ".join(name if e == 1 else f"{name}{e}" for name, e in factors if e != 0)


def squared_units(units: str) -> str:
    """``units`` squared: ``m`` -> ``m2``, ``m s-1`` -> ``m2 s-2`` (``1`` stays ``1``)."""
    if units.strip() == "1":
        return "1"
    factors = _factors(units)
    if factors is None:
        return f"({units.strip()})^2"
    return _join([(n, 2 * e) for n, e in factors])


def root_units(units: str) -> str:
    """Square root of ``units``: ``m2`` -> ``m``, ``m2 s-2`` -> ``m s-1``; ``sqrt(...)`` otherwise."""
    text = units.strip()
    if text == "1":
        return "1"
    whole = re.fullmatch(r"\((.*)\)\^2", text)
    if whole:
        return whole.group(1)
    factors = _factors(text)
    if factors is None or any(e % 2 for _, e in factors):
        return f"sqrt({text})"
    return _join([(n, e // 2) for n, e in factors])


def product_units(a: str, b: str) -> str:
    """Units of a product: ``m`` and ``m`` -> ``m2``, ``m`` and ``K`` -> ``m K``."""
    fa, fb = _factors(a), _factors(b)
    if fa is None or fb is None:
        return f"({a.strip()}) ({b.strip()})"
    merged: dict[str, int] = {}
    for name, e in fa + fb:
        merged[name] = merged.get(name, 0) + e
    return _join(list(merged.items()))


def typeset_units(units: str) -> str:
    """Exponents as superscripts for figure labels: ``m2 s-2`` -> ``m² s⁻²``, ``m^2`` -> ``m²``."""
    def sup(match: re.Match) -> str:
        return match.group(1) + match.group(2).translate(_SUPERSCRIPT)

    return re.sub(r"([A-Za-z_%\u00b0])(?:\^|\*\*)?([-+]?\d+)\b", sup, str(units))
