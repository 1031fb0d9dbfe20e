"""The analysis cache: one JSON file per loop, keyed by everything its verdicts depend on,
and one per spec file, keyed by its bytes, holding the file as loading and validation left it.

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

from speclint import __version__
from speclint.findings import Finding, Location, Severity
from speclint.load import Document
from speclint.model import Loop, Requirement
from speclint.results import CriterionResult, LoopResult, RequirementResult

# 2: a spec file's entry holds the loaded document, not only its validation findings.
ENTRY_FORMAT = 2


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

    def get_file(self, key: str, shown: str, text: str) -> tuple[list[Finding], Document] | None:
        """A spec file as loading and validation left it, with their findings, stored under
        `key` (the file's bytes): a file that has not changed is neither parsed nor validated
        again, which is most of a warm run."""
        try:
            entry = self._read(key, object_hook=_revive)
            if entry is None:
                return None
            found = [_finding_from(f) for f in entry["findings"]]
            doc = _document_from(entry["document"], shown, text)
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        return found, doc

    def put_file(self, key: str, found: list[Finding], doc: Document) -> None:
        """Keep a loaded and validated file (its data: the load stage's strings, ints,
        booleans, nulls and Fractions under string keys, all of which JSON carries)."""
        entry = {
            "format": ENTRY_FORMAT,
            "key": key,
            "findings": [_finding_to(f) for f in found],
            "document": _document_to(doc),
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
            path.parent.mkdir(parents=True, exist_ok=True)
            if path.is_dir() and not path.is_symlink():
                # Something else's folder where an entry belongs: entries are rewritten,
                # and this name (a hash inside our own folder) is ours.
                shutil.rmtree(path)
            self._ignore_in_git()
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".entry.", suffix=".tmp")
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as handle:
                    handle.write(text)
                Path(tmp).replace(path)
            finally:
                Path(tmp).unlink(missing_ok=True)
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


DataPath = tuple[str | int, ...]


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


# A loaded file's exact numbers in JSON: {"\x00": [numerator, denominator]}. No key of a
# spec can be NUL (the load stage refuses control characters), so nothing else reads so.
_FRACTION_TAG = "\x00"


def _to_json(value: Any) -> Any:
    """What json cannot write itself: a result record as the dict of its fields (json
    calls this again for records inside it; a tenth of the cost of dataclasses.asdict,
    which deep-copies every value first), an exact number with the fraction tag."""
    if isinstance(value, Fraction):
        return {_FRACTION_TAG: [value.numerator, value.denominator]}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: getattr(value, f.name) for f in dataclasses.fields(value)}
    raise TypeError(f"{type(value).__name__} is not kept in the cache")


def _revive(d: dict[str, Any]) -> Any:
    if _FRACTION_TAG in d:
        num, den = d[_FRACTION_TAG]
        if not isinstance(num, int) or not isinstance(den, int) or den <= 0:
            raise TypeError("not a fraction")
        return Fraction(num, den)
    return d


def _marks_to(marks: dict[DataPath, tuple[int, int]]) -> list[Any]:
    return [[list(path), line, column] for path, (line, column) in marks.items()]


def _marks_from(rows: Any) -> dict[DataPath, tuple[int, int]]:
    # Sealed entries are our own writing: the shape is checked only as far as a wrong one
    # would raise (a list inside a path is unhashable), which costs nothing per mark.
    return {tuple(path): (line, column) for path, line, column in rows}


def _document_to(doc: Document) -> dict[str, Any]:
    return {
        "data": doc.data,
        "value_marks": _marks_to(doc.value_marks),
        "key_marks": _marks_to(doc.key_marks),
        "plain_text": [[list(path), text] for path, text in doc.plain_text.items()],
        "flagged": sorted(([*p] for p in doc.flagged), key=repr),
    }


def _document_from(d: dict[str, Any], shown: str, text: str) -> Document:
    plain = {tuple(path): str(written) for path, written in d["plain_text"]}
    return Document(
        shown,
        text,
        d["data"],
        _marks_from(d["value_marks"]),
        _marks_from(d["key_marks"]),
        plain,
        {_data_path(p) for p in d["flagged"]},
    )


def _data_path(value: Any) -> DataPath:
    if not isinstance(value, list) or not all(
        isinstance(p, str | int) and not isinstance(p, bool) for p in value
    ):
        raise TypeError("not a data path")
    return tuple(value)


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
