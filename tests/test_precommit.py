"""speclint as a pre-commit hook, run for real: pre-commit installs this checkout into its
own environment and runs the hook on commits to a temporary spec repository.

Slow (pre-commit builds a virtual environment and installs speclint with its
dependencies), so it carries the ``slow`` mark: ``pytest -m "not slow"`` leaves it out.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import REPO, SPLIT_SPECS

pytestmark = pytest.mark.slow

LOOPS, REQUIREMENTS, OTHER = SPLIT_SPECS


def _env(tmp_path: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "GIT_DIR")}
    gitconfig = tmp_path / "gitconfig"
    gitconfig.write_text("[init]\n\tdefaultBranch = main\n", encoding="utf-8")
    env.update(
        GIT_CONFIG_GLOBAL=str(gitconfig),  # the user's own settings (signing, hooks) stay out
        GIT_CONFIG_NOSYSTEM="1",
        GIT_AUTHOR_NAME="Spec Author",
        GIT_AUTHOR_EMAIL="author@example.invalid",
        GIT_COMMITTER_NAME="Spec Author",
        GIT_COMMITTER_EMAIL="author@example.invalid",
        PRE_COMMIT_HOME=str(tmp_path / "pre-commit-home"),
        # The installed git hook finds pre-commit through the interpreter running the tests.
        PATH=f"{Path(sys.executable).parent}{os.pathsep}{env.get('PATH', '')}",
    )
    return env


def _git(cwd: Path, env: dict[str, str], *args: str) -> str:
    done = subprocess.run(
        ["git", *args], cwd=cwd, env=env, capture_output=True, text=True, timeout=120
    )
    assert done.returncode == 0, f"git {' '.join(args)}: {done.stderr}"
    return done.stdout


def _snapshot(dest: Path, env: dict[str, str]) -> str:
    """This working tree, committed or not, as a git repository; its commit SHA.

    The hook repository must be a git repository at a fixed revision; a snapshot makes the
    test check the code under test rather than the last commit.
    """
    listed = _git(REPO, env, "ls-files", "-z", "--cached", "--others", "--exclude-standard")
    for name in filter(None, listed.split("\0")):
        source, target = REPO / name, dest / name
        target.parent.mkdir(parents=True, exist_ok=True)
        if source.is_symlink():  # speclint/schemas links to the top-level schemas/
            target.symlink_to(source.readlink())
        elif source.is_file():
            shutil.copy2(source, target)
    _git(dest, env, "init", "-q")
    _git(dest, env, "add", "-A")
    _git(dest, env, "commit", "-q", "-m", "snapshot for the pre-commit test")
    return _git(dest, env, "rev-parse", "HEAD").strip()


@pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")
def test_hook_checks_the_changed_files_against_the_whole_spec_set(tmp_path):
    if not (REPO / ".git").exists():
        pytest.skip("the source tree is not a git checkout, so it cannot serve as a hook repo")
    env = _env(tmp_path)
    hook_repo = tmp_path / "hook-repo"
    hook_repo.mkdir()
    sha = _snapshot(hook_repo, env)

    specs_repo = tmp_path / "specs-repo"
    (specs_repo / "specs").mkdir(parents=True)
    (specs_repo / "specs" / "loops.yaml").write_text(LOOPS, encoding="utf-8")
    (specs_repo / "specs" / "requirements.yaml").write_text(REQUIREMENTS, encoding="utf-8")
    (specs_repo / "specs" / "other.yaml").write_text(OTHER, encoding="utf-8")
    (specs_repo / "speclint.toml").write_text('paths = ["specs"]\n', encoding="utf-8")
    (specs_repo / ".pre-commit-config.yaml").write_text(
        f"repos:\n  - repo: {hook_repo.as_posix()}\n    rev: {sha}\n    hooks:\n"
        "      - id: speclint\n",
        encoding="utf-8",
    )
    _git(specs_repo, env, "init", "-q")
    _git(specs_repo, env, "add", "-A")
    _git(specs_repo, env, "commit", "-q", "-m", "specs before the hook")

    def pre_commit(*args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run(
            [sys.executable, "-m", "pre_commit", *args],
            cwd=specs_repo,
            env=env,
            capture_output=True,
            text=True,
            timeout=1200,  # the first call builds the hook's environment
        )

    done = pre_commit("install-hooks")
    assert done.returncode == 0, done.stdout + done.stderr
    done = pre_commit("install")
    assert done.returncode == 0, done.stdout + done.stderr

    def commit(message: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run(
            ["git", "commit", "-m", message],
            cwd=specs_repo,
            env=env,
            capture_output=True,
            text=True,
            timeout=600,
        )

    # A change to the requirements file: its link to the loop next door resolves, and the
    # broken file it does not touch is none of this commit's business.
    requirements = specs_repo / "specs" / "requirements.yaml"
    requirements.write_text(
        REQUIREMENTS.replace("  - id: SYS-1\n", "  - id: SYS-1\n    title: Belt pitch\n"),
        encoding="utf-8",
    )
    _git(specs_repo, env, "add", "specs/requirements.yaml")
    done = commit("title for SYS-1")
    output = done.stdout + done.stderr
    assert done.returncode == 0, output
    assert "speclint" in output and "Passed" in output
    assert "SL201" not in output and "SL311" not in output

    # Renaming the loop breaks the link from the requirements file: the commit is refused
    # and the finding is shown where the broken link stands.
    loops = specs_repo / "specs" / "loops.yaml"
    loops.write_text(LOOPS.replace("belt:", "conveyor:"), encoding="utf-8")
    _git(specs_repo, env, "add", "specs/loops.yaml")
    done = commit("rename the belt loop")
    output = done.stdout + done.stderr
    assert done.returncode != 0, output
    assert "Failed" in output
    assert "specs/requirements.yaml:4:11: error SL311" in output
    assert "SL201" not in output
    log = _git(specs_repo, env, "log", "--format=%s")
    assert log.splitlines() == ["title for SYS-1", "specs before the hook"]
