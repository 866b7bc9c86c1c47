"""Structured, body-fitted meshes of the meridional half-plane (or a planar section)."""
from __future__ import annotations

from fvsolver.mesh.core import AXIS_PATCH, Block, Mesh, from_blocks

__all__ = ["AXIS_PATCH", "Block", "Mesh", "from_blocks"]
