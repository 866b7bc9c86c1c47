"""The command line: ``fvsolver run | sweep | compare | check | mesh | verify``."""
from __future__ import annotations

import argparse
import gc
import os
import sys
import traceback
from pathlib import Path

from fvsolver import __version__
from fvsolver.errors import CaseError, FvsolverError, MeshError, SolverError
from fvsolver.exit_codes import EXIT_CASE, EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_OK, EXIT_SOLVER
from fvsolver.safeguards import Terminated, stop_signals_as_interrupt
from fvsolver.studies.commands import add_commands as add_study_commands
from fvsolver.studies.commands import add_engine_options, open_engine
from fvsolver.studies.commands import handlers as study_handlers

EXIT_DIFFERS = 1  # compare: a difference beyond its tolerance (as diff does)

EPILOG = """\
examples:
  fvsolver run cases/demo.toml --out results/demo
  fvsolver run cases/demo.toml --resume results/demo     (continue a killed run)
  fvsolver sweep cases/demo.toml --vary "room.relative_humidity=linspace(0.3,0.8,6)" \
                 --vary room.air_temperature=293.15,298.15 --out results/humidity
  fvsolver compare results/demo baselines/demo          (a regression check against a kept run)
  fvsolver check cases/glass_bulb_cooling.toml
  fvsolver mesh cases/glass_bulb_cooling.toml --out meshes/head.vtu
  fvsolver verify --out verification
  fvsolver revolve results/demo --angle 270            (3D cells of the fields, for ParaView)
  fvsolver keys room                                   (case keys with unit, default, range)
  fvsolver new my_head.toml                            (a commented starter case)

exit codes: 0 success (a target not reached is a result, not an error), 1 compare: differences
beyond the tolerances, 2 bad case file or arguments, 3 solver failure or a non-physical state,
4 internal error, 130 interrupted (Ctrl-C), 143 stopped by SIGTERM
"""


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="fvsolver", description="Axisymmetric conduction-evaporation finite "
                                "volumes for wet-cap vapour-pressure devices.", epilog=EPILOG,
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--version", action="version", version=f"fvsolver {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    for name, text in (("run", "run a case and write its outputs"),
                       ("sweep", "run a case over a grid of changed keys; one table row per run"),
                       ("compare", "compare a run's outputs with a baseline run's, within tolerances"),
                       ("check", "validate a case file only"),
                       ("mesh", "write the case's mesh as VTU"), ("verify", "run the verification cases"),
                       ("revolve", "revolve a run's fields about the axis into 3D cells for ParaView"),
                       ("keys", "list every case-file key with its unit, default and range"),
                       ("new", "write a commented starter case file")):
        s = sub.add_parser(name, help=text, description=text, epilog=EPILOG,
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        g = s.add_mutually_exclusive_group()
        g.add_argument("-q", "--quiet", action="store_true", help="print errors only")
        g.add_argument("-v", "--verbose", action="store_true", help="print more detail")
        if name in ("run", "sweep", "check", "mesh"):
            s.add_argument("case", type=Path, help="the TOML case file")
        if name == "run":
            s.add_argument("--out", type=Path, default=None, help="output folder (default: results/<case name>)")
            s.add_argument("--overwrite", action="store_true", help="write into a non-empty output folder")
            s.add_argument("--resume", type=Path, default=None, metavar="DIR",
                           help="continue the killed or interrupted run whose outputs are in DIR")
            s.add_argument("--checkpoint-every", type=float, default=30.0, metavar="SECONDS",
                           help="wall-clock seconds between checkpoints (default 30; 0: every step)")
            s.add_argument("--no-uncertainty", dest="uncertainty", action="store_false",
                           help="skip the two cheaper companion runs that estimate the numerical "
                                "uncertainty of the time to target")
        if name == "sweep":
            s.add_argument("--vary", action="append", default=[], metavar="KEY.PATH=VALUES", required=True,
                           help="a key and its values: V1,V2,... (TOML values) or linspace(START,STOP,N); repeat "
                                "for a grid (the first key varies slowest)")
            s.add_argument("--out", type=Path, default=None, help="output folder (default: results/<case name>_sweep)")
            s.add_argument("--overwrite", action="store_true", help="write into a non-empty output folder")
            s.add_argument("--plots", action="store_true", help="also draw every run's own plots and report")
            add_engine_options(s)  # --jobs N, or --workers N / --scheduler ADDRESS (Dask)
        if name == "compare":
            s.add_argument("new", type=Path, help="output folder of the run to check")
            s.add_argument("baseline", type=Path, help="output folder of the baseline run")
            s.add_argument("--rtol", type=float, default=1e-3,
                           help="relative tolerance of times and pressures (default 1e-3)")
            s.add_argument("--temperature-tol", type=float, default=0.01, metavar="K",
                           help="absolute tolerance of temperatures in K (default 0.01)")
            s.add_argument("--history-rtol", type=float, default=1e-2,
                           help="tolerance of the pressure-difference history, relative to its largest "
                                "value or the target (default 1e-2)")
            s.add_argument("--json", type=Path, default=None, help="also write the checks to this JSON file")
        if name == "mesh":
            s.add_argument("--out", type=Path, required=True, help="the VTU file to write")
            s.add_argument("--overwrite", action="store_true", help="replace an existing file")
        if name == "keys":
            s.add_argument("prefix", nargs="?", default=None, help="only keys starting with this (e.g. room)")
        if name == "new":
            s.add_argument("file", type=Path, help="the case file to write (refused if it exists)")
            s.add_argument("--whole-device", action="store_true",
                           help="a whole running device (head, tube, body, pool, dip cycle) instead of a head")
        if name == "revolve":
            s.add_argument("folder", type=Path, help="output folder of a run (holding fields.pvd)")
            s.add_argument("--sectors", type=int, default=36, help="angular steps (default 36)")
            s.add_argument("--angle", type=float, default=270.0, metavar="DEG",
                           help="swept angle in degrees (default 270: a cut-away to see inside; 360: whole)")
        if name == "verify":
            s.add_argument("--out", type=Path, default=Path("verification"), help="folder for the report")
            s.add_argument("--slow", action="store_true", help="add the finest refinement levels")
            s.add_argument("--case", action="append", default=None, help="run only cases whose name contains this")
    add_study_commands(sub, EPILOG)  # envelope, converge, fit
    return p


def _say(args, text: str) -> None:
    if not args.quiet:
        print(text)


def _run(args) -> int:
    import contextlib

    from fvsolver.outputs.painter import Painter, idle_core

    # on a free core, a helper process imports the plotting while this one sets up and steps
    with Painter() if idle_core() else contextlib.nullcontext() as painter:
        return _run_case(args, painter)


def _run_case(args, painter) -> int:
    from fvsolver.case import load_case

    if args.resume is not None and args.out is not None and args.out.resolve() != args.resume.resolve():
        raise CaseError(f"--resume {args.resume} --out {args.out}: a resumed run continues in its own folder; "
                        "leave out --out (or copy the folder first and resume the copy)")
    case = load_case(args.case)  # a case-file error is reported before the solver is imported
    from fvsolver.pipeline import run

    out = args.resume or args.out or Path("results") / args.case.stem
    if args.resume is None and not args.overwrite:
        out = _fresh_folder(args, out)
    bar = ProgressBar(case["time"]["end"]) if sys.stderr.isatty() and not args.quiet else None
    try:
        with stop_signals_as_interrupt() as stop:  # SIGTERM stops the run as Ctrl-C does
            result = run(case, out, overwrite=args.overwrite, argv=sys.argv, resume=args.resume is not None,
                         progress=bar, checkpoint_every=args.checkpoint_every,
                         uncertainty=args.uncertainty and args.resume is None, painter=painter)
    finally:
        if bar is not None:
            bar.close()
    _input_warnings(case)  # after the set-up, so that a case that cannot be set up shows its error alone
    s = result.summary
    _say(args, f"{s['title'] or args.case.stem}: {s['status']} at t = {s['end_time_s']:.6g} s "
               f"({s['n_steps']} steps, {s['n_cells']} cells)")
    if s.get("outcome"):
        _say(args, "  " + cycle_lines(s))
    elif s.get("target_pressure_drop_pa") is not None:
        if s["target_reached"]:
            _say(args, f"  target {s['target_pressure_drop_pa']:.0f} Pa reached at t = {s['time_to_target_s']:.2f} s")
        elif s["target_reached"] is False:
            _say(args, f"  target {s['target_pressure_drop_pa']:.0f} Pa NOT reached: {s['stall_reason']}")
        else:
            _say(args, f"  target {s['target_pressure_drop_pa']:.0f} Pa not reached before the run stopped "
                       f"({s['status']}; largest difference {s['max_pressure_drop_pa']:.0f} Pa)")
        u = s.get("numerical_uncertainty") or {}
        if "total_relative" in u:
            _say(args, "  numerical uncertainty of the time to target: " + ", ".join(
                f"{k.replace('_', ' ')} ±{v['estimate_s']:.2g} s" for k, v in u.items() if isinstance(v, dict)
                and "estimate_s" in v) + f" (together ±{100 * u['total_relative']:.2g} %)")
        if s.get("field_times_not_reached_s"):
            _say(args, f"  the run stopped at t = {s['end_time_s']:.6g} s: field times " + ", ".join(
                f"{t:g}" for t in s["field_times_not_reached_s"]) + " s were not reached"
                + (" (a field was written at the target crossing)" if s["target_reached"] else ""))
    if s.get("max_internal_pressure_pa") is not None:
        _say(args, f"  largest internal pressure {s['max_internal_pressure_pa']:.0f} Pa, largest glass temperature "
                   f"{s['max_glass_temperature_k']:.2f} K")
    for w in s["warnings"]:
        _say(args, f"  WARNING: {w}")
    mass = ", ".join(f"{k} {v:.1e}" for k, v in s["mass_balance_relative_error"].items())
    _say(args, f"  temperature {s['min_temperature_k']:.3f} .. {s['max_temperature_k']:.3f} K; "
               f"energy balance error {s['energy_balance_relative_error']:.2e}" + (f"; mass {mass}" if mass else ""))
    if args.verbose:
        for key in ("n_rejected_steps", "n_newton_failures", "n_newton_iterations", "end_time_s"):
            _say(args, f"  {key}: {s[key]}")
        if s.get("room"):
            _say(args, "  room: " + ", ".join(f"{k} {v:.4g}" if v is not None else f"{k} none"
                                              for k, v in s["room"].items()))
    _say(args, f"  outputs in {out}")
    if s["status"] == "interrupted":
        return stop.exit_code or EXIT_INTERRUPTED
    return EXIT_OK


def cycle_lines(s: dict) -> str:
    """A whole device's outcome in a few printed lines."""
    out = f"outcome: {s['outcome'].replace('_', ' ')} - {s['outcome_reason']}"
    if s.get("first_tip_s") is not None:
        out += f"\n  first tip at t = {s['first_tip_s']:.2f} s; {s['n_cycles']} tips"
    if s.get("period_s"):
        out += (f"\n  period {s['period_s']:.3f} s ({s['dips_per_hour']:.0f} dips per hour); water "
                f"{1e6 * s['water_per_dip_kg']:.2f} mg per dip, {1e3 * s['water_per_day_kg']:.1f} g per day; "
                f"evaporative cooling {s['evaporative_cooling_w']:.3f} W")
    elif s.get("last_period_s"):
        out += f"\n  last period {s['last_period_s']:.3f} s (not settled)"
    return out


def _sweep(args) -> int:
    from fvsolver.case import load_case
    from fvsolver.sweeps import parse_vary, sweep

    case = load_case(args.case)
    varies = [parse_vary(text) for text in args.vary]
    out = args.out or Path("results") / f"{args.case.stem}_sweep"

    def progress(index, count, changes, row):
        what = ", ".join(f"{k} = {v:g}" if isinstance(v, float) else f"{k} = {v}" for k, v in changes.items())
        if row["status"] != "complete":
            result = f"{row['status']}: {row['reason']}"
        elif row["target_reached"] is None:
            result = "complete"
        elif row["target_reached"]:
            result = f"target reached at t = {row['time_to_target_s']:.2f} s"
        else:
            result = f"target NOT reached: {row['stall_reason']}"
        running = f", {engine.running()} running" if engine is not None else ""
        _say(args, f"  [{index + 1}/{count}{running}] {what}: {result} ({row['wall_time_s']:.1f} s)")

    # SIGTERM stops the sweep (and its workers' runs) as Ctrl-C does
    with stop_signals_as_interrupt(), open_engine(args) as engine:
        rows = sweep(case, varies, out, overwrite=args.overwrite, plots=args.plots, progress=progress,
                     jobs=args.jobs, engine=engine)
    failed = sum(r["status"] == "failed" for r in rows)
    _say(args, f"{len(rows)} runs, {failed} failed; table in {out / 'sweep.csv'}")
    return EXIT_SOLVER if failed else EXIT_OK


def _compare(args) -> int:
    import json

    from fvsolver.compare import compare
    from fvsolver.outputs.files import atomic_write_text

    result = compare(args.new, args.baseline, rtol=args.rtol, temperature_tol=args.temperature_tol,
                     history_rtol=args.history_rtol)
    _say(args, f"{args.new} against the baseline {args.baseline}:")
    _say(args, result.table())
    failed = [c.quantity for c in result.checks if c.passed is False]
    if args.json is not None:
        from fvsolver.outputs.paths import output_file

        atomic_write_text(output_file(args.json, overwrite=True, option="--json", example="checks.json"),
                          json.dumps(result.as_dict(), indent=2, default=str))
    if failed:
        print(f"DIFFERS in {len(failed)} of {len(result.checks)} checks: {', '.join(failed)}",
              file=sys.stderr if args.quiet else sys.stdout)
        return EXIT_DIFFERS
    _say(args, f"same within the tolerances ({len(result.checks)} checks)")
    return EXIT_OK


def _input_warnings(case) -> None:
    """Valid but implausible inputs (a unit slip, most often), on stderr."""
    from fvsolver.case.units import implausible

    for text in implausible(case.data):
        print(f"warning: {text}", file=sys.stderr)


def _fresh_folder(args, out: Path) -> Path:
    """A folder that holds an earlier run (its run_info.json) is kept: the new run goes to the
    first free ``NAME-2``, ``NAME-3`` ... beside it, and the user is told.  Any other non-empty
    folder is refused later, as before."""
    if not (out.is_dir() and (out / "run_info.json").is_file()):
        return out
    k = 2
    while (fresh := out.with_name(f"{out.name}-{k}")).exists():
        k += 1
    print(f"note: {out} holds an earlier run, kept as it is; writing to {fresh} "
          "(pass --overwrite to replace the earlier run)", file=sys.stderr)
    return fresh


class ProgressBar:
    """One line on the terminal: simulated time against the end time, step, and for a device the
    pressure difference against the target, each with a bar."""

    def __init__(self, end_time: float, width: int = 20):
        import time

        self.end, self.width, self.clock, self.last = end_time, width, time.monotonic, 0.0

    def __call__(self, stepper, monitor) -> None:
        now = self.clock()
        if now - self.last < 0.2:
            return
        self.last = now
        text = f"\r{self.bar(stepper.t / self.end)} time {stepper.t:9.3f} s  dt = {stepper.last_dt:8.3g} s"
        if monitor is not None:
            # a run that stops at its target ends long before time.end: show that progress too
            p = monitor.problem.pressures(stepper.y)["pressure_drop_pa"]
            target = monitor.target(stepper.y)
            text += f"  {self.bar(p / target if target > 0 else 0.0, self.width // 2)} dp {p:7.1f} / {target:.1f} Pa"
        sys.stderr.write(text)
        sys.stderr.flush()

    def bar(self, fraction: float, width: int | None = None) -> str:
        """``[#####.....]`` filled to ``fraction`` (clipped to 0..1)."""
        width = width or self.width
        filled = int(min(1.0, max(0.0, fraction)) * width)
        return "[" + "#" * filled + "." * (width - filled) + "]"

    def close(self) -> None:
        sys.stderr.write("\n")


# up to this many cells (the limits' estimate) `check` runs the kernels as Python
INTERPRETED_CHECK_CELLS = 20_000


def _check(args) -> int:
    if args.program and "numpy" not in sys.modules:
        # a check solves nothing: numpy's BLAS need not start its threads (about 25 ms of a check);
        # only in a process of its own, and a user's own setting is kept
        os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    from fvsolver.case import load_case

    from fvsolver.case.limits import estimate

    case = load_case(args.case)  # a case-file error is reported before the solver is imported
    if args.program and estimate(case.data).cells <= INTERPRETED_CHECK_CELLS and "numba" not in sys.modules:
        # one set-up and one evaluation: the kernels' Python (tested equal to the compiled code) is
        # quicker than loading their compiled code from numba's cache (about 1 s of the check at
        # the demo's size); a user's own NUMBA_DISABLE_JIT setting is kept. Only in a process of its
        # own: the setting holds for the whole process once numba is imported
        os.environ.setdefault("NUMBA_DISABLE_JIT", "1")
    from fvsolver.case.setup_check import build_checked

    build_checked(case)
    _input_warnings(case)  # only for a case that can be set up: its errors come first
    _say(args, f"{args.case}: valid (schema {case['schema_version']}, sha256 {case.sha256[:12]}; "
               f"{estimate(case.data).describe()})")
    return EXIT_OK


def _mesh(args) -> int:
    from fvsolver.case import load_case
    from fvsolver.case.build import build_mesh
    from fvsolver.vtk_io import write_mesh

    from fvsolver.outputs.paths import output_file

    output_file(args.out, args.overwrite, example="mesh.vtu")  # before the work, as run checks its --out
    case = load_case(args.case)
    try:
        mesh = build_mesh(case)
    except MeshError:
        from fvsolver.case.setup_check import build_checked

        mesh = build_checked(case).mesh  # raises the failure against the case file's line
    write_mesh(mesh, args.out)
    _say(args, f"wrote {args.out}: {mesh.n_cells} cells, patches {', '.join(mesh.patch_names)}")
    return EXIT_OK


def _verify(args) -> int:
    from fvsolver.verification.runner import format_table, run_all, write_outputs

    reports = run_all(args.case, slow=args.slow)
    json_path, png_path = write_outputs(reports, args.out)
    _say(args, format_table(reports))
    _say(args, f"wrote {json_path} and {png_path}")
    return EXIT_OK if all(c.passed for r in reports for c in r.checks) else EXIT_SOLVER


def _revolve(args) -> int:
    from fvsolver.revolve import revolve_run

    entries = revolve_run(args.folder, args.sectors, args.angle)
    _say(args, f"wrote {args.folder / 'revolved.pvd'}: {len(entries)} times, {args.sectors} sectors over "
               f"{args.angle:g} deg")
    return EXIT_OK


def _keys(args) -> int:
    import shutil

    from fvsolver.case.docs import keys_table

    print(keys_table(shutil.get_terminal_size((100, 24)).columns, args.prefix))
    return EXIT_OK


def _new(args) -> int:
    from fvsolver.case.docs import starter_case
    from fvsolver.outputs.files import atomic_write_text

    if args.file.exists():
        raise CaseError(f"new {args.file}: the file exists (expected a new file name); choose another name")
    args.file.parent.mkdir(parents=True, exist_ok=True)
    atomic_write_text(args.file, starter_case(whole_device=args.whole_device))
    _say(args, f"wrote {args.file}: edit it, check it with `fvsolver check {args.file}`, run it with "
               f"`fvsolver run {args.file}`")
    return EXIT_OK


def main(argv: list[str] | None = None) -> int:
    """The command line; ``argv`` None: this process's own arguments (a program of its own, which
    may choose process-wide settings such as how the kernels run)."""
    args = _parser().parse_args(argv)
    args.program = argv is None
    handler = {"run": _run, "sweep": _sweep, "compare": _compare, "check": _check, "mesh": _mesh,
               "verify": _verify, "revolve": _revolve, "keys": _keys, "new": _new,
               **study_handlers(lambda a: lambda text: _say(a, text))}[args.command]
    code = _handled(handler, args)
    if args.program:
        # The process ends next: its last garbage collection would walk every object the run made and
        # imported (0.4-0.5 s after a demo run, all of it freeing memory the OS frees anyway).  Frozen,
        # they are left to the OS; files are closed and exit handlers run as usual.
        gc.freeze()
    return code


def _handled(handler, args) -> int:
    """``handler(args)``, with every failure turned into its message and exit code."""
    try:
        return handler(args)
    except (CaseError, MeshError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_CASE
    except SolverError as exc:
        print(f"solver failure: {exc}", file=sys.stderr)
        return EXIT_SOLVER
    except KeyboardInterrupt as exc:
        print("interrupted", file=sys.stderr)
        return 128 + exc.signum if isinstance(exc, Terminated) else EXIT_INTERRUPTED
    except FvsolverError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_CASE
    except Exception:  # an internal error: say so plainly, with the traceback for a bug report
        traceback.print_exc()
        print("internal error: this is a bug in fvsolver; please report it with the case file",
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
