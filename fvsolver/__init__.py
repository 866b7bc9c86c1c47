"""fvsolver: axisymmetric conduction-evaporation finite volumes for wet-cap vapour-pressure devices."""
from __future__ import annotations

__version__ = "0.1.0"


def load_case(path):
    """Read, validate and freeze a TOML case file (see :func:`fvsolver.case.load_case`)."""
    from fvsolver.case import load_case as _load

    return _load(path)


def run(case, out=None, **options):
    """Run a case (a path or a loaded case); returns a Result with ``summary``, ``history``
    (arrays), ``temperature`` (the final field) and ``state`` (see :func:`fvsolver.pipeline.run`)."""
    from fvsolver.pipeline import run as _run

    if not hasattr(case, "sha256"):
        case = load_case(case)
    return _run(case, out, **options)


def sweep(case, vary: dict, out=None, **options):
    """Run a case (a path or a loaded case) over the grid of ``vary`` (dotted key path -> list of
    values, the first key slowest); returns one dict per run (see :func:`fvsolver.sweeps.sweep`)."""
    from fvsolver.sweeps import Vary, sweep as _sweep

    if not hasattr(case, "sha256"):
        case = load_case(case)
    return _sweep(case, [Vary(k, tuple(v)) for k, v in vary.items()], out, **options)
