"""The analysis cache: one JSON file per loop, keyed by everything its verdicts depend on,
and one per spec file, keyed by its bytes, holding its findings up to the build stage and
the model built from it.

The key hashes the loop's model and its requirements exactly as built (expressions as
written, exact numbers, and the places findings point at, so a finding never comes back
with a stale line number) together with the speclint version. An entry that cannot be
read, parsed, or does not carry its own key is ignored and rewritten: the cache is never
trusted over a fresh analysis and never a reason to fail. Entries are written to a
temporary file and renamed, so concurrent runs cannot leave half an entry behind.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import hmac
import json
import os
import shutil
import tempfile
from collections.abc import Callable
from fractions import Fraction
from pathlib import Path
from typing import Any

from speclint import __version__, model
from speclint.findings import Finding, Location, Severity
from speclint.model import Loop, Requirement, SpecFile
from speclint.results import CriterionResult, LoopResult, RequirementResult

# 3: a spec file's entry holds its built model, not only its validation findings.
ENTRY_FORMAT = 3


@functools.cache
def code_fingerprint() -> str:
    """A hash of speclint's own code and schemas (about 2 ms): a working tree whose analysis
    changed gets fresh entries even though its version number did not."""
    digest = hashlib.sha256(__version__.encode())
    package = Path(__file__).resolve().parent
    try:
        for path in sorted([*package.rglob("*.py"), *package.rglob("*.json")]):
            digest.update(str(path.relative_to(package)).encode() + b"\0" + path.read_bytes())
    except OSError:
        digest.update(b"unreadable")  # still a key; an installed package does not change
    return digest.hexdigest()


def file_key(shown: str, raw: bytes) -> str:
    """The key of a spec file's validation: its bytes, the path findings point at, the code."""
    digest = hashlib.sha256(f"validation\0{code_fingerprint()}\0{shown}\0".encode())
    digest.update(raw)
    return digest.hexdigest()


def loop_key(loop: Loop, requirements: list[Requirement]) -> str:
    """A hash of all the analysis of `loop` depends on, and of speclint's code.

    The model is hashed through the dataclasses' generated repr, which lists every field
    (Fractions exactly, strings escaped, dicts in their insertion order, which the build
    stage makes the file's order): a tenth of the cost of asdict and json.dumps, which
    deep-copied every record (1 s of a 1.7 s warm run over 1,000 loops). A model class
    with a hand-written __repr__ that leaves out data would need its own entry here.
    """
    digest = hashlib.sha256(f"{code_fingerprint()}\0{ENTRY_FORMAT}\0".encode())
    digest.update(repr(loop).encode())
    for req in requirements:
        digest.update(b"\0")
        digest.update(repr(req).encode())
    return digest.hexdigest()


class Cache:
    """Loop analyses on disk under `folder`; every failure degrades to a cache miss."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder

    def get(self, key: str) -> tuple[LoopResult, list[RequirementResult], list[Finding]] | None:
        try:
            entry = self._read(key)
            if entry is None:
                return None
            loop = _loop_from(entry["loop"])
            reqs = [_requirement_from(r) for r in entry["requirements"]]
            found = [_finding_from(f) for f in entry["findings"]]
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        return loop, reqs, found

    def get_file(self, key: str) -> tuple[list[Finding], SpecFile | None] | None:
        """A spec file's findings from loading, validating and building, and the model
        built (None when its errors left nothing to build), stored under `key` (the file's
        bytes, its path and the code)."""
        try:
            entry = self._read(key, object_hook=_revive)
            if entry is None:
                return None
            found = [_finding_from(f) for f in entry["findings"]]
            spec = _spec_from(entry["spec"])
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        return found, spec

    def put_file(self, key: str, found: list[Finding], spec: SpecFile | None) -> None:
        entry = {
            "format": ENTRY_FORMAT,
            "key": key,
            "findings": [_finding_to(f) for f in found],
            "spec": spec,
        }
        self._write(key, entry)

    def put(
        self, key: str, loop: LoopResult, reqs: list[RequirementResult], found: list[Finding]
    ) -> None:
        entry = {
            "format": ENTRY_FORMAT,
            "key": key,
            "loop": loop,
            "requirements": reqs,
            "findings": [_finding_to(f) for f in found],
        }
        self._write(key, entry)

    def _write(self, key: str, entry: dict[str, Any]) -> None:
        try:
            body = json.dumps(entry, allow_nan=True, default=_to_json)
            text = f"{_seal(body)}\n{body}"
            path = self._path(key)
            fd, tmp = _create_beside(path)
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as handle:
                    handle.write(text)
                self._ignore_in_git()
                try:
                    tmp.replace(path)
                except IsADirectoryError:
                    # Something else's folder where an entry belongs: entries are
                    # rewritten, and this name (a hash inside our own folder) is ours.
                    shutil.rmtree(path)
                    tmp.replace(path)
            except BaseException:
                tmp.unlink(missing_ok=True)
                raise
        except (OSError, TypeError, ValueError):
            # A read-only checkout still gets its answers, only slower; a value JSON cannot
            # carry is not kept either.
            return

    def _read(
        self, key: str, object_hook: Callable[[dict[str, Any]], Any] | None = None
    ) -> dict[str, Any] | None:
        """The entry under `key` if this machine wrote it; None for anything else."""
        seal, _, body = self._path(key).read_text(encoding="utf-8").partition("\n")
        if not hmac.compare_digest(seal, _seal(body)):
            return None  # not written here: perhaps committed by someone, never trusted
        entry = json.loads(body, object_hook=object_hook)
        if not isinstance(entry, dict) or entry.get("key") != key:
            return None
        if entry.get("format") != ENTRY_FORMAT:
            return None
        return entry

    def _path(self, key: str) -> Path:
        return self.folder / f"v{ENTRY_FORMAT}" / key[:2] / f"{key}.json"

    def _ignore_in_git(self) -> None:
        marker = self.folder / ".gitignore"
        if not marker.exists():
            marker.write_text("# written by speclint: the analysis cache is not for git\n*\n")


# Folders made for entries by this process (a worker writes hundreds of entries; asking
# for each folder every time was a fifth of writing an entry).
_MADE: set[Path] = set()


def _create_beside(path: Path) -> tuple[int, Path]:
    """A new empty file next to `path`, open for writing: named for this process and
    created exclusively (a name left by a crashed run with the same number is not reused)."""
    folder = path.parent
    if folder not in _MADE:
        folder.mkdir(parents=True, exist_ok=True)
        _MADE.add(folder)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL
    try:
        return os.open(tmp, flags, 0o600), tmp
    except FileExistsError:
        fd, name = tempfile.mkstemp(dir=folder, prefix=".entry.", suffix=".tmp")
        return fd, Path(name)
    except FileNotFoundError:  # the folder was deleted since: make it again
        _MADE.discard(folder)
        folder.mkdir(parents=True, exist_ok=True)
        _MADE.add(folder)
        return os.open(tmp, flags, 0o600), tmp


def _seal(body: str) -> str:
    return hmac.new(_machine_secret(), body.encode("utf-8"), hashlib.sha256).hexdigest()


@functools.cache
def _machine_secret() -> bytes:
    """A random key kept in the user's own cache folder, outside any repository.

    Entries are sealed with it, so an entry that arrives with the repository (committed in
    a pull request, say, with a verdict of its author's choosing) fails its seal and is
    analysed afresh: the cache can save time, never change an answer. Where no key can be
    kept, a key for this run alone still seals what this run writes.
    """
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    path = Path(base) / "speclint" / "seal-key"
    try:
        secret = path.read_bytes()
        if len(secret) >= 32:
            return secret
    except OSError:
        pass
    secret = os.urandom(32)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "wb") as handle:
            handle.write(secret)
    except FileExistsError:
        try:  # another run made it first: use theirs, so both runs share entries
            kept = path.read_bytes()
            return kept if len(kept) >= 32 else secret
        except OSError:
            return secret
    except OSError:
        return secret
    return secret


# Exact numbers in JSON: {"\x00": [numerator, denominator]}; a record of the spec model:
# its fields and {"\x01": class name}. No key of a spec can hold a control character (the
# load stage refuses them), so nothing else reads so.
_FRACTION_TAG = "\x00"
_RECORD_TAG = "\x01"
# Every record class of the spec model (a new one is included by being there), and the
# places they hold.
_MODEL: dict[str, type] = {
    cls.__name__: cls
    for cls in (Location, *vars(model).values())
    if isinstance(cls, type)
    and dataclasses.is_dataclass(cls)
    and cls.__module__
    in (
        model.__name__,
        Location.__module__,
    )
}


def _to_json(value: Any) -> Any:
    """What json cannot write itself: an exact number with the fraction tag; a record of
    the spec model as its fields with its class name (read back by _revive); a result
    record as the dict of its fields (json calls this again for records inside it; a
    tenth of the cost of dataclasses.asdict, which deep-copies every value first)."""
    kind = type(value)
    if kind is Location:  # nine records in ten: the places of keys
        return {
            "path": value.path,
            "line": value.line,
            "column": value.column,
            _RECORD_TAG: "Location",
        }
    if kind is Fraction:
        return {_FRACTION_TAG: [value.numerator, value.denominator]}
    names = _FIELD_NAMES.get(kind)
    if names is None:
        if not dataclasses.is_dataclass(value) or isinstance(value, type):
            raise TypeError(f"{kind.__name__} is not kept in the cache")
        names = _FIELD_NAMES[kind] = tuple(f.name for f in dataclasses.fields(value))
    fields = {name: getattr(value, name) for name in names}
    if _MODEL.get(kind.__name__) is kind:
        fields[_RECORD_TAG] = kind.__name__
    return fields


# The field names of each record class met so far (dataclasses.fields is slow to ask).
_FIELD_NAMES: dict[type, tuple[str, ...]] = {}


def _revive(d: dict[str, Any]) -> Any:
    name = d.pop(_RECORD_TAG, None)
    if name == "Location":  # nine records in ten: the places of keys
        return Location(d["path"], d["line"], d["column"])
    if name is not None:
        # The model holds tuples, never lists: JSON's arrays become tuples again.
        return _MODEL[name](**{k: tuple(v) if isinstance(v, list) else v for k, v in d.items()})
    if _FRACTION_TAG in d:
        num, den = d[_FRACTION_TAG]
        if not isinstance(num, int) or not isinstance(den, int) or den <= 0:
            raise TypeError("not a fraction")
        return Fraction(num, den)
    return d


def _spec_from(value: Any) -> SpecFile | None:
    if value is not None and not isinstance(value, SpecFile):
        raise TypeError("not a spec file")
    return value


def _finding_to(f: Finding) -> dict[str, Any]:
    loc = f.location
    return {
        "rule": f.rule,
        "severity": f.severity.value,
        "message": f.message,
        "location": [loc.path, loc.line, loc.column],
        "hint": f.hint,
        "subject": f.subject,
    }


def _finding_from(d: dict[str, Any]) -> Finding:
    path, line, column = d["location"]
    return Finding(
        str(d["rule"]),
        Severity(d["severity"]),
        str(d["message"]),
        Location(str(path), line, column),
        d["hint"],
        d["subject"],
    )


def _intervals(value: Any) -> tuple[tuple[float, float], ...] | None:
    if value is None:
        return None
    return tuple((float(lo), float(hi)) for lo, hi in value)


def _loop_from(d: dict[str, Any]) -> LoopResult:
    d = dict(d)
    d["stable_gains"] = _intervals(d["stable_gains"])
    return LoopResult(**d)


def _criterion_from(d: dict[str, Any]) -> CriterionResult:
    d = dict(d)
    d["admissible_gains"] = _intervals(d["admissible_gains"])
    return CriterionResult(**d)


def _requirement_from(d: dict[str, Any]) -> RequirementResult:
    d = dict(d)
    d["criteria"] = tuple(_criterion_from(c) for c in d["criteria"])
    d["admissible_gains"] = _intervals(d["admissible_gains"])
    return RequirementResult(**d)
