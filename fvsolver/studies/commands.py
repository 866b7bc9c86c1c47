"""The study commands of the command line: ``envelope``, ``converge`` and ``fit``, and the
``--scheduler`` / ``--workers`` options they share with ``sweep``."""
from __future__ import annotations

import argparse
import contextlib
from pathlib import Path

from fvsolver.errors import CaseError
from fvsolver.exit_codes import EXIT_OK, EXIT_SOLVER

HELP = {
    "envelope": "run a case over a grid of room temperature and humidity; draw where the device runs",
    "converge": "refine the mesh and the time tolerance; observed order, extrapolated value and GCI",
    "fit": "fit uncertain case values to a measured history (bounded least squares)",
}

EXAMPLES = """\
  fvsolver envelope cases/demo.toml --temperature "linspace(288.15,308.15,10)" --humidity "linspace(0.3,0.98,10)" --jobs 2
  fvsolver envelope cases/demo.toml --temperature 293.15,303.15 --humidity 0.5,0.9 --workers 2
  fvsolver converge cases/demo.toml --levels 3 --ratio 1.5 --out results/demo_converge
  fvsolver fit cases/demo.toml --data measured.csv --fit fluid.accommodation_coefficient=0.01:1
"""


def add_engine_options(parser: argparse.ArgumentParser) -> None:
    """``--jobs N`` (local processes), ``--workers N`` (a local Dask cluster), ``--scheduler ADDRESS``."""
    g = parser.add_mutually_exclusive_group()
    g.add_argument("--jobs", type=int, default=1, metavar="N",
                   help="runs at a time, in worker processes on this machine (default 1)")
    g.add_argument("--workers", type=int, default=None, metavar="N",
                   help="runs on a local Dask cluster of N worker processes (needs the 'distributed' extra)")
    g.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="runs on a running Dask cluster, e.g. tcp://10.0.0.5:8786 (the workers need fvsolver "
                        "installed and --out on a filesystem they share)")


def open_engine(args) -> contextlib.AbstractContextManager:
    """A DaskEngine for ``--workers``/``--scheduler``, else a context that gives None."""
    if getattr(args, "workers", None) is None and getattr(args, "scheduler", None) is None:
        return contextlib.nullcontext(None)
    from fvsolver.studies.engine import DaskEngine

    return DaskEngine(scheduler=args.scheduler, workers=args.workers)


def progress_printer(say, engine, jobs: int, describe):
    """A sweep progress callback that prints ``[done/count, running R] what: result (seconds)``."""
    state = {"done": 0}

    def progress(index, count, changes, row):
        state["done"] += 1
        left = count - state["done"]
        running = min(engine.running(), left) if engine is not None else min(jobs, left)
        if row["status"] != "complete":
            result = f"{row['status']}: {row['reason']}"
        elif row.get("outcome"):  # a running device
            period = row.get("period_s") or row.get("last_period_s")
            result = row["outcome"].replace("_", " ") + (f", period {period:.3g} s" if period else "")
            if row["outcome"] == "running" and not row.get("period_s"):
                result += " (not settled)" if period else ""
        elif row["target_reached"] is None:
            result = "complete"
        elif row["target_reached"]:
            result = f"target reached at t = {row['time_to_target_s']:.2f} s"
        else:
            result = "target NOT reached"
        say(f"  [{state['done']}/{count} done, {running} running] {describe(changes)}: {result} "
            f"({row['wall_time_s']:.1f} s)")
    return progress


def add_commands(sub, epilog: str) -> None:
    """Add the study subcommands to the ``fvsolver`` parser."""
    for name, text in HELP.items():
        s = sub.add_parser(name, help=text, description=text, epilog="examples:\n" + EXAMPLES + "\n" + epilog,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        g = s.add_mutually_exclusive_group()
        g.add_argument("-q", "--quiet", action="store_true", help="print errors only")
        g.add_argument("-v", "--verbose", action="store_true", help="print more detail")
        s.add_argument("case", type=Path, help="the TOML case file")
        s.add_argument("--out", type=Path, default=None, help=f"output folder (default: results/<case name>_{name})")
        s.add_argument("--overwrite", action="store_true", help="write into a non-empty output folder")
        if name == "envelope":
            s.add_argument("--temperature", required=True, metavar="K",
                           help="room air temperatures in K: linspace(START,STOP,N) or T1,T2,...")
            s.add_argument("--humidity", required=True, metavar="RH",
                           help="relative humidities (0-1): linspace(START,STOP,N) or RH1,RH2,...")
            s.add_argument("--result", default=None, metavar="KEY",
                           help="the summary result to map (default time_to_target_s)")
            add_engine_options(s)
        if name == "converge":
            s.add_argument("--levels", type=int, default=3, help="refinement levels per study, 3 or more (default 3)")
            s.add_argument("--ratio", type=float, default=1.5,
                           help="refinement ratio of every cell count per level (default 1.5; the tolerance "
                                "falls by its cube, so the steps shorten by it)")
            s.add_argument("--study", action="append", choices=("both", "mesh", "time"), default=None,
                           help="run only these studies (repeat; default all three)")
            s.add_argument("--result", action="append", default=None, metavar="KEY",
                           help="summary results to analyse (repeat; default time_to_target_s, period_s, "
                                "min_temperature_k, max_temperature_k, where present)")
            add_engine_options(s)
        if name == "fit":
            s.add_argument("--data", type=Path, required=True, metavar="MEASURED.csv",
                           help="measured history: time_s and columns named as in history.csv")
            s.add_argument("--fit", action="append", required=True, metavar="KEY[=LOW:HIGH]",
                           help="a case key to fit, with bounds (default: a tenth to ten times its value); repeat")
            s.add_argument("--max-runs", type=int, default=60, metavar="N",
                           help="stop after this many model runs (default 60)")


def _envelope(args, say) -> int:
    from fvsolver.case import load_case
    from fvsolver.studies import headline as hl
    from fvsolver.studies.envelope import HUMIDITY_KEY, TEMPERATURE_KEY, envelope, parse_axis, range_sentences

    case = load_case(args.case)
    temperatures = parse_axis(TEMPERATURE_KEY, args.temperature, "--temperature")
    humidities = parse_axis(HUMIDITY_KEY, args.humidity, "--humidity")
    result = args.result or hl.DEFAULT_HEADLINE
    hl.headline(result)
    out = args.out or Path("results") / f"{args.case.stem}_envelope"

    def describe(changes):
        return f"{changes[TEMPERATURE_KEY] - 273.15:.1f} °C, {100 * changes[HUMIDITY_KEY]:.0f} %"

    with open_engine(args) as engine:
        if engine is not None:
            say(f"running on {engine.description}")
        env = envelope(case, temperatures, humidities, out, result=result, overwrite=args.overwrite,
                       jobs=args.jobs, engine=engine, progress=progress_printer(say, engine, args.jobs, describe))
    for line in range_sentences(env):
        say(line)
    failed = sum(r["status"] == "failed" for r in env.rows)
    say(f"{len(env.rows)} runs, {failed} failed; map in {out / 'envelope.png'}, table in {out / 'envelope.csv'}, "
        f"report in {out / 'envelope.md'}")
    return EXIT_SOLVER if failed else EXIT_OK


def _converge(args, say) -> int:
    from fvsolver.case import load_case
    from fvsolver.studies.converge import QUANTITIES, STUDIES, converge, table
    from fvsolver.studies.engine import LocalEngine

    case = load_case(args.case)
    out = args.out or Path("results") / f"{args.case.stem}_converge"

    def progress(done, count, name, row):
        what = "complete" if row["status"] == "complete" else f"{row['status']}: {row['reason']}"
        say(f"  [{done}/{count} done] {name} ({row['n_cells']} cells, tolerance {row['tolerance']:.3g} K): "
            f"{what} ({row['wall_time_s']:.1f} s)")

    with open_engine(args) as engine:
        runs, results = converge(case, out, levels=args.levels, ratio=args.ratio,
                                 studies=tuple(args.study or STUDIES), quantities=tuple(args.result or QUANTITIES),
                                 overwrite=args.overwrite, engine=engine or LocalEngine(args.jobs), progress=progress)
    say(table(results))
    failed = sum(r["status"] != "complete" for r in runs)
    say(f"{len(runs)} runs, {failed} failed; report in {out / 'converge.md'}")
    return EXIT_SOLVER if failed else EXIT_OK


def _fit(args, say) -> int:
    from fvsolver.case import load_case
    from fvsolver.pipeline import prepare_output
    from fvsolver.studies.fit import fit, parse_fit, read_measured, write_fit_outputs

    case = load_case(args.case)
    keys = [parse_fit(text, case) for text in args.fit]
    data = read_measured(args.data)
    if args.max_runs < len(keys) + 2:
        raise CaseError(f"--max-runs: got {args.max_runs}, expected at least {len(keys) + 2} (a start and a "
                        "Jacobian need that many runs)")
    out = prepare_output(args.out or Path("results") / f"{args.case.stem}_fit", args.overwrite)

    def progress(runs, values, residuals):
        what = ", ".join(f"{k} = {v:.6g}" for k, v in values.items())
        say(f"  run {runs}: {what}: scaled residual rms {float((residuals ** 2).mean()) ** 0.5:.4g}")

    res = fit(case, data, keys, max_runs=args.max_runs, progress=progress)
    write_fit_outputs(out, args.case.name, args.data.name, data, res)
    for k, v, (lo, hi), b in zip(res.keys, res.values, res.intervals, res.at_bound):
        say(f"{k.path} = {v:.6g} (95 % interval {lo:.6g} to {hi:.6g})" + (" ON ITS BOUND" if b else ""))
    say(f"{res.runs} runs; {res.status}")
    say(f"report in {out / 'fit.md'}, plot in {out / 'fit.png'}")
    return EXIT_OK


def handlers(say_for) -> dict:
    """The command name -> handler(args) map; ``say_for(args)`` gives the print function."""
    def wrap(function):
        return lambda args: function(args, say_for(args))
    return {"envelope": wrap(_envelope), "converge": wrap(_converge), "fit": wrap(_fit)}

