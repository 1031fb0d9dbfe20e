"""The console report's batched printing writes exactly what rich writes line by line.

The reference is rich itself: each line printed with its own ``Console.print`` call, as the
report did before it batched them (the outside library's output, not ours).
"""

from __future__ import annotations

import io
import os
import shutil
from pathlib import Path

import pytest
from rich.console import Console
from rich.text import Text

from conftest import REPO
from speclint.discover import find_config
from speclint.pipeline import Options, run
from speclint.report import Settings
from speclint.report import console as report


@pytest.fixture(scope="module")
def demo_result(tmp_path_factory: pytest.TempPathFactory):
    root = tmp_path_factory.mktemp("demo")
    shutil.copytree(REPO / "examples", root / "examples")
    (root / "pyproject.toml").write_text('[tool.speclint]\npaths = ["examples"]\n')
    here = Path.cwd()
    os.chdir(root)
    try:
        return run(find_config(root, None), [], root, Options(use_cache=False))
    finally:
        os.chdir(here)


def _reference(result, settings: Settings) -> str:
    buffer = io.StringIO()
    console = Console(  # rich as the report used it: one print per line
        file=buffer,
        force_terminal=settings.color,
        no_color=not settings.color,
        color_system="standard" if settings.color else None,
        width=settings.width or 100_000,
        soft_wrap=settings.width is None,
        highlight=False,
        markup=False,
        emoji=False,
    )
    report._findings(console, result)
    report._loops(console, result)
    report._summary(console, result)
    return buffer.getvalue()


@pytest.mark.parametrize("color", [False, True])
@pytest.mark.parametrize("width", [None, 80, 50])
def test_batched_output_is_rich_line_by_line(demo_result, color, width):
    settings = Settings("0", color=color, width=width)
    assert report.render(demo_result, settings) == _reference(demo_result, settings)


def test_a_tab_goes_through_rich():
    # rich expands tabs; the plain fast path must not write one raw.
    buffer = io.StringIO()
    batched = report._Batched(plain=True, file=buffer, width=100_000, soft_wrap=True)
    batched.print(Text("a\tb"))
    batched.flush_lines()
    reference = io.StringIO()
    Console(file=reference, width=100_000, soft_wrap=True).print(Text("a\tb"))
    assert buffer.getvalue() == reference.getvalue()
    assert "\t" not in buffer.getvalue()
