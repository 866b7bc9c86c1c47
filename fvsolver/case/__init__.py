"""Case files: the TOML schema, validation with line numbers, and the frozen case."""
from __future__ import annotations

from fvsolver.case.loader import Case, CaseErrors, load_case

__all__ = ["Case", "CaseErrors", "load_case"]
