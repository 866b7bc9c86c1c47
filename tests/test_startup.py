"""What each process loads: `--help` no numerical library, a bad case file's `check` no solver,
a parallel sweep's parent no solver; the run's helper process draws the same PNG bytes as the
run's own process, and a figure whose helper died is still drawn.  (Speed itself is measured in
bench/bench_process.py, never here.)"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from fvsolver.outputs.painter import Painter, draw_here, idle_cores

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("numpy", "scipy", "numba", "matplotlib", "meshio", "fvsolver.pipeline", "fvsolver.conduction")


def _modules_after(code: str, tmp_path: Path) -> set[str]:
    """The modules a fresh interpreter holds after ``code`` (run from the project's root)."""
    out = tmp_path / "modules.json"
    script = f"{code}\nimport json, sys\nopen({str(out)!r}, 'w').write(json.dumps(sorted(sys.modules)))\n"
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    return set(json.loads(out.read_text()))


def test_help_loads_no_numerical_library(tmp_path):
    loaded = _modules_after("from fvsolver.cli import main\ntry:\n    main(['--help'])\nexcept SystemExit:\n    pass",
                            tmp_path)
    assert "fvsolver.cli" in loaded
    assert not loaded & set(HEAVY), sorted(loaded & set(HEAVY))


def test_a_check_of_the_demo_loads_no_scipy(tmp_path):
    """A check sets the demo up and evaluates it once: its mesh joins its blocks without
    scipy.spatial, its stencil keeps the Jacobian's pattern as plain arrays, and scipy.sparse
    (about 0.3 s of imports) waits for the first Jacobian; numpy.ma (np.unique's and np.median's
    masked-array check) is not loaded either."""
    demo = ROOT / "cases" / "demo.toml"
    loaded = _modules_after(f"import sys\nfrom fvsolver.cli import main\n"
                            f"sys.argv = ['fvsolver', 'check', {str(demo)!r}, '-q']\nassert main() == 0", tmp_path)
    assert {"fvsolver.mesh.core", "fvsolver.conduction", "fvsolver.linear"} <= loaded
    assert not {m for m in loaded if m == "scipy" or m.startswith("scipy.")}  # (numba alone imports scipy)
    assert not loaded & {"numba", "numpy.ma"}


def test_a_deferred_module_is_imported_at_its_first_use_and_then_bound_itself(tmp_path):
    code = ("import sys\nfrom fvsolver.deferred import deferred\n"
            "cs = deferred('colorsys', 'cs', globals())\n"
            "assert 'colorsys' not in sys.modules\n"
            "assert cs.rgb_to_hsv(1.0, 0.0, 0.0) == (0.0, 1.0, 1.0)\n"
            "assert cs is sys.modules['colorsys']\n")
    assert "colorsys" in _modules_after(code, tmp_path)


def test_check_of_a_bad_case_file_reports_before_loading_the_solver(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text((ROOT / "cases" / "demo.toml").read_text().replace("glass_thickness = 0.0012",
                                                                      "glass_thickness = -0.0012"))
    loaded = _modules_after(f"from fvsolver.cli import main\nassert main(['check', {str(bad)!r}, '-q']) == 2",
                            tmp_path)
    assert not loaded & {"scipy", "numba", "matplotlib", "fvsolver.pipeline", "fvsolver.conduction"}


def test_a_parallel_sweeps_parent_never_loads_the_solver(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text((ROOT / "cases" / "glass_bulb_cooling.toml").read_text().replace("end = 600.0", "end = 5.0")
                    .replace("field_times = [10.0, 60.0, 300.0]", "field_times = []"))
    code = (f"if __name__ == '__main__':\n"
            f"    from fvsolver.case import load_case\n"
            f"    from fvsolver.sweeps import Vary, sweep\n"
            f"    rows = sweep(load_case({str(case)!r}), [Vary('initial.temperature', (290.0, 291.0, 292.0))], "
            f"{str(tmp_path / 's')!r}, jobs=2)\n"
            f"    assert [r['status'] for r in rows] == ['complete'] * 3, rows")
    loaded = _modules_after(code, tmp_path)
    assert not loaded & {"numba", "fvsolver.pipeline", "fvsolver.conduction", "fvsolver.stepper"}
    assert (tmp_path / "s" / "sweep.json").is_file()


def _history() -> dict:
    t = np.linspace(0.0, 20.0, 12)
    return {"time_s": t, "pressure_drop_pa": 30.0 * t, "mean_cap_temperature_k": 297.15 - 0.03 * t}


def test_the_helper_draws_the_same_png_and_a_dead_helper_is_drawn_here(tmp_path):
    args = (_history(), )
    options = {"target_pressure_drop_pa": 500.0, "time_to_target_s": 16.7, "title": "helper"}
    draw_here("history_plot", *args, tmp_path / "here.png", **options).wait()
    with Painter() as painter:
        painter.draw("history_plot", *args, tmp_path / "helper.png", **options).wait()
        for process in list(painter.pool._processes.values()):  # the helper dies (killed, out of memory)
            process.kill()
            process.join(10)
        painter.draw("history_plot", *args, tmp_path / "after.png", **options).wait()
    here = (tmp_path / "here.png").read_bytes()
    assert here[:8] == b"\x89PNG\r\n\x1a\n"
    assert (tmp_path / "helper.png").read_bytes() == here
    assert (tmp_path / "after.png").read_bytes() == here


def test_a_core_counts_as_free_from_the_idle_time_now_not_the_load_average():
    """Two readings of /proc/stat's first line (user, nice, system, idle, iowait, irq, softirq,
    steal), 10 ticks of each of 2 cores apart."""
    start = [1000, 0, 200, 5000, 10, 0, 0, 0]
    both_idle = [1000, 0, 200, 5019, 11, 0, 0, 0]  # 20 of 20 ticks idle or waiting
    one_busy = [1010, 0, 200, 5010, 10, 0, 0, 0]  # a neighbour runs on one core
    assert idle_cores(start, both_idle, 2) == pytest.approx(2.0)
    assert idle_cores(start, one_busy, 2) == pytest.approx(1.0)
    assert idle_cores(start, start, 2) == 0.0  # no time passed: nothing known, nothing free


def _check_in_a_process(case: Path) -> tuple[int, str]:
    code = ("import sys; from fvsolver.cli import main; sys.argv = ['fvsolver', 'check', sys.argv[1], '-q']; "
            "rc = main(); from fvsolver import kernels; print(rc, not kernels.COMPILED)")
    done = subprocess.run([sys.executable, "-c", code, str(case)], capture_output=True, text=True,
                          env={k: v for k, v in __import__("os").environ.items() if k != "NUMBA_DISABLE_JIT"})
    return done.returncode, done.stdout.strip()


def test_check_runs_the_kernels_as_python_up_to_its_size_and_compiled_beyond(tmp_path):
    """`fvsolver check` sets up and evaluates once: at the demo's size the kernels run as their
    Python (loading the compiled code from numba's cache would cost more); a case estimated above
    INTERPRETED_CHECK_CELLS runs them compiled. Both say the case is valid."""
    from fvsolver.cli import INTERPRETED_CHECK_CELLS

    assert _check_in_a_process(ROOT / "cases" / "demo.toml") == (0, "0 True")
    big = tmp_path / "big.toml"
    text = (ROOT / "cases" / "demo.toml").read_text()
    big.write_text(text.replace("[mesh]\n", "[mesh]\nrefinement = 8\n", 1))
    from fvsolver.case import load_case
    from fvsolver.case.limits import estimate

    assert estimate(load_case(big).data).cells > INTERPRETED_CHECK_CELLS
    assert _check_in_a_process(big) == (0, "0 False")
