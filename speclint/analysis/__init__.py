"""Exact loop analysis: algebra, steady state, stability, margins and gain sets."""

from __future__ import annotations

import sys
from collections.abc import Callable


def forget() -> None:
    """Empty the analysis modules' memo caches.

    They hold one loop's intermediate results (frequency responses, series at s = 0) so
    that the several criteria of that loop share them; the next loop never hits them. A
    worker that analyses hundreds of loops calls this after each one, so its memory stays
    that of one loop's analysis. Results do not depend on it.
    """
    for clear in _clearers():
        clear()


_MEMOISING = ("speclint.analysis.gainset", "speclint.analysis.margins", "speclint.analysis.steady")
_found: list[Callable[[], None]] = []
_searched: set[str] = set()


def _clearers() -> list[Callable[[], None]]:
    """The cache_clear of every memoised function of the modules loaded so far (looked up
    once per module: a walk over a module's names for every loop costs more than the
    clearing)."""
    for name in _MEMOISING:
        module = sys.modules.get(name)
        if module is None or name in _searched:
            continue
        _searched.add(name)
        for value in vars(module).values():
            clear = getattr(value, "cache_clear", None)
            if callable(clear):
                _found.append(clear)
    return _found
