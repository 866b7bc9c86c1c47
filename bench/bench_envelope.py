"""Wall time of a climate envelope run three ways, side by side on this machine.

    python bench/bench_envelope.py [--case cases/demo.toml] [--temperature "linspace(288.15,308.15,10)"]
                                   [--humidity "linspace(0.3,0.98,10)"] [--modes serial,jobs2,dask2]
                                   [--out bench_envelope_results]

Modes: ``serial`` (one run after the other in this process), ``jobsN`` (N local worker
processes, ``--jobs N``), ``daskN`` (a local Dask cluster of N worker processes, ``--workers N``).
Every mode maps the same grid; the script checks that each room's headline result, outcome
and step count are the same bits in every mode, and prints the wall times and the speed-up
against ``serial``. Run it alone: the machine's other load shows in the times.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from fvsolver.case import load_case  # noqa: E402
from fvsolver.studies.envelope import HUMIDITY_KEY, TEMPERATURE_KEY, envelope, parse_axis  # noqa: E402


def run_mode(mode: str, case, temperatures, humidities, out: Path) -> tuple[float, list[dict]]:
    engine = None
    jobs = 1
    start = time.perf_counter()  # a mode's time includes starting its workers
    if mode.startswith("jobs"):
        jobs = int(mode[4:])
    elif mode.startswith("dask"):
        from fvsolver.studies.engine import DaskEngine

        engine = DaskEngine(workers=int(mode[4:]))
    try:
        env = envelope(case, temperatures, humidities, out / mode, overwrite=True, jobs=jobs, engine=engine)
    finally:
        if engine is not None:
            engine.close()
    return time.perf_counter() - start, env.rows


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--case", default="cases/demo.toml")
    p.add_argument("--temperature", default="linspace(288.15,308.15,10)")
    p.add_argument("--humidity", default="linspace(0.3,0.98,10)")
    p.add_argument("--modes", default="serial,jobs2,dask2")
    p.add_argument("--out", type=Path, default=Path("bench_envelope_results"))
    a = p.parse_args()
    case = load_case(a.case)
    temperatures = parse_axis(TEMPERATURE_KEY, a.temperature, "--temperature")
    humidities = parse_axis(HUMIDITY_KEY, a.humidity, "--humidity")
    n = len(temperatures.values) * len(humidities.values)
    results, tables = {}, {}
    for mode in a.modes.split(","):
        seconds, rows = run_mode(mode, case, temperatures, humidities, a.out)
        results[mode] = seconds
        tables[mode] = [(r["time_to_target_s"], r["outcome"], r["status"]) for r in rows]
        print(f"{mode:>8}: {n} runs in {seconds:8.1f} s ({seconds / n:.2f} s a run)", flush=True)
    first = next(iter(tables.values()))
    same = all(t == first for t in tables.values())
    base = results.get("serial")
    for mode, seconds in results.items():
        if base:
            print(f"{mode:>8}: speed-up {base / seconds:.2f}x against serial")
    runs = sum(o[1] == "target reached" for o in first)
    print(f"same results in every mode: {same}; the device runs in {runs} of {n} rooms")
    info = {"case": a.case, "grid": {TEMPERATURE_KEY: list(temperatures.values), HUMIDITY_KEY: list(humidities.values)},
            "wall_time_s": results, "same_results": same, "cores": os.cpu_count(),
            "load_average_at_end": os.getloadavg(), "platform": platform.platform()}
    a.out.mkdir(parents=True, exist_ok=True)
    (a.out / "bench_envelope.json").write_text(json.dumps(info, indent=2))
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
