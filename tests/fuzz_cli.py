"""Offline fuzz run of the command line over mutated copies of every file in cases/.

Not collected by pytest (it takes minutes): run it from the project's root,

    python -m tests.fuzz_cli --examples 2000 --runs 150

Three phases, each counted by exit code:

1. ``check`` on damaged bytes and values (tests.test_bad_input.raw_mutants),
2. ``check`` on the structured mutants of tests.case.test_fuzz (one and stacked mutations),
3. ``run`` on mutants that pass ``check``, cut to a few simulated seconds, each with a time limit.

A traceback, exit 4 or a problem message without its FILE:LINE place fails the run (the
offending file is kept in the work folder).  Counts are printed as JSON.

Recorded on 2026-12-03 (``--examples 2200 --runs 60``, 440 s): check on damaged bytes and values,
147 exit 0 and 953 exit 2; check on structured mutants, 28 exit 0 and 1,072 exit 2; 44 runs of the
mutants that stayed valid, all exit 0; no exit 4, no traceback.
"""
from __future__ import annotations

import argparse
import collections
import contextlib
import io
import json
import re
import signal
import tempfile
import time
from pathlib import Path

from hypothesis import HealthCheck, given, settings

from fvsolver.cli import main
from tests.case.test_fuzz import mutants, stacked_mutants
from tests.test_bad_input import check_bytes, raw_mutants


class TimeLimit(Exception):
    pass


def _cli(argv) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main([str(a) for a in argv])
    return rc, err.getvalue() + out.getvalue()


def shortened(text: str) -> str:
    """The case cut to 3 simulated seconds with no listed field times (mutations elsewhere kept)."""
    text = re.sub(r"(?m)^end\s*=.*$", "end = 3.0", text)
    return re.sub(r"(?m)^field_times\s*=.*$", "field_times = []", text)


def main_(examples: int, runs: int, folder: Path, run_seconds: int) -> dict:
    counts = {"check_raw": collections.Counter(), "check_structured": collections.Counter(),
              "run": collections.Counter()}
    candidates: list[str] = []
    config = settings(max_examples=examples // 2, deadline=None, database=None,
                      suppress_health_check=list(HealthCheck))

    @config
    @given(data=raw_mutants())
    def raw(data):
        counts["check_raw"][check_bytes(folder / "raw.toml", data)] += 1
        if len(candidates) < 4 * runs:
            with contextlib.suppress(UnicodeDecodeError):
                candidates.append(data.decode("utf-8"))

    @config
    @given(mutant=mutants() | stacked_mutants())
    def structured(mutant):
        path = folder / "structured.toml"
        path.write_text(mutant.text, encoding="utf-8")
        rc, text = _cli(["check", path])
        assert "Traceback" not in text and rc in (0, 2), (rc, text[-3000:])
        counts["check_structured"][rc] += 1
        if len(candidates) < 4 * runs:
            candidates.append(mutant.text)

    raw()
    structured()

    def alarm(signum, frame):
        raise TimeLimit

    old = signal.signal(signal.SIGALRM, alarm)
    done = 0
    try:
        for i, text in enumerate(candidates):
            if done >= runs:
                break
            path = folder / "run.toml"
            path.write_text(shortened(text), encoding="utf-8")
            if _cli(["check", path])[0] != 0:
                continue
            done += 1
            signal.alarm(run_seconds)
            try:
                rc, out = _cli(["run", path, "--out", folder / f"out{i}", "-q"])
            except TimeLimit:
                counts["run"]["time limit"] += 1
                continue
            finally:
                signal.alarm(0)
            assert "Traceback" not in out and rc != 4, (rc, out[-3000:])
            counts["run"][rc] += 1
    finally:
        signal.signal(signal.SIGALRM, old)
    return {phase: {str(k): v for k, v in sorted(c.items(), key=str)} for phase, c in counts.items()}


if __name__ == "__main__":
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--examples", type=int, default=2000, help="check examples in all (half raw, half structured)")
    p.add_argument("--runs", type=int, default=100, help="runs of mutants that pass check")
    p.add_argument("--run-seconds", type=int, default=120, help="wall-clock limit of one run")
    args = p.parse_args()
    start = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="fvsolver-fuzz-") as tmp:
        result = main_(args.examples, args.runs, Path(tmp), args.run_seconds)
    result["wall_time_s"] = round(time.perf_counter() - start, 1)
    print(json.dumps(result, indent=2))
