"""The Python interface and the README's notebook-style example, run as written."""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np

import fvsolver

ROOT = Path(__file__).resolve().parents[1]


def test_readme_python_example_runs(tmp_path, monkeypatch):
    readme = (ROOT / "README.md").read_text()
    block = re.search(r"```python\n(.*?)```", readme, re.S).group(1)
    monkeypatch.chdir(ROOT)
    namespace: dict = {}
    exec(compile(block, "README.md", "exec"), namespace)  # the README's own example
    result = namespace["result"]
    assert result.summary["target_reached"] is True
    assert result.history["time_s"].shape == result.history["pressure_drop_pa"].shape
    assert np.all(np.diff(result.history["time_s"]) > 0)


def test_load_case_and_run_return_arrays():
    case = fvsolver.load_case(ROOT / "cases" / "glass_bulb_cooling.toml")
    result = fvsolver.run(case)
    assert result.summary["status"] == "complete"
    assert result.temperature.shape == (result.summary["n_cells"],)
    assert result.summary["energy_balance_relative_error"] < 1e-10
