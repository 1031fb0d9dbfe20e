"""Exact loop analysis: algebra, steady state, stability, margins and gain sets."""

from __future__ import annotations

import sys


def forget() -> None:
    """Empty the analysis modules' memo caches.

    They hold one loop's intermediate results (frequency responses, series at s = 0) so
    that the several criteria of that loop share them; the next loop never hits them. A
    worker that analyses hundreds of loops calls this after each one, so its memory stays
    that of one loop's analysis. Results do not depend on it.
    """
    for name in (
        "speclint.analysis.gainset",
        "speclint.analysis.margins",
        "speclint.analysis.steady",
    ):
        module = sys.modules.get(name)
        if module is None:
            continue
        for value in vars(module).values():
            clear = getattr(value, "cache_clear", None)
            if callable(clear):
                clear()
