"""The trace checks (SL6xx): each finding at its place, and the cases that must stay quiet.

What a trace must show is common practice in requirements engineering (every requirement
traced up to a stated origin, links that resolve and do not loop, every requirement
verified by one of the four methods: analysis, test, inspection, demonstration); the
strongly-connected-component test compares with the definition itself (mutual
reachability), as in Tarjan, "Depth-first search and linear graph algorithms", SIAM J.
Comput. 1(2), 1972.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import findings_of
from speclint.trace import exact, strongly_connected

HEAD = "speclint: 1\n"
LOOP = """\
loops:
  feed:
    plant: "2/(s*(s + 1))"
    controller: "K"
    gain: {symbol: K, nominal: 1}
"""


def spec(*requirements: str, loops: str = "") -> str:
    return HEAD + loops + "requirements:\n" + "".join(requirements)


ROOT = "  - id: SYS-1\n    origin: customer list, item 1\n"
CHILD = """\
  - id: R-1
    traces_to: [SYS-1]
    loop: feed
    tracking: {reference: step, magnitude: 1, max_error: 0.1}
    verification: {method: analysis}
"""


def at(text: str, needle: str, path: str = "a.yaml", nth: int = 1) -> tuple[str, int, int]:
    """Where the `nth` occurrence of `needle` starts in `text`, 1-based, as editors count."""
    index = -1
    for _ in range(nth):
        index = text.index(needle, index + 1)
    line = text.count("\n", 0, index) + 1
    column = index - (text.rfind("\n", 0, index) + 1) + 1
    return (path, line, column)


def places(run, code: str) -> list[tuple[str, int, int]]:
    return [
        (f["path"], f["line"], f["column"]) for f in run.report["findings"] if f["rule"] == code
    ]


def messages(run, code: str) -> list[str]:
    return [f["message"] for f in run.report["findings"] if f["rule"] == code]


def test_a_complete_trace_is_quiet(speclint):
    run = speclint({"a.yaml": spec(ROOT, CHILD, loops=LOOP)})
    assert run.codes == [], findings_of(run)


def test_duplicate_ids_across_files_are_reported_at_the_second(speclint):
    other = spec("  - id: SYS-1\n    origin: another list\n    verification: {method: test}\n")
    run = speclint({"a.yaml": spec(ROOT, CHILD, loops=LOOP), "b.yaml": other})
    assert places(run, "SL601") == [at(other, "id: SYS-1", "b.yaml")], findings_of(run)
    first = at(spec(ROOT, CHILD, loops=LOOP), "id: SYS-1")
    assert f"already used at a.yaml:{first[1]}" in messages(run, "SL601")[0]


def test_a_duplicate_of_a_requirement_with_errors_still_counts(speclint):
    broken = spec("  - id: SYS-1\n    origni: typo\n")
    run = speclint({"a.yaml": spec(ROOT, CHILD, loops=LOOP), "b.yaml": broken})
    assert places(run, "SL601") == [at(broken, "id: SYS-1", "b.yaml")], findings_of(run)


def test_id_pattern_from_the_configuration(speclint, tmp_path):
    (tmp_path / "speclint.toml").write_text('id_pattern = "(SYS|R)-[0-9]+"\n')
    odd = "  - id: r-2\n    traces_to: [SYS-1]\n    verification: {method: inspection}\n"
    text = spec(ROOT, CHILD, odd, loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL602") == [at(text, "id: r-2")], findings_of(run)
    assert "'r-2'" in messages(run, "SL602")[0]


def test_dangling_link_at_its_item_with_a_suggestion(speclint):
    child = CHILD.replace("[SYS-1]", "[SYS-1, SYS-11]")
    text = spec(ROOT, child, loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL603") == [at(text, "SYS-11")], findings_of(run)
    hint = next(f["hint"] for f in run.report["findings"] if f["rule"] == "SL603")
    assert "'SYS-1'" in hint


def test_links_resolve_across_files(speclint):
    run = speclint({"top.yaml": spec(ROOT), "low.yaml": spec(CHILD, loops=LOOP)})
    assert run.codes == [], findings_of(run)


def test_a_link_to_a_requirement_with_errors_is_not_dangling(speclint):
    broken = spec("  - id: SYS-2\n    origni: typo\n")
    child = CHILD.replace("[SYS-1]", "[SYS-1, SYS-2]")
    run = speclint({"a.yaml": spec(ROOT, child, loops=LOOP), "b.yaml": broken})
    assert "SL603" not in run.codes and "SL201" in run.codes, findings_of(run)


def test_orphan_has_neither_origin_nor_link(speclint):
    orphan = "  - id: R-9\n    text: Stands alone.\n    verification: {method: inspection}\n"
    text = spec(ROOT, CHILD, orphan, loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL604") == [at(text, "id: R-9")], findings_of(run)


def test_origin_and_links_together_are_allowed(speclint):
    both = CHILD.replace("    traces_to:", "    origin: IEC 61800-5-2, 6.2\n    traces_to:")
    run = speclint({"a.yaml": spec(ROOT, both, loops=LOOP)})
    assert run.codes == [], findings_of(run)


def _chain(*links: tuple[str, str]) -> str:
    out = ""
    for rid, parent in links:
        out += f"  - id: {rid}\n    traces_to: [{parent}]\n    verification: {{method: test}}\n"
    return out


def test_cycle_of_length_one(speclint):
    text = spec(ROOT, _chain(("R-1", "R-1")))
    run = speclint({"a.yaml": text})
    assert places(run, "SL605") == [at(text, "R-1]")], findings_of(run)
    assert messages(run, "SL605") == ["R-1: traces_to links lead back to it: R-1 → R-1"]


def test_cycle_of_length_two(speclint):
    text = spec(ROOT, _chain(("R-1", "R-2"), ("R-2", "R-1")))
    run = speclint({"a.yaml": text})
    assert messages(run, "SL605") == ["R-1: traces_to links lead back to it: R-1 → R-2 → R-1"]
    assert places(run, "SL605") == [at(text, "R-2]")]


def test_cycle_of_length_three_across_files_is_reported_once(speclint):
    run = speclint(
        {
            "a.yaml": spec(ROOT, _chain(("R-1", "R-2"))),
            "b.yaml": spec(_chain(("R-2", "R-3"), ("R-3", "R-1"))),
        }
    )
    assert messages(run, "SL605") == [
        "R-1: traces_to links lead back to it: R-1 → R-2 → R-3 → R-1"
    ], findings_of(run)


def test_a_knot_of_cycles_names_every_member(speclint):
    knot = _chain(("R-1", "R-2"), ("R-2", "R-1"), ("R-3", "R-2"))
    knot += "  - id: R-4\n    traces_to: [R-3, R-2]\n    verification: {method: test}\n"
    knot = knot.replace(
        "  - id: R-2\n    traces_to: [R-1]", "  - id: R-2\n    traces_to: [R-1, R-4]"
    )
    run = speclint({"a.yaml": spec(ROOT, knot)})
    assert messages(run, "SL605") == [
        "R-1: traces_to links lead back to it: R-1 → R-2 → R-1 "
        "(also caught in these links: R-3, R-4)"
    ], findings_of(run)


def test_textual_parent_that_nothing_refines_or_verifies(speclint):
    idle = "  - id: SYS-2\n    origin: customer list, item 2\n"
    verified = (
        "  - id: SYS-3\n    origin: customer list, item 3\n    verification: {method: inspection}\n"
    )
    text = spec(ROOT, CHILD, idle, verified, loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL606") == [at(text, "id: SYS-2")], findings_of(run)


def test_loop_that_no_requirement_names(speclint):
    loops = LOOP + '  spare:\n    plant: "1/(s + 1)"\n'
    text = spec(ROOT, CHILD, loops=loops)
    run = speclint({"a.yaml": text})
    assert places(run, "SL607") == [at(text, "spare:")], findings_of(run)


def test_criteria_without_a_verification_method(speclint):
    child = CHILD.replace("    verification: {method: analysis}\n", "")
    text = spec(ROOT, child, loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL608") == [at(text, "id: R-1")], findings_of(run)


def _with_evidence(*paths: str) -> str:
    listed = ", ".join(f'"{p}"' for p in paths)
    return CHILD.replace("{method: analysis}", f"{{method: test, evidence: [{listed}]}}")


def test_evidence_that_exists_is_quiet(speclint, tmp_path):
    (tmp_path / "bench").mkdir()
    (tmp_path / "bench" / "run.csv").write_text("t,y\n")
    run = speclint({"a.yaml": spec(ROOT, _with_evidence("bench/run.csv", "bench"), loops=LOOP)})
    assert run.codes == [], findings_of(run)


def test_missing_evidence_at_its_item(speclint):
    text = spec(ROOT, _with_evidence("bench/gone.csv"), loops=LOOP)
    run = speclint({"a.yaml": text})
    assert places(run, "SL609") == [at(text, '"bench/gone.csv"')], findings_of(run)


def test_evidence_is_relative_to_the_configuration_folder(speclint, tmp_path):
    (tmp_path / "speclint.toml").write_text('paths = ["specs"]\n')
    (tmp_path / "bench.csv").write_text("t,y\n")
    run = speclint({"specs/a.yaml": spec(ROOT, _with_evidence("bench.csv"), loops=LOOP)})
    assert run.codes == [], findings_of(run)


@pytest.mark.parametrize(
    ("path", "why"),
    [
        ("/etc/passwd", "is an absolute path"),
        ("C:/bench/run.csv", "is an absolute path"),
        ("../outside.csv", "leads out of the repository"),
        ("bench/../../outside.csv", "leads out of the repository"),
    ],
)
def test_evidence_outside_the_repository_is_refused(speclint, tmp_path, path, why):
    run = speclint({"a.yaml": spec(ROOT, _with_evidence(path), loops=LOOP)})
    assert run.codes == ["SL610"], findings_of(run)
    assert messages(run, "SL610")[0].endswith(why)


@pytest.mark.skipif(os.name == "nt", reason="symbolic links need privileges on Windows")
def test_evidence_through_a_symbolic_link_out_of_the_repository(speclint, tmp_path):
    repo = tmp_path / "repo"
    repo.mkdir()
    (tmp_path / "secret.csv").write_text("x\n")
    (repo / "link.csv").symlink_to(tmp_path / "secret.csv")
    (repo / "speclint.toml").write_text("")
    text = spec(ROOT, _with_evidence("link.csv"), loops=LOOP)
    run = speclint({"repo/a.yaml": text}, "--config", "repo/speclint.toml")
    assert "SL610" in run.codes, findings_of(run)


def test_trace_findings_sort_with_the_others(speclint):
    child = CHILD.replace("[SYS-1]", "[SYS-9]").replace(
        "    verification: {method: analysis}\n", ""
    )
    run = speclint({"a.yaml": spec(ROOT, child, loops=LOOP)})
    lines = [(f["line"], f["column"]) for f in run.report["findings"]]
    assert lines == sorted(lines)
    assert set(run.codes) == {"SL603", "SL606", "SL608"}, findings_of(run)


# -- the strongly connected components, against their definition


def _reach(edges: dict[str, tuple[str, ...]], start: str) -> set[str]:
    seen, todo = set(), [start]
    while todo:
        for succ in edges[todo.pop()]:
            if succ not in seen:
                seen.add(succ)
                todo.append(succ)
    return seen


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 7), st.integers(0, 7)), max_size=20))
def test_components_are_the_mutually_reachable_sets(pairs):
    nodes = [f"N{i}" for i in range(8)]
    edges = {n: tuple(sorted({f"N{b}" for a, b in pairs if f"N{a}" == n})) for n in nodes}
    reach = {n: _reach(edges, n) for n in nodes}
    expected = {
        frozenset({m for m in nodes if m == n or (m in reach[n] and n in reach[m])}) for n in nodes
    }
    assert {frozenset(g) for g in strongly_connected(edges)} == expected


def test_a_long_chain_does_not_hit_the_recursion_limit():
    edges = {f"N{i}": (f"N{i + 1}",) for i in range(5000)}
    edges["N5000"] = ("N0",)
    assert [len(g) for g in strongly_connected(edges)] == [5001]


@pytest.mark.parametrize(
    ("value", "shown"),
    [(0, "0"), (7, "7"), (-3, "-3"), ((1, 2), "0.5"), ((-1, 40), "-0.025"), ((1, 3), "1/3")],
)
def test_exact_numbers_are_written_without_rounding(value, shown):
    from fractions import Fraction

    x = Fraction(*value) if isinstance(value, tuple) else value
    assert exact(x) == shown
    assert Fraction(shown) == x  # the text reads back to the same rational
