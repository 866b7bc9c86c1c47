"""Build a case's setup (mesh, materials, conditions, problem) and report a failure as a case error.

``fvsolver check`` and ``fvsolver run`` both go through :func:`build_checked`, so a case that
passes ``check`` is one that ``run`` can set up: a bulb radius of 1e30 m that collapses the
mesh's cells is reported against the case file's [geometry] line, not as a bare mesh error.
"""
from __future__ import annotations

from fvsolver.case.build import Setup, build
from fvsolver.case.loader import Case, CaseErrors, excerpt, line_map
from fvsolver.errors import CaseError, MeshError, PropertyError


def _where(case: Case, key: str) -> str:
    name = str(case.path) if case.path else "<case>"
    return f"{name}:{line_map(case.text).get(key, 1) if case.text else 1}: {key}"


def build_checked(case: Case) -> Setup:
    """:func:`fvsolver.case.build.build`, with every failure of the case's values as a ``CaseErrors``.

    Raises
    ------
    CaseErrors
        ``FILE:LINE: geometry: ...`` when the mesh cannot be built from the geometry, ``FILE:1: case:
        ...`` when a property or condition cannot be set up from the values given.
    """
    try:
        return build(case)
    except MeshError as exc:
        raise CaseErrors([f"{_where(case, 'geometry')}: the mesh cannot be built from these dimensions "
                          f"({excerpt(str(exc), 300)[1:-1]}); check the lengths (m) and cell counts"]) from exc
    except CaseError:
        raise
    except (PropertyError, ValueError, ArithmeticError, MemoryError) as exc:
        # after validation, these come from values too extreme for the model (a radius of 1e30 m)
        raise CaseErrors([f"{_where(case, 'case')}: the case cannot be set up "
                          f"({type(exc).__name__}: {excerpt(str(exc), 300)[1:-1]}); check the sizes and "
                          "property values for extreme numbers"]) from exc
