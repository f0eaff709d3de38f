"""One planted bug for ``tests/mutations.py`` (shared by its lists ``tests/mutations_*.py``)."""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Mutation:
    """One planted bug: ``original`` (exactly once in ``path``) becomes ``mutated``."""

    name: str
    path: str
    original: str
    mutated: str
    tests: tuple[str, ...]
    equivalent: str | None = None


def _m(name, path, original, mutated, *tests, equivalent=None):
    return Mutation(name, path, original, mutated, tuple(tests), equivalent)
