"""Fuzzing the case checker: malformed and out-of-range case files never crash it.

Every mutated case file must either be valid (exit 0) or be refused with exit 2 and a
list of problems, each ``FILE:LINE: key.path: message`` with LINE a line of the file,
the first one prefixed with ``error: ``.  Where the mutation tells us exactly which
line is wrong, the problem must point at that line.
"""
from __future__ import annotations

import contextlib
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fvsolver.case.consistency import shape_tags
from fvsolver.case.schema import CASE, SHAPES, Key
from fvsolver.cli import main

ROOT = Path(__file__).resolve().parents[2]
SOURCES = {name: (ROOT / "cases" / name).read_text(encoding="utf-8")
           for name in ("demo.toml", "glass_bulb_cooling.toml")}

# ----------------------------------------------------------------------------- names
def _schema_names(key: Key) -> set[str]:
    names = {key.name}
    for child in key.children:
        names |= _schema_names(child)
    if key.item is not None:
        names |= _schema_names(key.item)
    return names


# every name a case may legitimately use: a misspelling or an invented key must avoid them
KNOWN_NAMES = _schema_names(CASE) | {"temperatures", "values", "polynomial"}
for _shape in SHAPES:
    if _shape != "mesh_file":
        _patches, _materials = shape_tags({"shape": _shape, "coordinate_system": "axisymmetric"})
        KNOWN_NAMES |= set(_patches) | set(_materials)
KNOWN_NAMES |= {"left"}  # the planar slab's side

# ----------------------------------------------------------------------------- a small TOML line model
_HEADER = re.compile(r"^\[([A-Za-z0-9_.]+)\](\s*#.*)?$")
_ASSIGN = re.compile(r"^([A-Za-z0-9_]+)(\s*=\s*)(.*)$")
_NUMBER = re.compile(r"(?<![\w.+\-])[+-]?(?:\d+(?:\.\d+)?(?:[eE][+-]?\d+)?|nan|inf)(?![\w.])")
_INLINE_KEY = re.compile(r"([A-Za-z0-9_]+)\s*=")
_PROBLEM = re.compile(r"^(?P<file>.+?):(?P<line>\d+): (?P<key>[^:]+): (?P<message>.+)$")
_KEY_PATH = re.compile(r"[A-Za-z0-9_\-]+(\[\d+\])?(\.[A-Za-z0-9_\-]+(\[\d+\])?)*")


def _split_comment(value: str) -> tuple[str, str]:
    """(value, trailing comment) of the right-hand side of an assignment."""
    quote = None
    for i, ch in enumerate(value):
        if quote:
            if ch == quote:
                quote = None
        elif ch in "\"'":
            quote = ch
        elif ch == "#":
            return value[:i].rstrip(), value[i:]
    return value.rstrip(), ""


@dataclass(frozen=True)
class Line:
    index: int            # 0-based
    kind: str             # blank, comment, header, assign
    table: str            # the table the line belongs to ("" at the top)
    key: str = ""         # assignment key or header path
    value: str = ""       # right-hand side without the comment
    comment: str = ""


def parse(text: str) -> list[Line]:
    out, table = [], ""
    for i, raw in enumerate(text.splitlines()):
        s = raw.strip()
        if not s:
            out.append(Line(i, "blank", table))
        elif s.startswith("#"):
            out.append(Line(i, "comment", table))
        elif m := _HEADER.match(s):
            table = m.group(1)
            out.append(Line(i, "header", table, table, "", m.group(2) or ""))
        elif m := _ASSIGN.match(s):
            value, comment = _split_comment(m.group(3))
            out.append(Line(i, "assign", table, m.group(1), value, comment))
        else:  # pragma: no cover - the shipped cases use only the forms above
            raise AssertionError(f"unexpected line {raw!r}")
    return out


def value_kind(value: str) -> str:
    if value.startswith('"'):
        return "string"
    if value in ("true", "false"):
        return "bool"
    if value.startswith("["):
        return "array"
    if value.startswith("{"):
        return "inline"
    if _NUMBER.fullmatch(value):
        return "number"
    raise AssertionError(value)  # pragma: no cover


class Infeasible(Exception):
    """The chosen mutation has nothing to act on in this file."""


def pick(draw, items):
    items = list(items)
    if not items:
        raise Infeasible
    return draw(st.sampled_from(items))


def full(table: str, key: str) -> str:
    return f"{table}.{key}" if table else key


PARSED = {name: (text.splitlines(), parse(text)) for name, text in SOURCES.items()}  # (lines, model)


# ----------------------------------------------------------------------------- mutations
@dataclass
class Mutant:
    """A mutated case file and what the checker must say about it.

    must_fail : the file is certainly invalid (exit 2 required)
    syntax_line : the file is not TOML; the only problem is "TOML syntax" at this line
    anchor : (line, key path): a problem at this line names this path or a parent of it
    pinned : (key path, line) pairs: any problem naming exactly this path is at this line
    toml : the file is still TOML (None: not known)
    """

    source: str
    kind: str
    lines: list[str]
    must_fail: bool = False
    syntax_line: int | None = None
    anchor: tuple[int, str] | None = None
    pinned: list[tuple[str, int]] = field(default_factory=list)
    toml: bool | None = True

    @property
    def text(self) -> str:
        return "\n".join(self.lines) + "\n"


def _header_line(model: list[Line], table: str) -> int:
    """1-based line of the header of ``table`` (1 for the top level)."""
    for ln in model:
        if ln.kind == "header" and ln.key == table:
            return ln.index + 1
    return 1


def _number_targets(model):
    """(line, match, key path) of every number literal in an assignment's value."""
    out = []
    for ln in model:
        if ln.kind != "assign" or value_kind(ln.value) == "string":
            continue
        for m in _NUMBER.finditer(ln.value):
            path = full(ln.table, ln.key)
            if value_kind(ln.value) == "inline":
                subs = _INLINE_KEY.findall(ln.value[: m.start()])
                path = f"{path}.{subs[-1]}"
            out.append((ln, m, path))
    return out


def _rebuild(ln: Line, value: str, key: str | None = None) -> str:
    comment = f"  {ln.comment}" if ln.comment else ""
    return f"{key or ln.key} = {value}{comment}"


def _fresh_name(draw) -> str:
    name = draw(st.text("abcdefghijklmnopqrstuvwxyz_", min_size=3, max_size=12))
    return "zq" + name


def _toml_scalar(draw) -> str:
    return draw(st.one_of(
        st.integers(-10**6, 10**6).map(str),
        st.floats(allow_nan=False, allow_infinity=False, width=64).map(repr),
        st.sampled_from(["true", "false", '"text"', '"device_head"', "[1.0, 2.0]"]),
    ))


def _out_of_range(draw) -> tuple[str, bool]:
    """(literal, certainly invalid)."""
    kind = draw(st.sampled_from(["negative", "huge", "zero", "nan", "inf"]))
    if kind == "negative":
        return repr(draw(st.floats(-1e9, -1e-12))), False
    if kind == "huge":
        return draw(st.one_of(st.floats(1e12, 1e308).map(repr),
                              st.integers(10**12, 10**40).map(str))), False
    if kind == "zero":
        return draw(st.sampled_from(["0", "0.0", "-0.0"])), False
    if kind == "nan":
        return draw(st.sampled_from(["nan", "+nan", "-nan"])), True  # TOML 1.0 special floats
    return draw(st.sampled_from(["inf", "+inf", "-inf"])), True


def m_delete(draw, source, current) -> Mutant:
    text_lines, model = current
    ln = pick(draw, [x for x in model if x.kind == "assign"])
    lines = text_lines[: ln.index] + text_lines[ln.index + 1:]
    # a key left out is reported "missing" at the header of its table
    return Mutant(source, "delete", lines, pinned=[(full(ln.table, ln.key), _header_line(model, ln.table))])


def m_number(draw, source, current) -> Mutant:
    text_lines, model = current
    ln, m, path = pick(draw, _number_targets(model))
    literal, invalid = _out_of_range(draw)
    value = ln.value[: m.start()] + literal + ln.value[m.end():]
    lines = list(text_lines)
    lines[ln.index] = _rebuild(ln, value)
    return Mutant(source, "number", lines, must_fail=invalid, anchor=(ln.index + 1, path) if invalid else None,
                  pinned=[(path, ln.index + 1)])


def m_type(draw, source, current) -> Mutant:
    text_lines, model = current
    lines = list(text_lines)
    change = draw(st.sampled_from(["number->string", "number->bool", "string->number", "bool->number",
                                   "array->scalar", "inline->scalar", "table->scalar"]))
    if change == "table->scalar":
        header = pick(draw, [x for x in model if x.kind == "header"])
        end = next((x.index for x in model if x.kind == "header" and x.index > header.index), len(lines))
        scalar = draw(st.sampled_from(["5", "5.0", '"table"', "true"]))
        parts = header.key.split(".")
        if len(parts) == 1:  # [room] -> room = 5 among the top-level keys
            top = max((x.index for x in model if x.kind == "assign" and x.table == ""), default=-1)
            lines = lines[: top + 1] + [f"{header.key} = {scalar}"] + lines[top + 1: header.index] + lines[end:]
            return Mutant(source, change, lines, must_fail=True, anchor=(top + 2, header.key))
        # [materials.glass] -> [materials] glass = 5
        lines = (lines[: header.index] + [f"[{'.'.join(parts[:-1])}]", f"{parts[-1]} = {scalar}"] + lines[end:])
        return Mutant(source, change, lines, must_fail=True, anchor=(header.index + 2, header.key))
    wanted = {"number->string": "number", "number->bool": "number", "string->number": "string",
              "bool->number": "bool", "array->scalar": "array", "inline->scalar": "inline"}[change]
    candidates = [x for x in model if x.kind == "assign" and value_kind(x.value) == wanted]
    ln = pick(draw, candidates)
    if change == "number->string":
        value = f'"{ln.value}"'
    elif change == "number->bool":
        value = draw(st.sampled_from(["true", "false"]))
    elif change in ("string->number", "bool->number"):
        value = draw(st.sampled_from(["0", "1", "42", "3.5", "-7"]))
    else:
        value = draw(st.sampled_from(["5", "5.0", '"text"', "true"]))
    lines[ln.index] = _rebuild(ln, value)
    path = full(ln.table, ln.key)
    return Mutant(source, change, lines, must_fail=True, anchor=(ln.index + 1, path), pinned=[(path, ln.index + 1)])


def _misspell(draw, name: str) -> str:
    letters = "abcdefghijklmnopqrstuvwxyz"
    for _ in range(20):
        how = draw(st.sampled_from(["insert", "delete", "swap", "replace"]))
        i = draw(st.integers(0, len(name) - 1))
        c = draw(st.sampled_from(letters))
        if how == "insert":
            new = name[:i] + c + name[i:]
        elif how == "delete":
            new = name[:i] + name[i + 1:]
        elif how == "swap" and i + 1 < len(name):
            new = name[:i] + name[i + 1] + name[i] + name[i + 2:]
        else:
            new = name[:i] + c + name[i + 1:]
        if new and new != name and new not in KNOWN_NAMES and re.fullmatch(r"[a-z0-9_]+", new):
            return new
    return name + "zq"


def m_misspell(draw, source, current) -> Mutant:
    text_lines, model = current
    lines = list(text_lines)
    target = draw(st.sampled_from(["key", "header", "inline"]))
    if target == "header":
        ln = pick(draw, [x for x in model if x.kind == "header"])
        parts = ln.key.split(".")
        # the first part of a dotted header is misspelled in test_misspelled_dotted_header_names_its_line
        k = len(parts) - 1
        parts[k] = _misspell(draw, parts[k])
        lines[ln.index] = f"[{'.'.join(parts)}]{ln.comment and '  ' + ln.comment.strip()}"
        return Mutant(source, "misspell header", lines, must_fail=True, anchor=(ln.index + 1, ".".join(parts)))
    if target == "inline":
        ln = pick(draw, [x for x in model if x.kind == "assign" and value_kind(x.value) == "inline"])
        subs = list(_INLINE_KEY.finditer(ln.value))
        m = pick(draw, subs)
        new = _misspell(draw, m.group(1))
        value = ln.value[: m.start(1)] + new + ln.value[m.end(1):]
        lines[ln.index] = _rebuild(ln, value)
        return Mutant(source, "misspell inline key", lines, must_fail=True,
                      anchor=(ln.index + 1, f"{full(ln.table, ln.key)}.{new}"))
    ln = pick(draw, [x for x in model if x.kind == "assign"])
    new = _misspell(draw, ln.key)
    lines[ln.index] = _rebuild(ln, ln.value, key=new)
    return Mutant(source, "misspell key", lines, must_fail=True, anchor=(ln.index + 1, full(ln.table, new)))


def m_unknown(draw, source, current) -> Mutant:
    text_lines, model = current
    name = _fresh_name(draw)
    value = _toml_scalar(draw)
    if draw(st.booleans()):  # an unknown key inside whatever table the line falls in
        at = draw(st.integers(0, len(text_lines)))
        table = model[at - 1].table if at > 0 else ""
        lines = text_lines[:at] + [f"{name} = {value}"] + text_lines[at:]
        return Mutant(source, "unknown key", lines, must_fail=True, anchor=(at + 1, full(table, name)))
    # an unknown table, placed where a table may start
    starts = [x.index for x in model if x.kind == "header"] + [len(text_lines)]
    at = draw(st.sampled_from(starts))
    lines = text_lines[:at] + [f"[{name}]", f"key = {value}"] + text_lines[at:]
    return Mutant(source, "unknown table", lines, must_fail=True, anchor=(at + 1, name))


def m_syntax(draw, source, current) -> Mutant:
    text_lines, model = current
    lines = list(text_lines)
    how = draw(st.sampled_from(["no equals", "unterminated string", "double equals", "unclosed header",
                                "extra bracket", "bare word"]))
    if how in ("unclosed header", "extra bracket"):
        ln = pick(draw, [x for x in model if x.kind == "header"])
        lines[ln.index] = f"[{ln.key}" if how == "unclosed header" else f"[{ln.key}]]"
    elif how == "bare word":
        ln = pick(draw, [x for x in model if x.kind in ("assign", "blank")])
        lines[ln.index] = "this is not toml"
    else:
        ln = pick(draw, [x for x in model if x.kind == "assign"])
        lines[ln.index] = {"no equals": f"{ln.key} {ln.value}", "unterminated string": f'{ln.key} = "{ln.value}',
                           "double equals": f"{ln.key} = = {ln.value}"}[how]
    # TOML 1.0 (toml.io/en/v1.0.0): each of these lines is invalid on its own
    return Mutant(source, "syntax: " + how, lines, must_fail=True, syntax_line=ln.index + 1)


def m_duplicate(draw, source, current) -> Mutant:
    text_lines, model = current
    headers = [x for x in model if x.kind == "header"]
    ln = pick(draw, headers)
    at = draw(st.sampled_from([x.index for x in headers if x.index > ln.index] + [len(text_lines)]))
    lines = text_lines[:at] + [text_lines[ln.index]] + text_lines[at:]
    # TOML 1.0 (toml.io/en/v1.0.0, "Table"): "you cannot define a table more than once"
    return Mutant(source, "duplicate header", lines, must_fail=True, syntax_line=at + 1)


MUTATORS = {"delete": m_delete, "number": m_number, "type": m_type, "misspell": m_misspell,
            "unknown": m_unknown, "syntax": m_syntax, "duplicate": m_duplicate}


def mutate(draw, source, current) -> Mutant:
    """One mutation of a kind that has something to act on in ``current``."""
    for _ in range(50):
        try:
            return MUTATORS[draw(st.sampled_from(sorted(MUTATORS)))](draw, source, current)
        except Infeasible:
            continue
    raise Infeasible  # pragma: no cover - deletions and insertions are always possible


@st.composite
def mutants(draw) -> Mutant:
    source = draw(st.sampled_from(sorted(SOURCES)))
    return mutate(draw, source, PARSED[source])


@st.composite
def stacked_mutants(draw) -> Mutant:
    """Two to four mutations applied one after another (checked for the output form only)."""
    source = draw(st.sampled_from(sorted(SOURCES)))
    current, kinds, must_fail = PARSED[source], [], False
    for _ in range(draw(st.integers(2, 4))):
        m = mutate(draw, source, current)
        kinds.append(m.kind)
        if m.syntax_line is not None:  # no longer TOML: later mutations could not be placed
            must_fail = True
            break
        current = (m.lines, parse(m.text))
    return Mutant(source, " + ".join(kinds), list(m.lines), must_fail=must_fail, toml=None)


# ----------------------------------------------------------------------------- checking
def run_cli(argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(argv)
    return rc, out.getvalue(), err.getvalue()


def problems_of(path: Path, text: str, rc: int, out: str, err: str) -> list[tuple[int, str, str]]:
    """The (line, key path, message) problems of a check, after checking their form."""
    assert "Traceback" not in err and "Traceback" not in out, err
    assert rc in (0, 2), f"exit {rc}\n{err}"
    if rc == 0:
        assert err == "" and "valid" in out
        return []
    rows = err.splitlines()
    assert rows and rows[0].startswith("error: "), err
    rows[0] = rows[0][len("error: "):]
    n_lines = len(text.splitlines())
    found = []
    for row in rows:
        m = _PROBLEM.match(row)
        assert m, f"not FILE:LINE: key.path: message: {row!r}"
        assert m["file"] == str(path), row
        line = int(m["line"])
        assert 1 <= line <= n_lines, f"line {line} outside 1..{n_lines}: {row!r}"
        assert m["key"] == "TOML syntax" or _KEY_PATH.fullmatch(m["key"]), row
        found.append((line, m["key"], m["message"]))
    return found


def _names(path: str, key: str) -> bool:
    return path == key or path.startswith(key + ".")


def check_mutant(mutant: Mutant, folder: Path) -> None:
    path = folder / "case.toml"
    path.write_text(mutant.text, encoding="utf-8")
    rc, out, err = run_cli(["check", str(path)])
    found = problems_of(path, mutant.text, rc, out, err)
    note = f"{mutant.source} / {mutant.kind}\n{err}"
    if mutant.must_fail:
        assert rc == 2, note
    if mutant.syntax_line is not None:
        assert [(line, key) for line, key, _ in found] == [(mutant.syntax_line, "TOML syntax")], note
        return
    if mutant.toml:
        assert all(key != "TOML syntax" for _, key, _ in found), note
    if mutant.anchor is not None:
        line, target = mutant.anchor
        assert any(at == line and _names(target, key) for at, key, _ in found), f"expected {target} at {line}\n{note}"
    for target, line in mutant.pinned:
        for at, key, _ in found:
            if key == target:
                assert at == line, f"{target} reported at line {at}, written at {line}\n{note}"


_FUZZ = settings(max_examples=60, deadline=None, database=None)  # no example database in the project


@_FUZZ
@given(mutant=mutants())
def test_one_mutation_is_reported_at_its_line(mutant, tmp_path_factory):
    check_mutant(mutant, tmp_path_factory.mktemp("fuzz"))


@_FUZZ
@given(mutant=stacked_mutants())
def test_stacked_mutations_never_crash_the_checker(mutant, tmp_path_factory):
    check_mutant(mutant, tmp_path_factory.mktemp("fuzz"))


def test_unmutated_cases_are_valid(tmp_path):
    for name, text in SOURCES.items():
        mutant = Mutant(name, "none", text.splitlines())
        check_mutant(mutant, tmp_path)
        assert run_cli(["check", str(tmp_path / "case.toml")])[0] == 0


# ----------------------------------------------------------------------------- known gaps
def _edit(source: str, *edits: str) -> str:
    """The shipped case with each (old, new) pair of ``edits`` replaced once."""
    text = SOURCES[source]
    for old, new in zip(edits[::2], edits[1::2]):
        assert old in text
        text = text.replace(old, new, 1)
    return text


def test_misspelled_dotted_header_names_its_line(tmp_path):
    text = SOURCES["demo.toml"].replace("[materials.glass]", "[materals.glass]")
    line = text.splitlines().index(next(x for x in text.splitlines() if x.startswith("[materals.glass]"))) + 1
    mutant = Mutant("demo.toml", "misspell header", text.splitlines(), must_fail=True,
                    anchor=(line, "materals.glass"))
    check_mutant(mutant, tmp_path)


def test_truncated_file_names_its_last_line(tmp_path):
    text = SOURCES["demo.toml"]
    cut = text.index('"dichloromethane"') + 5  # inside the fluid name: an unterminated string
    path = tmp_path / "case.toml"
    path.write_text(text[:cut], encoding="utf-8")
    rc, out, err = run_cli(["check", str(path)])
    found = problems_of(path, text[:cut], rc, out, err)
    assert [(line, key) for line, key, _ in found] == [(len(text[:cut].splitlines()), "TOML syntax")], err


def test_glass_as_thick_as_the_bulb_is_negative_is_reported(tmp_path):
    text = _edit("demo.toml", "glass_thickness = 0.0012", "glass_thickness = -0.019")
    line = text.splitlines().index(next(x for x in text.splitlines() if x.startswith("glass_thickness"))) + 1
    mutant = Mutant("demo.toml", "number", text.splitlines(), must_fail=True,
                    anchor=(line, "geometry.glass_thickness"), pinned=[("geometry.glass_thickness", line)])
    check_mutant(mutant, tmp_path)


# ----------------------------------------------------------------------------- run refuses bad cases
BAD_CASES = {
    "syntax": ("demo.toml", "density = 2230.0", "density 2230.0"),
    "nan": ("demo.toml", "density = 2230.0", "density = nan"),
    "negative": ("glass_bulb_cooling.toml", "end = 600.0", "end = -600.0"),
    "misspelled": ("demo.toml", "relative_humidity = 0.45", "relative_humidty = 0.45"),
    "unknown patch": ("glass_bulb_cooling.toml", "[boundary.bore]", "[boundary.boar]"),
    "duplicate header": ("demo.toml", "[time]", "[room]\n[time]"),
    "table as scalar": ("glass_bulb_cooling.toml", "[initial]\ntemperature = 295.15\n", "",
                        "schema_version = 1\n", "schema_version = 1\ninitial = 295.15\n"),
}


@pytest.mark.parametrize("name", sorted(BAD_CASES))
@pytest.mark.parametrize("existing", [False, True], ids=["new-folder", "empty-folder"])
def test_run_refuses_a_bad_case_and_writes_nothing(tmp_path, name, existing):
    source, *edits = BAD_CASES[name]
    path = tmp_path / "case.toml"
    path.write_text(_edit(source, *edits), encoding="utf-8")
    out = tmp_path / "out"
    if existing:
        out.mkdir()
    rc, stdout, err = run_cli(["run", str(path), "--out", str(out)])
    problems_of(path, path.read_text(), rc, stdout, err)
    assert rc == 2, err
    assert not (out / "summary.json").exists()
    # the loader's promise: every problem is collected before anything runs
    assert (not out.exists()) if not existing else list(out.iterdir()) == []
