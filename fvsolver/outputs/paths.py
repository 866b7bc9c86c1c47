"""Where outputs go: a folder or a file name given on the command line, checked before any work.

Every command treats its output the same way: a name that holds a NUL, that lies under an
existing file, or that is of the wrong kind (a file for a folder, a folder for a file) is
refused with the option's name and a fix; an existing output is replaced only with
``--overwrite``.
"""
from __future__ import annotations

import json
import os
from pathlib import Path

from fvsolver.errors import CaseError


def _show(path: Path) -> str:
    text = str(path)
    return text if len(text) <= 200 else text[:180] + f"... ({len(text):,} characters)"


def _common_checks(path: Path, option: str) -> None:
    if "\x00" in str(path):
        raise CaseError(f"{option} {_show(path)!r}: holds a NUL character; expected a path")
    for parent in path.parents:
        if parent.exists() or parent.is_symlink():
            if not parent.is_dir():
                raise CaseError(f"{option} {_show(path)}: lies under {_show(parent)}, which is a file, not a "
                                "folder; choose a path in a folder")
            break


def output_folder(path: str | Path, option: str = "--out") -> Path:
    """``path`` as a folder to write into: refused if it is a file or cannot be created.

    The folder is created (with its parents) when it does not exist.
    """
    path = Path(path)
    _common_checks(path, option)
    if path.exists() and not path.is_dir():
        raise CaseError(f"{option} {_show(path)}: is a file, expected a folder for the outputs; choose a folder "
                        "name (it is created when it does not exist)")
    try:
        path.mkdir(parents=True, exist_ok=True)
        probe = path / f".fvsolver-write-test-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as exc:
        raise CaseError(f"{option} {_show(path)}: cannot write there ({exc.strerror or exc}); choose a folder you "
                        "can write to") from exc
    return path


def output_file(path: str | Path, overwrite: bool, option: str = "--out", example: str = "result.vtu") -> Path:
    """``path`` as a file to write: refused if it is a folder, or exists without ``overwrite``.

    Its folder is created when it does not exist.
    """
    path = Path(path)
    _common_checks(path, option)
    if path.is_dir():
        raise CaseError(f"{option} {_show(path)}: is a folder, expected a file name; give one such as "
                        f"{_show(path / example)}")
    if path.exists() and not overwrite:
        raise CaseError(f"{option} {_show(path)}: the file exists; choose another name or pass --overwrite")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CaseError(f"{option} {_show(path)}: cannot create its folder ({exc.strerror or exc}); choose a "
                        "folder you can write to") from exc
    if not os.access(path.parent, os.W_OK):
        raise CaseError(f"{option} {_show(path)}: its folder is not writable; choose a folder you can write to")
    return path


def clean_partial_files(folder: Path) -> list[Path]:
    """Remove the temporary ``.NAME.*.part`` files an atomic write leaves when its process is
    killed mid-write (never a finished output); returns what was removed."""
    removed = []
    for part in Path(folder).glob(".*.part"):
        try:
            if part.is_file():
                part.unlink()
                removed.append(part)
        except OSError:  # another process's file, or gone already: not ours to insist on
            pass
    return removed


def _unfinished(folder: Path) -> bool:
    """A run stopped before its end: no summary, or one that says interrupted."""
    try:
        return json.loads((folder / "summary.json").read_text()).get("status") == "interrupted"
    except (OSError, ValueError, AttributeError):
        return True


def prepare_output(out: Path, overwrite: bool) -> Path:
    """The output folder of a run or a study, made ready: refused if it holds anything (an
    unfinished run is pointed to ``--resume``) unless ``overwrite``; partial files and an old
    summary removed."""
    out = Path(out)
    if out.is_dir() and any(out.iterdir()) and not overwrite:
        if (out / "checkpoint.json").exists() and _unfinished(out):
            raise CaseError(f"--out {out}: holds the checkpoint of an unfinished run; continue it with "
                            f"--resume {out}, or start again with --overwrite")
        raise CaseError(f"--out {out}: the folder exists and is not empty (expected a new or empty folder); "
                        "choose another folder or pass --overwrite")
    output_folder(out)
    clean_partial_files(out)
    stale = out / "summary.json"
    if stale.exists():  # never leave an old summary that claims a result for this run
        stale.unlink()
    return out
