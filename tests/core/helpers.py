"""Small problems shared by the core tests (meshes built directly from blocks)."""
from __future__ import annotations

import numpy as np

from fvsolver.boundary import Convection, FixedTemperature, PatchCondition
from fvsolver.conduction import ConductionProblem
from fvsolver.materials import Material
from fvsolver.mesh import Block, from_blocks

SIDES = {"i_min": "left", "i_max": "right", "j_min": "bottom", "j_max": "top"}


def rectangle_mesh(nx, ny, width=1.0, height=0.5, warp=0.0, coordinate_system="planar", r0=0.0):
    u, v = np.meshgrid(np.linspace(0, 1, nx + 1), np.linspace(0, 1, ny + 1), indexing="ij")
    x = u + warp * np.sin(np.pi * u) * np.sin(2 * np.pi * v)
    y = v + warp * np.sin(2 * np.pi * u) * np.sin(np.pi * v)
    nodes = np.stack([r0 + x * width, y * height], axis=-1)
    sides = dict(SIDES)
    if coordinate_system == "axisymmetric" and r0 == 0.0:
        sides["i_min"] = "axis"
    return from_blocks([Block(nodes, "solid", sides)], coordinate_system)


def slab_problem(nx=10, ny=4, warp=0.0, k=1.5, rho=2000.0, c=800.0, coordinate_system="planar", r0=0.1):
    mesh = rectangle_mesh(nx, ny, warp=warp, coordinate_system=coordinate_system, r0=r0)
    conditions = [
        PatchCondition("left", (FixedTemperature(320.0),)),
        PatchCondition("right", (Convection(25.0, 290.0),)),
        PatchCondition("bottom", ()),
        PatchCondition("top", (Convection(5.0, 300.0),)),
    ]
    return ConductionProblem(mesh, {"solid": Material.constant("solid", rho, k, c)}, conditions)
