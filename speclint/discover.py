"""Discover stage: the configuration, and the spec files a run covers.

Configuration comes from ``speclint.toml`` (top-level keys) or the ``[tool.speclint]``
table of ``pyproject.toml``, whichever is found first walking up from the working
directory; ``--config`` names one directly. Paths in it are relative to its folder.

A file named on the command line is always checked. A folder is searched for files
matching the include globs; there, a YAML file that does not declare ``speclint:`` at its
top level is someone else's YAML (a CI workflow, a compose file) and is passed over.
"""

from __future__ import annotations

import fnmatch
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from speclint.findings import Severity

CONFIG_KEYS = {
    "paths": "list of files or folders to check when none are given",
    "include": "file name globs that select spec files inside folders",
    "exclude": "globs (on paths relative to the config folder) to leave out",
    "fail_on": "lowest severity that makes the run fail: error, warning or note",
    "cache_dir": "folder for the analysis cache",
    "id_pattern": "regular expression every requirement ID must match",
}
_SKIP_DIRS = {".git", ".hg", ".svn", "node_modules", ".venv", "venv", "__pycache__", ".tox"}
_DECLARES_SPEC = re.compile(r"^speclint[ \t]*:", re.MULTILINE)


class ConfigError(Exception):
    """The configuration or the command line cannot be used; the run stops with exit 2."""


@dataclass(frozen=True, slots=True)
class Config:
    root: Path
    source: Path | None = None
    paths: tuple[str, ...] = (".",)
    include: tuple[str, ...] = ("*.yaml", "*.yml")
    exclude: tuple[str, ...] = ()
    fail_on: Severity = Severity.ERROR
    cache_dir: str = ".speclint_cache"
    id_pattern: str | None = None
    extra: dict[str, object] = field(default_factory=dict, compare=False)


def find_config(start: Path, explicit: Path | None = None) -> Config:
    """The configuration in force for a run started in `start`."""
    if explicit is not None:
        if not explicit.is_file():
            raise ConfigError(f"{explicit}: no such configuration file")
        table = _read_table(explicit)
        if table is None:
            raise ConfigError(f"{explicit}: holds no [tool.speclint] table")
        return _config(explicit.parent, explicit, table)
    for folder in (start, *start.parents):
        for name in ("speclint.toml", "pyproject.toml"):
            candidate = folder / name
            if candidate.is_file():
                table = _read_table(candidate)
                if table is not None:
                    return _config(folder, candidate, table)
    return Config(root=start)


def _read_table(path: Path) -> dict[str, object] | None:
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot be read: {exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML: {exc}") from None
    if path.name == "speclint.toml":
        return data
    table = data.get("tool", {}).get("speclint")
    if table is not None and not isinstance(table, dict):
        raise ConfigError(f"{path}: [tool.speclint] must be a table")
    return table


def _strings(source: Path, key: str, value: object) -> tuple[str, ...]:
    if isinstance(value, str):
        return (value,)
    if isinstance(value, list) and all(isinstance(v, str) for v in value):
        return tuple(value)
    raise ConfigError(f"{source}: {key} must be a string or a list of strings")


def _config(root: Path, source: Path, table: dict[str, object]) -> Config:
    unknown = sorted(set(table) - set(CONFIG_KEYS))
    if unknown:
        known = ", ".join(sorted(CONFIG_KEYS))
        raise ConfigError(f"{source}: unknown setting {unknown[0]!r} (known: {known})")
    kwargs: dict[str, object] = {}
    for key in ("paths", "include", "exclude"):
        if key in table:
            kwargs[key] = _strings(source, key, table[key])
    if "fail_on" in table:
        kwargs["fail_on"] = parse_severity(str(table["fail_on"]), f"{source}: fail_on")
    for key in ("cache_dir", "id_pattern"):
        if key in table:
            if not isinstance(table[key], str):
                raise ConfigError(f"{source}: {key} must be a string")
            kwargs[key] = table[key]
    if "id_pattern" in kwargs:
        try:
            re.compile(str(kwargs["id_pattern"]))
        except re.error as exc:
            raise ConfigError(
                f"{source}: id_pattern is not a valid regular expression: {exc}"
            ) from None
    return Config(root=root, source=source, **kwargs)  # type: ignore[arg-type]


def parse_severity(text: str, what: str) -> Severity:
    try:
        return Severity(text)
    except ValueError:
        raise ConfigError(f"{what}: {text!r} is not one of error, warning, note") from None


def spec_files(config: Config, given: list[str], cwd: Path) -> tuple[list[Path], list[str]]:
    """The spec files to check, sorted, and the given or configured paths that held none."""
    if given:
        targets = [(cwd / g) for g in given]
    else:
        targets = [(config.root / p) for p in config.paths]
    found: dict[Path, None] = {}
    empty: list[str] = []
    for target in targets:
        if target.is_file():
            found[target.resolve()] = None
            continue
        if not target.is_dir():
            raise ConfigError(f"{display_path(target, cwd)}: no such file or folder")
        before = len(found)
        for path in _walk(target, config):
            found[path.resolve()] = None
        if len(found) == before:
            empty.append(display_path(target, cwd))
    return sorted(found, key=str), empty


def _walk(folder: Path, config: Config) -> list[Path]:
    out = []
    for dirpath, dirnames, filenames in os.walk(folder):
        dirnames[:] = sorted(d for d in dirnames if d not in _SKIP_DIRS and not d.startswith("."))
        for name in sorted(filenames):
            if not any(fnmatch.fnmatch(name, pattern) for pattern in config.include):
                continue
            path = Path(dirpath) / name
            relative = _relative_posix(path, config.root)
            if any(fnmatch.fnmatch(relative, pattern) for pattern in config.exclude):
                continue
            if _declares_spec(path):
                out.append(path)
    return out


def _declares_spec(path: Path) -> bool:
    try:
        with path.open("rb") as handle:
            head = handle.read(65536)
    except OSError:
        return True  # let the load stage report why it cannot be read
    return bool(_DECLARES_SPEC.search(head.decode("utf-8", errors="replace")))


def _relative_posix(path: Path, root: Path) -> str:
    try:
        return path.resolve().relative_to(root.resolve()).as_posix()
    except ValueError:
        return path.as_posix()


def display_path(path: Path, cwd: Path) -> str:
    """The path as reports show it: relative to the working directory when inside it."""
    return _relative_posix(path, cwd)
