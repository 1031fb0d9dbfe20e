"""The rule catalogue is complete: every code the package uses is registered."""

from __future__ import annotations

import re

from conftest import REPO
from speclint.rules import RULES


def test_every_code_used_in_the_package_is_registered():
    used = set()
    for path in (REPO / "speclint").rglob("*.py"):
        used.update(re.findall(r'"(SL\d{3})"', path.read_text(encoding="utf-8")))
    assert used, "no rule codes found: the scan itself is broken"
    assert sorted(used - set(RULES)) == []


def test_codes_and_names_are_unique_and_well_formed():
    names = [r.name for r in RULES.values()]
    assert len(names) == len(set(names))
    for code, rule in RULES.items():
        assert code == rule.code and re.fullmatch(r"SL\d{3}", code)
        assert re.fullmatch(r"[a-z]+(-[a-z]+)*", rule.name), rule.name
