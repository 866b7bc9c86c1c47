"""Bad input and absurd sizes end in exit 2 with a message that names the place and a fix.

Never a traceback (exit 4), never a half-written output folder, never an allocation that runs
the machine out of memory.
"""
from __future__ import annotations

import contextlib
import io
import re
from pathlib import Path

import pytest

from fvsolver.cli import main

ROOT = Path(__file__).resolve().parents[1]
GLASS = (ROOT / "cases" / "glass_bulb_cooling.toml").read_text()


def run_cli(argv) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main([str(a) for a in argv])
    return rc, out.getvalue(), err.getvalue()


def refused(argv) -> str:
    """The message of a command that must end in exit 2 without a traceback."""
    rc, out, err = run_cli(argv)
    assert "Traceback" not in err and "internal error" not in err, err
    assert rc == 2, (rc, out, err)
    assert err.startswith("error: "), err
    return err


def case_file(tmp_path: Path, text: str | bytes, name: str = "case.toml") -> Path:
    path = tmp_path / name
    path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
    return path


def short(text: str, seconds: float = 20.0) -> str:
    """The glass-bulb case cut to a few steps (field times inside the shorter end)."""
    return text.replace("end = 600.0", f"end = {seconds}").replace("field_times = [10.0, 60.0, 300.0]",
                                                                  f"field_times = [{seconds / 2}]")


# ----------------------------------------------------------------------------- the file itself
def test_a_latin1_degree_sign_names_its_line_and_byte(tmp_path):
    lines = GLASS.splitlines()
    lines[5] += "  # 20\xb0C"
    data = "\n".join(lines).encode("latin-1")
    err = refused(["check", case_file(tmp_path, data)])
    assert ":6: case file: byte 0xb0 at column" in err and "UTF-8" in err


def test_a_byte_order_mark_is_named(tmp_path):
    err = refused(["check", case_file(tmp_path, b"\xef\xbb\xbf" + GLASS.encode())])
    assert "byte-order mark" in err and "without BOM" in err


def test_deeply_nested_arrays_are_refused_not_a_recursion_error(tmp_path):
    text = GLASS.replace('title = "', "deep = " + "[" * 5000 + "]" * 5000 + '\ntitle = "')
    err = refused(["check", case_file(tmp_path, text)])
    assert "nested too deeply" in err


@pytest.mark.parametrize("table", ["time", "geometry"])
def test_a_missing_required_table_is_named(tmp_path, table):
    text = re.sub(rf"\[{table}\][^\[]*", "", GLASS)
    err = refused(["check", case_file(tmp_path, text)])
    assert f": {table}: missing (expected a table)" in err


def test_a_nul_in_a_mesh_path_is_refused(tmp_path):
    text = re.sub(r"\[geometry\][^\[]*", lambda m: '[geometry]\nshape = "mesh_file"\nfile = "me\\u0000sh.vtu"\n\n',
                  GLASS)
    text = re.sub(r"\[mesh\][^\[]*", "", text)
    err = refused(["check", case_file(tmp_path, text)])
    assert "geometry.file" in err and "NUL" in err


def test_a_long_bad_value_is_quoted_as_a_short_excerpt(tmp_path):
    text = GLASS.replace("density = 2230.0", 'density = "' + "x" * 200_000 + '"')
    err = refused(["check", case_file(tmp_path, text)])
    assert "materials.glass.density" in err and "200,002 characters" in err
    assert len(err) < 600


# ----------------------------------------------------------------------------- check finds what run finds
def test_check_builds_the_mesh_and_names_the_geometry_line(tmp_path):
    text = GLASS.replace("bulb_inner_radius = 0.019", "bulb_inner_radius = 1e30")
    path = case_file(tmp_path, text)
    line = text.splitlines().index("[geometry]") + 1
    err = refused(["check", path])
    assert f"{path}:{line}: geometry: the mesh cannot be built" in err
    out = tmp_path / "out"
    assert refused(["run", path, "--out", out]) == err
    assert not out.exists()  # nothing written for a case that cannot be set up


# ----------------------------------------------------------------------------- output paths
def test_out_naming_a_file_a_path_under_a_file_or_an_unwritable_place(tmp_path):
    path = case_file(tmp_path, short(GLASS))
    a_file = tmp_path / "a_file"
    a_file.write_text("keep")
    assert "is a file, expected a folder" in refused(["run", path, "--out", a_file])
    assert "which is a file, not a folder" in refused(["run", path, "--out", a_file / "sub"])
    assert "cannot write there" in refused(["run", path, "--out", "/proc/fvsolver-no-such/out"])
    assert a_file.read_text() == "keep"


def test_mesh_out_refuses_a_folder_and_an_existing_file_like_run(tmp_path):
    path = case_file(tmp_path, GLASS)
    assert "is a folder, expected a file name" in refused(["mesh", path, "--out", tmp_path])
    vtu = tmp_path / "head.vtu"
    assert run_cli(["mesh", path, "--out", vtu, "-q"])[0] == 0
    first = vtu.read_bytes()
    assert "--overwrite" in refused(["mesh", path, "--out", vtu])
    assert vtu.read_bytes() == first
    assert run_cli(["mesh", path, "--out", vtu, "--overwrite", "-q"])[0] == 0


def test_compare_json_naming_a_folder_is_refused(tmp_path):
    path = case_file(tmp_path, short(GLASS, 5.0))
    assert run_cli(["run", path, "--out", tmp_path / "a", "-q"])[0] == 0
    err = refused(["compare", tmp_path / "a", tmp_path / "a", "--json", tmp_path])
    assert "--json" in err and "is a folder" in err


def test_resume_into_another_out_folder_is_refused(tmp_path):
    path = case_file(tmp_path, GLASS)
    err = refused(["run", path, "--resume", tmp_path / "a", "--out", tmp_path / "b"])
    assert "continues in its own folder" in err
    assert not (tmp_path / "b").exists()


# ----------------------------------------------------------------------------- sizes, before allocation
SIZES = {
    # key edits -> the key path refused and a phrase of its estimate
    "a billion polar cells": (("polar_cells = 40", "polar_cells = 1000000000"), "mesh", "cells, more than"),
    "2^31 cells by refinement": (("[mesh]", "[mesh]\nrefinement = 2147483648"), "mesh", "cells, more than"),
    "1e12 field files": (("field_times = [10.0, 60.0, 300.0]", "field_count = 1000000000000"),
                         "output.field_count", "field files, more than"),
    "an end time of 2^63 s": (("end = 600.0", "end = 9223372036854775807.0", "field_times = [10.0, 60.0, 300.0]",
                               ""), "numerics.max_step", "steps"),
    "1e12 fixed steps": (("initial_step = 0.1", "initial_step = 6e-10\nmin_step = 1e-10\nadaptive = false"),
                         "numerics.initial_step", "1,000,000,000,000 steps"),
}


@pytest.mark.parametrize("name", sorted(SIZES))
def test_absurd_sizes_are_refused_with_their_estimate(tmp_path, name):
    edits, key, phrase = SIZES[name]
    text = GLASS
    for old, new in zip(edits[::2], edits[1::2]):
        assert old in text
        text = text.replace(old, new, 1)
    err = refused(["check", case_file(tmp_path, text)])
    assert f": {key}: " in err and phrase in err, err
    assert "numerics.max_" in err  # the key that raises the limit


@pytest.mark.parametrize("key", ["body_polar_cells", "dip_tube_cells"])
def test_a_whole_device_with_absurd_body_cells_is_refused_before_meshing(tmp_path, key):
    """Found by the damaged-file fuzzing: the whole device's body cells were left out of the estimate."""
    text = (ROOT / "cases" / "running_device.toml").read_text()
    old = next(line for line in text.splitlines() if line.startswith(f"{key} = "))
    err = refused(["check", case_file(tmp_path, text.replace(old, f"{key} = 9223372036854775807"))])
    assert ": mesh: " in err and "cells, more than" in err and "Traceback" not in err, err


def test_a_limit_is_raised_by_its_numerics_key(tmp_path):
    text = GLASS.replace("field_times = [10.0, 60.0, 300.0]", "field_count = 3000")
    assert "field files" in refused(["check", case_file(tmp_path, text)])
    text = text.replace("max_step = 30.0", "max_step = 30.0\nmax_output_files = 5000")
    rc, out, err = run_cli(["check", case_file(tmp_path, text)])
    assert rc == 0, err
    assert "3,002 field files" in out  # check says what the run will cost


def test_a_mesh_file_declaring_too_many_cells_is_refused_before_it_is_read(tmp_path):
    vtu = tmp_path / "big.vtu"
    vtu.write_text('<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid"><UnstructuredGrid>'
                   '<Piece NumberOfPoints="4000000000" NumberOfCells="3000000000">'
                   '<Points><DataArray format="appended" offset="0"/></Points></Piece>'
                   '</UnstructuredGrid></VTKFile>\n')
    text = re.sub(r"\[geometry\][^\[]*", lambda m: '[geometry]\nshape = "mesh_file"\nfile = "big.vtu"\n\n', GLASS)
    text = re.sub(r"\[mesh\][^\[]*", "", text)
    err = refused(["check", case_file(tmp_path, text)])
    assert "geometry.file" in err and "3,000,000,000 cells" in err


# ----------------------------------------------------------------------------- fuzzing the bytes and values
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

CASE_FILES = {p.name: p.read_bytes() for p in sorted((ROOT / "cases").glob("*.toml"))}
_NUMBER_LITERAL = re.compile(rb"(?<=[=\[, ])\s*-?\d+(\.\d+)?(e-?\d+)?(?=\s*($|[,\]#\n]))", re.M)
EXTREMES = [b"0", b"-0.0", b"1e308", b"-1e308", b"1e-320", b"9223372036854775807", b"-9223372036854775808",
            b"18446744073709551616", b"2147483648", b"1e30", b"nan", b"inf", b"-inf", b"1e1000", b'"5"', b"true",
            b"[]", b"{}", b'"' + b"x" * 50_000 + b'"', b"[" * 3000 + b"]" * 3000, b'"a\\u0000b"']


@st.composite
def raw_mutants(draw) -> bytes:
    """A shipped case file with damage of the kinds text editors, encodings and careless edits make:
    foreign bytes (Latin-1, NUL, a BOM), cut files, extreme or mistyped values, duplicated lines."""
    data = bytearray(CASE_FILES[draw(st.sampled_from(sorted(CASE_FILES)))])
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["bytes", "bom", "cut", "value", "duplicate line", "swap lines"]))
        if kind == "bytes":
            at = draw(st.integers(0, len(data)))
            data[at:at] = draw(st.binary(min_size=1, max_size=4))
        elif kind == "bom":
            data[0:0] = draw(st.sampled_from([b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff"]))
        elif kind == "cut":
            del data[draw(st.integers(0, len(data))):]
        elif kind == "value":
            spots = list(_NUMBER_LITERAL.finditer(bytes(data)))
            if spots:
                m = draw(st.sampled_from(spots))
                data[m.start(): m.end()] = b" " + draw(st.sampled_from(EXTREMES))
        else:
            lines = bytes(data).split(b"\n")
            i, j = draw(st.integers(0, len(lines) - 1)), draw(st.integers(0, len(lines) - 1))
            if kind == "duplicate line":
                lines.insert(j, lines[i])
            else:
                lines[i], lines[j] = lines[j], lines[i]
            data = bytearray(b"\n".join(lines))
    return bytes(data)


def check_bytes(path: Path, data: bytes) -> int:
    """Exit code of ``fvsolver check`` on ``data``; fails on a traceback, exit 4 or a message without a place."""
    path.write_bytes(data)
    rc, out, err = run_cli(["check", path])
    assert "Traceback" not in err + out and "internal error" not in err, err[-3000:]
    assert rc in (0, 2), (rc, err[-3000:])
    if rc == 2:
        first = err.splitlines()[0]
        assert first.startswith(f"error: {path}:"), first[:300]
        assert all(len(line) < 2_000 for line in err.splitlines()), "a problem quotes too much"
    return rc


@settings(max_examples=60, deadline=None, database=None)
@given(data=raw_mutants())
def test_damaged_case_files_give_exit_0_or_2_with_a_place(data, tmp_path_factory):
    """60 examples by default; tests/fuzz_cli.py runs thousands offline (counts by exit code)."""
    check_bytes(tmp_path_factory.mktemp("raw") / "case.toml", data)
