"""Where a reported path lives in the repository: machine formats need repository-relative
paths (code-scanning uploads and CI annotations resolve them against the checkout root),
while findings carry paths relative to the working directory.
"""

from __future__ import annotations

from pathlib import Path, PurePosixPath


def repository_root(cwd: Path) -> Path | None:
    """The nearest folder at or above `cwd` that holds a ``.git`` (folder or worktree file)."""
    for folder in (cwd, *cwd.parents):
        if (folder / ".git").exists():
            return folder
    return None


def repository_path(shown: str, cwd: Path, root: Path | None) -> str | None:
    """`shown` (a report path) relative to `root`, in POSIX form; None when it lies outside.

    Without a repository the working directory stands in for the root, so a run outside
    git still gets relative paths.
    """
    base = (root or cwd).resolve()
    path = Path(shown)
    absolute = path if path.is_absolute() else cwd.resolve() / path
    try:
        relative = absolute.relative_to(base)
    except ValueError:
        return None
    return PurePosixPath(relative.as_posix()).as_posix()
