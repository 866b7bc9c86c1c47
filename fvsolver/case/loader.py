"""Read a TOML case, check it against the schema, fill defaults, and freeze it.

Every problem is collected before anything runs and reported as
``FILE:LINE: key.path: what is wrong (got VALUE, expected ...)``.
"""
from __future__ import annotations

import copy
import difflib
import hashlib
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any

from fvsolver.case.schema import CASE, REQUIRED, Key
from fvsolver.errors import CaseError

_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_ASSIGN = re.compile(r"^\s*([A-Za-z0-9_\-\.\"' ]+?)\s*=\s*(.*)$")
_INLINE_KEY = re.compile(r"([A-Za-z0-9_\-]+)\s*=")


MAX_CASE_BYTES = 1_000_000  # a case file is a page of keys: anything larger is not one
MAX_PROBLEM_CHARS = 600      # one reported problem, however long the value it quotes


def excerpt(value: Any, limit: int = 80) -> str:
    """``repr(value)``, cut to ``limit`` characters with a note of how long it was."""
    try:
        text = repr(value)
    except RecursionError:
        return f"<a value nested too deeply to show ({type(value).__name__})>"
    if len(text) <= limit:
        return text
    return f"{text[: limit - 20]}... ({len(text):,} characters)"


def _cut(problem: str) -> str:
    if len(problem) <= MAX_PROBLEM_CHARS:
        return problem
    return f"{problem[: MAX_PROBLEM_CHARS - 40]}... (message cut, {len(problem):,} characters)"


class CaseErrors(CaseError):
    """All the problems found in one case file."""

    def __init__(self, problems: list[str]):
        self.problems = [_cut(p) for p in problems]
        super().__init__("\n".join(self.problems))


def line_map(text: str) -> dict[str, int]:
    """Key path -> line number, for the subset of TOML case files use."""
    lines: dict[str, int] = {}
    current = ""
    counts: dict[str, int] = {}
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        m = _HEADER.match(line)
        if m and not _ASSIGN.match(line):
            name = ".".join(p.strip().strip('"\'') for p in m.group(2).split("."))
            if m.group(1) == "[[":
                counts[name] = counts.get(name, 0) + 1
                current = f"{name}[{counts[name] - 1}]"
            else:
                current = name
            lines.setdefault(current, number)
            parts = name.split(".")
            for k in range(1, len(parts)):  # a header also stands for the tables it opens
                lines.setdefault(".".join(parts[:k]), number)
            continue
        m = _ASSIGN.match(line)
        if m:
            key = ".".join(p.strip().strip('"\'') for p in m.group(1).split("."))
            path = f"{current}.{key}" if current else key
            lines.setdefault(path, number)
            value = m.group(2)
            if value.startswith("{"):
                for sub in _INLINE_KEY.findall(value):
                    lines.setdefault(f"{path}.{sub}", number)
    return lines


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _describe(key: Key) -> str:
    if key.kind == "number":
        unit = f" {key.unit}" if key.unit else ""
        if key.minimum is not None and key.maximum is not None:
            bracket = "(" if key.exclusive_minimum else "["
            return f"a number in {bracket}{key.minimum:g}, {key.maximum:g}]{unit}"
        if key.minimum is not None:
            return f"a number {'>' if key.exclusive_minimum else '>='} {key.minimum:g}" + (f" in{unit}" if unit else "")
        if key.maximum is not None:
            return f"a number <= {key.maximum:g}" + (f" in{unit}" if unit else "")
        return "a number" + (f" in{unit}" if unit else "")
    if key.kind == "integer":
        rng = f" >= {key.minimum:g}" if key.minimum is not None else ""
        return "a whole number" + rng
    if key.kind == "string":
        return "one of " + ", ".join(repr(c) for c in key.choices) if key.choices else "a string"
    return {"boolean": "true or false", "numbers": "an array of numbers", "strings": "an array of strings",
            "table": "a table", "map": "a table of named tables", "tables": "an array of tables",
            "property": "a positive number, {temperatures = [...], values = [...]} or {polynomial = [...]}"}[key.kind]


class Validator:
    """Walks the parsed TOML against the schema, collecting problems."""

    def __init__(self, filename: str, lines: dict[str, int]):
        self.filename = filename
        self.lines = lines
        self.problems: list[str] = []

    def line_of(self, path: str) -> int:
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path.rsplit(".", 1)[0] if "." in path else ""
        return 1

    def error(self, path: str, message: str, line_path: str | None = None) -> None:
        self.problems.append(f"{self.filename}:{self.line_of(line_path or path)}: {path}: {message}")

    def check(self, key: Key, value: Any, path: str) -> Any:
        kind = key.kind
        if kind == "number":
            if not _is_number(value):
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
                return value
            low, high = key.minimum, key.maximum
            if low is not None and (value <= low if key.exclusive_minimum else value < low) or \
                    high is not None and value > high:
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
            return float(value)
        if kind == "integer":
            if not isinstance(value, int) or isinstance(value, bool):
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
            elif key.minimum is not None and value < key.minimum or key.maximum is not None and value > key.maximum:
                rng = f"{key.minimum:g}" if key.minimum == key.maximum else f"in [{key.minimum}, {key.maximum}]"
                self.error(path, f"got {excerpt(value)}, expected {rng if key.maximum is not None else _describe(key)}")
            return value
        if kind == "string":
            if not isinstance(value, str):
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
            elif key.choices and value not in key.choices:
                close = difflib.get_close_matches(value, key.choices, n=1)
                hint = f"; did you mean {close[0]!r}?" if close else ""
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}{hint}")
            return value
        if kind == "boolean":
            if not isinstance(value, bool):
                self.error(path, f"got {excerpt(value)}, expected true or false")
            return value
        if kind in ("numbers", "strings"):
            ok = isinstance(value, list) and all(
                _is_number(v) if kind == "numbers" else isinstance(v, str) for v in value)
            if not ok:
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
            return [float(v) for v in value] if ok and kind == "numbers" else value
        if kind == "property":
            return self._property(value, path)
        if kind == "table":
            return self._table(key, value, path)
        if kind == "map":
            if not isinstance(value, dict):
                self.error(path, f"got {excerpt(value)}, expected {_describe(key)}")
                return value
            return {name: self.check(key.item, v, f"{path}.{name}") for name, v in value.items()}
        if kind == "tables":
            if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
                self.error(path, f"got {excerpt(value)}, expected an array of tables ([[{path}]])")
                return value
            return [self.check(key.item, v, f"{path}[{i}]") for i, v in enumerate(value)]
        raise AssertionError(kind)  # pragma: no cover

    def _property(self, value: Any, path: str) -> Any:
        if _is_number(value):
            if value <= 0:
                self.error(path, f"got {excerpt(value)}, expected a positive number")
            return float(value)
        if isinstance(value, dict) and set(value) == {"temperatures", "values"}:
            t, v = value["temperatures"], value["values"]
            good = (isinstance(t, list) and isinstance(v, list) and len(t) == len(v) >= 2
                    and all(map(_is_number, t + v)) and all(b > a for a, b in zip(t, t[1:])) and min(v) > 0)
            if not good:
                self.error(path, f"got {excerpt(value)}, expected >= 2 increasing temperatures (K) with one positive "
                                 "value each")
            return value
        if isinstance(value, dict) and set(value) == {"polynomial"}:
            c = value["polynomial"]
            if not (isinstance(c, list) and c and all(map(_is_number, c))):
                self.error(path, f"got {excerpt(value)}, expected polynomial = [a0, a1, ...] (T in K)")
            return value
        self.error(path, f"got {excerpt(value)}, expected a positive number, {{temperatures = [...], values = [...]}} "
                         "or {polynomial = [...]}")
        return value

    def _table(self, key: Key, value: Any, path: str) -> Any:
        if not isinstance(value, dict):
            self.error(path, f"got {excerpt(value)}, expected a table")
            return value
        names = {c.name: c for c in key.children}
        out = {}
        for name, v in value.items():
            sub = f"{path}.{name}" if path else name
            if name not in names:
                close = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
                hint = f"; did you mean {close[0]!r}?" if close else ""
                self.error(sub, f"unknown key (got {excerpt(name)}, expected one of {', '.join(names)}){hint}")
                continue
            out[name] = self.check(names[name], v, sub)
        for name, child in names.items():
            if name in out:
                continue
            sub = f"{path}.{name}" if path else name
            if child.required:
                self.error(sub, f"missing (expected {_describe(child)}"
                                f"{' in ' + child.unit if child.unit and child.kind != 'number' else ''}); "
                                f"add it: {child.doc}", line_path=path)
            elif child.default is not None:
                default = copy.deepcopy(child.default)
                out[name] = self.check(child, default, sub) if child.kind == "table" else default
        return out


def _freeze(value: Any) -> Any:
    if isinstance(value, dict):
        return MappingProxyType({k: _freeze(v) for k, v in value.items()})
    if isinstance(value, list):
        return tuple(_freeze(v) for v in value)
    return value


def thaw(value: Any) -> Any:
    """A plain (mutable) copy of frozen case data."""
    if isinstance(value, MappingProxyType | dict):
        return {k: thaw(v) for k, v in value.items()}
    if isinstance(value, tuple | list):
        return [thaw(v) for v in value]
    return value


@dataclass(frozen=True)
class Case:
    """A validated case with every default filled in (read-only).

    Attributes
    ----------
    path : Path of the case file (None when built from a dict)
    data : read-only mapping of the resolved case
    text : the file's text
    sha256 : hash of the resolved case, for resume checks and run records
    """

    path: Path | None
    data: Any
    text: str
    sha256: str

    def __getitem__(self, key: str) -> Any:
        return self.data[key]

    @property
    def folder(self) -> Path:
        return self.path.parent if self.path else Path.cwd()


def validate_data(raw: dict, filename: str = "<case>", text: str = "",
                  folder: Path | None = None) -> tuple[dict, list[str]]:
    """Schema check and defaults, then the physical-consistency checks; returns (data, problems).

    ``folder`` is where relative paths in the case resolve (the case file's folder).
    """
    from fvsolver.case.consistency import check_consistency

    v = Validator(filename, line_map(text))
    data = v.check(CASE, raw, "")
    data["_folder"] = str((folder or Path.cwd()).resolve())
    if not v.problems:
        check_consistency(data, v)
    else:
        # report the consistency problems of the parts that are well formed too: all at once
        try:
            check_consistency(copy.deepcopy(data), v)
        except (KeyError, TypeError, ValueError, AttributeError, IndexError, ArithmeticError):
            pass
    return data, v.problems


def read_text(path: Path) -> str:
    """The text of a case file: UTF-8 (TOML 1.0 requires it), with no byte-order mark.

    Raises
    ------
    CaseErrors
        Naming the line and byte of the first byte that is not UTF-8, or the mark.
    """
    try:
        with open(path, "rb") as fh:
            data = fh.read(MAX_CASE_BYTES + 1)
    except (OSError, ValueError) as exc:  # ValueError: a NUL in the path
        why = getattr(exc, "strerror", None) or str(exc)
        raise CaseErrors([f"{excerpt(str(path))[1:-1]}:1: case file: cannot be read ({why}); check the path"]) \
            from exc
    if len(data) > MAX_CASE_BYTES:
        raise CaseErrors([f"{path}:1: case file: larger than {MAX_CASE_BYTES:,} bytes (expected a page of "
                          "TOML keys); meshes belong in a mesh file (geometry.file), not in the case"])
    if data.startswith(b"\xef\xbb\xbf"):
        raise CaseErrors([f"{path}:1: case file: starts with a UTF-8 byte-order mark (BOM), which TOML does not "
                          "allow; save the file as UTF-8 without BOM"])
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise CaseErrors([f"{path}:1: case file: is UTF-16 (it starts with a byte-order mark); save it as UTF-8"])
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        column = exc.start - (data.rfind(b"\n", 0, exc.start) + 1) + 1
        raise CaseErrors([f"{path}:{line}: case file: byte 0x{data[exc.start]:02x} at column {column} is not "
                          "UTF-8 (a Latin-1 or Windows-1252 character such as a degree sign?); save the file "
                          "as UTF-8 or write the character in ASCII"]) from None


def load_case(path: str | Path) -> Case:
    """Read, validate and freeze a TOML case file.

    Raises
    ------
    CaseErrors
        With every problem found, each as ``FILE:LINE: key.path: message``.
    """
    from fvsolver.case.writer import dumps

    path = Path(path)
    text = read_text(path)
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        line = m.group(1) if m else (str(max(1, len(text.splitlines()))) if "end of document" in str(exc) else "1")
        raise CaseErrors([f"{path}:{line}: TOML syntax: {exc}; fix the syntax"]) from exc
    except RecursionError:
        raise CaseErrors([f"{path}:1: TOML syntax: arrays or inline tables nested too deeply to read (expected "
                          "the flat tables of a case file); remove the nesting"]) from None
    try:
        data, problems = validate_data(raw, str(path), text, path.parent)
    except RecursionError:
        raise CaseErrors([f"{path}:1: case file: a value is nested too deeply to check (expected numbers, "
                          "strings, flat arrays and tables); remove the nesting"]) from None
    if problems:
        raise CaseErrors(problems)
    resolved = dumps({k: v for k, v in data.items() if not k.startswith("_")})
    return Case(path, _freeze(data), text, hashlib.sha256(resolved.encode()).hexdigest())


def _set_path(data: dict, path: str, value: Any) -> None:
    """data[a][b][...] = value for the dotted ``path`` ("room.relative_humidity",
    "heat_sources.0.power"); missing tables are created, list entries are addressed by index."""
    parts = path.split(".")
    node: Any = data
    for i, part in enumerate(parts):
        last = i == len(parts) - 1
        where = ".".join(parts[:i])
        if isinstance(node, list):
            if not part.isdigit() or int(part) >= len(node):
                raise CaseErrors([f"{where}: got index {part!r}, expected one of 0..{len(node) - 1} "
                                  f"(the list has {len(node)} entries)"])
            if last:
                node[int(part)] = value
            else:
                node = node[int(part)]
        elif isinstance(node, dict):
            if last:
                node[part] = value
            else:
                node = node.setdefault(part, {})
        else:
            raise CaseErrors([f"{where}: is a value, not a table; cannot set {path}"])


def with_changes(case: Case, changes: dict[str, Any], label: str | None = None) -> Case:
    """A copy of ``case`` with some keys set, validated afresh (defaults re-derived).

    Parameters
    ----------
    changes : dotted key path -> value, e.g. ``{"room.relative_humidity": 0.8}``
    label : names the variant in error messages (default: the changes themselves)

    Raises
    ------
    CaseErrors
        With every problem of the changed case, each prefixed by the variant's label.
    """
    from fvsolver.case.writer import dumps

    if case.text:
        raw = tomllib.loads(case.text)  # from the file as written: defaults are filled again
    else:
        raw = thaw(case.data)
        raw.pop("_folder", None)
    for path, value in changes.items():
        _set_path(raw, path, value)
    label = label or ", ".join(f"{k} = {v!r}" for k, v in changes.items())
    name = str(case.path) if case.path else "<case>"
    data, problems = validate_data(raw, name, case.text, case.folder)
    if problems:
        raise CaseErrors([f"[{label}] {p}" for p in problems])
    resolved = dumps({k: v for k, v in data.items() if not k.startswith("_")})
    # the text of the changed case, so that a further change starts from it too
    return Case(case.path, _freeze(data), dumps(raw), hashlib.sha256(resolved.encode()).hexdigest())
