"""`speclint stamp`: record a review in the spec files, changing nothing else.

The YAML is never dumped again (that would lose comments, quoting, key order, line
endings): the text is edited in place. PyYAML's pure-Python composer gives each node's
start and end as a character offset into the text; a refreshed review replaces just the
three scalar values of an existing `reviewed` mapping (block or flow), and a new one is
inserted as a block mapping after the line where the requirement's last value ends, in
the requirement's indentation and the file's line ending. A requirement written in flow
style (`- {id: …}`) is refused: text spliced into it cannot keep its layout.

Safety nets, in order: the edited text must load, validate and build again, and its data
must equal the old data with only the `reviewed` records changed; the new bytes go to a
temporary file in the same folder (same permission bits), and just before the rename the
file on disk must still hold the bytes and modification time read at the start. A check
and a rename are two steps, so an editor saving in between those microseconds is not
caught; anything slower is.
"""

from __future__ import annotations

import copy
import datetime
import difflib
import os
import re
import stat
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from speclint import trace
from speclint.build import build, buildable
from speclint.discover import Config, display_path, spec_files
from speclint.load import MAX_FILE_BYTES, Document, read_spec
from speclint.model import SpecFile
from speclint.validate import validate

_DATE = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}\Z")
_KEYS = ("fingerprint", "by", "date")


class Refused(Exception):
    """A stamp that cannot be made safely; the message says why."""


@dataclass(frozen=True, slots=True)
class Outcome:
    id: str
    done: bool
    message: str


@dataclass(frozen=True, slots=True)
class Edit:
    start: int  # character offsets into the text; start == end inserts
    end: int
    text: str


@dataclass(slots=True)
class _File:
    path: Path
    shown: str
    raw: bytes
    mtime_ns: int
    document: Document | None = None
    problem: str | None = None
    # Requirement IDs to stamp here, with their position in `requirements` and the record.
    stamps: list[tuple[str, int, dict[str, str]]] = field(default_factory=list)


def check_date(text: str) -> str:
    """`text` if it is a real date written YYYY-MM-DD; raises ValueError otherwise."""
    if not _DATE.match(text):
        raise ValueError(f"{text!r} is not a date written YYYY-MM-DD")
    datetime.date.fromisoformat(text)  # raises on 2024-02-30
    return text


def check_name(text: str) -> str:
    """The reviewer's name, stripped; raises ValueError if it is empty or not printable."""
    name = text.strip()
    if not name:
        raise ValueError("the reviewer's name is empty")
    if not name.isprintable():
        raise ValueError("the reviewer's name holds a control character or line break")
    return name


def stamp(config: Config, cwd: Path, ids: list[str], by: str, date: str) -> list[Outcome]:
    """Write or refresh `reviewed` for each of `ids` in its spec file; one outcome per ID."""
    files, specs = _read_all(config, cwd)
    found = trace.index(specs, [])
    outcomes: dict[str, Outcome] = {}
    for rid in dict.fromkeys(ids):
        try:
            _plan(rid, files, found, by, date)
        except Refused as exc:
            outcomes[rid] = Outcome(rid, False, str(exc))
    for item in files:
        if not item.stamps:
            continue
        try:
            lines = _write(item)
        except Refused as exc:
            for rid, _, _ in item.stamps:
                outcomes[rid] = Outcome(rid, False, f"{item.shown}: {exc}; nothing written")
            continue
        for rid, _, record in item.stamps:
            where = f"{item.shown}:{lines[rid]}"
            outcomes[rid] = Outcome(rid, True, f"{where} (fingerprint {record['fingerprint']})")
    return [outcomes[rid] for rid in dict.fromkeys(ids)]


def _read_all(config: Config, cwd: Path) -> tuple[list[_File], list[SpecFile]]:
    files: list[_File] = []
    specs: list[SpecFile] = []
    for path in spec_files(config, [], cwd)[0]:
        shown = display_path(path, cwd)
        try:
            info = path.stat()
            if info.st_size > MAX_FILE_BYTES:
                files.append(_File(path, shown, b"", 0, problem="is larger than 1 MiB"))
                continue
            raw = path.read_bytes()
        except OSError as exc:
            files.append(_File(path, shown, b"", 0, problem=f"cannot be read ({exc.strerror})"))
            continue
        item = _File(path, shown, raw, info.st_mtime_ns)
        files.append(item)
        loaded = read_spec(shown, raw)
        doc = loaded.document
        if doc is None:
            first = loaded.findings[0] if loaded.findings else None
            item.problem = "cannot be parsed" + (f" ({first.message})" if first else "")
            continue
        validate(doc)
        if buildable(doc):
            item.document = doc
            specs.append(build(doc)[0])
        else:
            item.problem = "has errors at its top level (see speclint check)"
    return files, specs


def _plan(rid: str, files: list[_File], found: trace.Index, by: str, date: str) -> None:
    defs = [r for r in found.requirements if r.id == rid]
    broken = [b.location for b in found.broken_requirements if b.id == rid]
    places = [f"{r.location.path}:{r.location.line}" for r in defs]
    places += [f"{w.path}:{w.line}" for w in broken]
    if not places:
        known = sorted({r.id for r in found.requirements})
        close = difflib.get_close_matches(rid, known, n=1)
        msg = "no requirement of the spec set has this ID"
        if close:
            msg += f" (did you mean {close[0]!r}?)"
        unread = [f"{f.shown} {f.problem}" for f in files if f.problem]
        if unread:
            msg += "; note: " + "; ".join(unread)
        raise Refused(msg)
    if len(places) > 1:
        raise Refused(
            f"the ID is defined more than once ({', '.join(places)}); make it unique first"
        )
    if broken:
        raise Refused(f"the requirement at {places[0]} has errors; fix them first (speclint check)")
    req = defs[0]
    now = trace.current_fingerprint(req, found)
    if now is None:
        raise Refused(f"its loop {req.loop!r} is not defined or has errors; fix that first")
    item = next(f for f in files if f.shown == req.location.path)
    assert item.document is not None
    entries = item.document.data.get("requirements") or []
    index = next(i for i, e in enumerate(entries) if isinstance(e, dict) and e.get("id") == rid)
    item.stamps.append((rid, index, {"fingerprint": now, "by": by, "date": date}))


def _write(item: _File) -> dict[str, int]:
    """Make the item's stamps in its file; the line of each stamped requirement."""
    assert item.document is not None
    text = item.raw.decode("utf-8")  # a leading byte-order mark stays a character, and is kept
    root = _compose(text)  # once per file: the pure-Python composer takes ~3 s per MiB
    edits = []
    for _, index, record in item.stamps:
        edits.extend(review_edits(text, index, record, root))
    new_text = apply(text, edits)
    _confirm(item, new_text)
    new = new_text.encode("utf-8")
    if new != item.raw:
        write_if_unchanged(item.path, item.raw, item.mtime_ns, new)
    return {rid: int(_requirement_node(root, i).start_mark.line) + 1 for rid, i, _ in item.stamps}


def apply(text: str, edits: list[Edit]) -> str:
    """`text` with non-overlapping `edits` made, the last first so offsets stay valid."""
    for edit in sorted(edits, key=lambda e: (e.start, e.end), reverse=True):
        text = text[: edit.start] + edit.text + text[edit.end :]
    return text


def _compose(text: str) -> yaml.Node:
    # The pure-Python loader on purpose: its marks count characters of this very string.
    try:
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        raise Refused(f"cannot be parsed ({exc})") from None
    if not isinstance(node, yaml.MappingNode):
        raise Refused("the top level is not a mapping")
    return node


def _entry(mapping: yaml.MappingNode, key: str) -> tuple[yaml.Node, yaml.Node] | None:
    for k, v in mapping.value:
        if isinstance(k, yaml.ScalarNode) and k.value == key:
            return k, v
    return None


def _requirement_node(root: yaml.Node, index: int) -> yaml.MappingNode:
    assert isinstance(root, yaml.MappingNode)
    found = _entry(root, "requirements")
    if found is None or not isinstance(found[1], yaml.SequenceNode):
        raise Refused("holds no requirements list")
    items = found[1].value
    if not 0 <= index < len(items) or not isinstance(items[index], yaml.MappingNode):
        raise Refused("the requirement is not where it was read")
    node: yaml.MappingNode = items[index]
    return node


def review_edits(
    text: str, index: int, record: dict[str, str], root: yaml.Node | None = None
) -> list[Edit]:
    """The edits that write `record` as the `reviewed` of requirements[index] in `text`
    (`root`: the text's composed node graph, when the caller has it already)."""
    root = root if root is not None else _compose(text)
    req = _requirement_node(root, index)
    if req.flow_style:
        raise Refused(
            "the requirement is written in flow style ({...}); write it in block style "
            "(one key per line) to stamp it"
        )
    existing = _entry(req, "reviewed")
    if existing is not None:
        return _refresh(text, existing[1], record)
    return [_insert(text, req, record, _indent_step(req, root))]


def _quoted(value: str) -> str:
    # Always double-quoted: a plain 2024-05-01 is a date to YAML 1.1 readers, and a
    # fingerprint such as 123e4567 would read as a number.
    return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _refresh(text: str, node: yaml.Node, record: dict[str, str]) -> list[Edit]:
    if not isinstance(node, yaml.MappingNode):
        raise Refused("its reviewed value is not a mapping")
    edits = []
    for key in _KEYS:
        found = _entry(node, key)
        if found is None or not isinstance(found[1], yaml.ScalarNode):
            raise Refused(f"its reviewed mapping has no {key} value to replace")
        value = found[1]
        start, end = value.start_mark.index, value.end_mark.index
        old = text[start:end]
        # A block scalar (| or >) owns the line break after it: keep that.
        trailing = old[len(old.rstrip()) :]
        edits.append(Edit(start, end, _quoted(record[key]) + trailing))
    return edits


def _content_end(node: yaml.Node) -> int:
    """Where the last character of a node's own text is (block collections end too late:
    their end mark lies at the next token, past comments and blank lines)."""
    while isinstance(node, yaml.MappingNode | yaml.SequenceNode) and not node.flow_style:
        last = node.value[-1]
        node = last[1] if isinstance(node, yaml.MappingNode) else last
    return int(node.end_mark.index)


def _indent_step(*scopes: yaml.Node) -> int:
    """The file's own indentation step: how far a nested block mapping sits in from its
    key, looked for in each scope in turn (the requirement, then the whole file); 2 if
    none shows it."""
    for scope in scopes:
        todo = [scope]
        while todo:
            node = todo.pop(0)
            if isinstance(node, yaml.SequenceNode):
                todo.extend(node.value)
            if not isinstance(node, yaml.MappingNode):
                continue
            for key, value in node.value:
                nested = isinstance(value, yaml.MappingNode) and not value.flow_style
                if nested and value.value and not node.flow_style:
                    step = int(value.value[0][0].start_mark.column) - int(key.start_mark.column)
                    if step > 0:
                        return step
                todo.append(value)
    return 2


def _insert(text: str, req: yaml.MappingNode, record: dict[str, str], step: int) -> Edit:
    end = _content_end(req.value[-1][1])
    while end > 0 and text[end - 1] in " \t\r\n":
        end -= 1
    breaks = [i for i in (text.find("\r", end), text.find("\n", end)) if i >= 0]
    line_end = min(breaks) if breaks else len(text)
    if text.startswith("\r\n", line_end):
        newline = "\r\n"
    elif line_end < len(text):
        newline = text[line_end]
    else:
        newline = "\r\n" if "\r\n" in text else "\n"
    indent = " " * int(req.value[0][0].start_mark.column)
    inner = indent + " " * step
    lines = [f"{indent}reviewed:"] + [f"{inner}{key}: {_quoted(record[key])}" for key in _KEYS]
    return Edit(line_end, line_end, "".join(newline + line for line in lines))


def _confirm(item: _File, new_text: str) -> None:
    """The edited text must read back as the same spec with only the reviews changed."""
    assert item.document is not None
    loaded = read_spec(item.shown, new_text.encode("utf-8"))
    doc = loaded.document
    if doc is None:
        raise Refused("the edited text would not load again (please report this as a bug)")
    validate(doc)
    expected: Any = copy.deepcopy(item.document.data)
    for _, index, record in item.stamps:
        expected["requirements"][index]["reviewed"] = dict(record)
    if doc.data != expected:
        raise Refused(
            "the edit would change more than the review record (please report this as a "
            "bug, with the file)"
        )


def write_if_unchanged(path: Path, original: bytes, mtime_ns: int, new: bytes) -> None:
    """Replace `path` with `new` atomically, unless it no longer holds `original`."""
    try:
        mode = stat.S_IMODE(path.stat().st_mode)
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise Refused(f"cannot write ({exc.strerror})") from None
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(new)
            handle.flush()
            os.fsync(handle.fileno())
        tmp.chmod(mode)
        if path.stat().st_mtime_ns != mtime_ns or path.read_bytes() != original:
            raise Refused("the file changed since it was read")
        tmp.replace(path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise Refused(f"cannot write ({exc.strerror or exc})") from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
