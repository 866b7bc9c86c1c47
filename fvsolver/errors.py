"""Project exceptions.

Every error raised for bad input names the key path (or mesh item), the value
received, what was expected and how to fix it.
"""
from __future__ import annotations


class FvsolverError(Exception):
    """Base class of every error fvsolver raises on purpose."""


class CaseError(FvsolverError):
    """A case file or case value is invalid."""


class MeshError(FvsolverError):
    """A mesh is invalid (inverted or degenerate cells, unknown patches, untagged cells)."""


class PropertyError(FvsolverError):
    """A property was asked for outside its data range or with invalid arguments."""


class SolverError(FvsolverError):
    """The solver could not advance (non-finite values, a step that will not converge)."""
