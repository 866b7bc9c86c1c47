"""fvsolver: axisymmetric conduction-evaporation finite volumes for wet-cap vapour-pressure devices."""
from __future__ import annotations

__version__ = "0.1.0"
