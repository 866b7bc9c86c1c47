"""Recover known values of the demo case from a SYNTHETIC measured history.

    python bench/fit_synthetic_demo.py [--out fit_synthetic_demo]

Makes a history with the demo case (cases/demo.toml) run at chosen values of two keys, adds
seeded Gaussian noise, writes it as MEASURED.csv (its first line says it is synthetic), then
runs ``fvsolver fit`` on it from the case's own values and prints each chosen value beside the
fitted value and its 95 % interval. A check of the fit, not a measurement of any device.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from fvsolver.case import load_case  # noqa: E402
from fvsolver.cli import main as cli  # noqa: E402
from fvsolver.studies.fit import FitKey, Measured, Model  # noqa: E402

TRUTH = {"room.air_speed": 0.35, "cap.fibre_conductivity": 0.3}
NOISE = {"pressure_drop_pa": 2.0, "mean_cap_temperature_k": 0.005}  # standard deviations
FITS = ["room.air_speed=0.05:1.5", "cap.fibre_conductivity=0.05:1.0"]


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--case", default="cases/demo.toml")
    p.add_argument("--end", type=float, default=40.0, help="last measured time, s")
    p.add_argument("--out", type=Path, default=Path("fit_synthetic_demo"))
    p.add_argument("--key", action="append", default=None, choices=list(TRUTH),
                   help="fit only these keys (repeat; default both)")
    a = p.parse_args()
    fits = [f for f in FITS if a.key is None or f.split("=")[0] in a.key]
    truth = {k: v for k, v in TRUTH.items() if a.key is None or k in a.key}  # the others stay as in the case
    case = load_case(a.case)
    times = np.linspace(2.0, a.end, 20)
    # the fit's own model at the chosen values (same steps and sampling as its trials), plus noise
    keys = [FitKey(k, 0.5 * v, 2.0 * v, v) for k, v in truth.items()]
    clean = Model(case, keys, Measured(times, {n: np.zeros(times.size) for n in NOISE})).computed(
        np.array(list(truth.values())))
    rng = np.random.default_rng(20261203)
    a.out.mkdir(parents=True, exist_ok=True)
    data = a.out / "MEASURED.csv"
    lines = ["# SYNTHETIC history made by fvsolver from " + a.case + " with "
             + ", ".join(f"{k} = {v}" for k, v in truth.items()) + " plus seeded Gaussian noise ("
             + ", ".join(f"{k} sd {v}" for k, v in NOISE.items()) + "); not a measurement",
             "time_s," + ",".join(NOISE)]
    for i, t in enumerate(times):
        values = [float(clean[n][i]) + rng.normal(0.0, s) for n, s in NOISE.items()]
        lines.append(f"{float(t)!r}," + ",".join(repr(v) for v in values))
    data.write_text("\n".join(lines) + "\n")
    args = ["fit", a.case, "--data", str(data), "--out", str(a.out / "fit"), "--overwrite"]
    for f in fits:
        args += ["--fit", f]
    code = cli(args)
    if code:
        return code
    info = json.loads((a.out / "fit" / "fit.json").read_text())
    inside = True
    for k in info["keys"]:
        true = truth[k["path"]]
        ok = k["low_95"] < true < k["high_95"]
        inside &= ok
        print(f"{k['path']}: chosen {true:g}, fitted {k['value']:.5g}, 95 % interval {k['low_95']:.5g} to "
              f"{k['high_95']:.5g} ({'holds' if ok else 'MISSES'} the chosen value)")
    print(f"{info['runs']} runs; rms residuals {info['rms_residual']}")
    return 0 if inside else 1


if __name__ == "__main__":
    sys.exit(main())
