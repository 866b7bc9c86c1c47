"""What a run will cost, estimated from the case before anything is allocated.

A case can be valid key by key and still ask for a billion cells, a trillion field files or
more steps than a lifetime: :func:`check_limits` estimates the cells, the memory, the field
files and the steps, and refuses a case beyond the limits in ``[numerics]`` (``max_cells``,
``max_memory_mb``, ``max_output_files``, ``max_steps``), saying what the estimate was and which
key raises the limit.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

# measured on the demo head (refinement 1-16, 328-84,288 cells): ~250 MB for the interpreter and
# its libraries, ~3.4 kB per cell for the arrays, the Jacobian and its factor; taken with a margin
BASE_MEMORY_MB = 300.0
BYTES_PER_CELL = 8_000.0
BYTES_PER_HISTORY_ROW = 1_500.0  # one dict of ~20 floats per accepted step
VTU_HEADER_BYTES = 1 << 16       # the piece header of a VTU file lies in its first bytes

_PIECE = re.compile(rb'NumberOf(Points|Cells)\s*=\s*"\s*(\d+)\s*"')


@dataclass(frozen=True)
class Estimate:
    """The size of a run, from its case.

    Attributes
    ----------
    cells : number of cells (an upper estimate for the parametric shapes)
    memory_mb : MB, peak memory (interpreter, mesh, matrices, fields kept for plots)
    output_files : field files (VTU) the run writes
    steps : fewest time steps the run can take (end / max_step; end / initial_step if fixed)
    """

    cells: int
    memory_mb: float
    output_files: int
    steps: int

    def describe(self) -> str:
        return (f"about {self.cells:,} cells, {self.memory_mb:,.0f} MB, {self.output_files:,} field files, "
                f"at least {self.steps:,} steps")


def vtu_counts(path: Path) -> tuple[int, int]:
    """(points, cells) a VTU file declares in its piece headers, read without expanding the data.

    Returns (-1, -1) when the header cannot be read (the reader then reports the problem).
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(VTU_HEADER_BYTES)
    except (OSError, ValueError):
        return -1, -1
    found = _PIECE.findall(head)
    if not found:
        return -1, -1
    points = sum(int(n) for kind, n in found if kind == b"Points")
    cells = sum(int(n) for kind, n in found if kind == b"Cells")
    return points, cells


def estimate_cells(data) -> int:
    """Cells of the case's mesh, from its counts (parametric shapes) or its file's header."""
    g, m = data["geometry"], data["mesh"]
    f = m["refinement"]
    shape = g["shape"]
    if shape == "mesh_file":
        return max(0, vtu_counts(Path(g["file"]))[1])
    glass, cap, polar = m["glass_cells"] * f, m["cap_cells"] * f, m["polar_cells"] * f
    nr, nz = m["radial_cells"] * f, m["axial_cells"] * f
    if shape == "device_head":  # bulb wall and cap along the meridian, the neck tube's wall
        return (glass + cap) * polar + 2 * glass * m["neck_cells"] * f
    if shape == "whole_device":  # the head as above, the tube, the body's wall and the dip tube's
        return ((glass + cap) * polar + 2 * glass * m["neck_cells"] * f + glass * m["body_polar_cells"] * f
                + 2 * glass * m["dip_tube_cells"] * f)
    if shape == "two_layer_shell":
        return (glass + cap) * polar
    if shape == "spherical_shell":
        return nr * polar
    if shape == "solid_sphere":
        return 6 * nr * nr
    return nr * nz


def estimate(data) -> Estimate:
    """The :class:`Estimate` of a validated case's data (plain or frozen mapping)."""
    cells = estimate_cells(data)
    end, num, out = data["time"]["end"], data["numerics"], data["output"]
    listed = len(out["field_times"])
    files = (listed if listed else out["field_count"]) + 2  # plus the start and the end
    step = num["max_step"] if num["adaptive"] else min(num["initial_step"], num["max_step"])
    steps = end / step
    steps = int(min(math.ceil(steps), 2**62)) if math.isfinite(steps) else 2**62
    kept_fields = min(files, 4096)  # the field arrays kept in memory for the plots
    rows = min(steps, num.get("max_steps", steps))  # a run stops at max_steps
    memory = (BASE_MEMORY_MB * 1e6 + cells * BYTES_PER_CELL + kept_fields * cells * 8.0
              + rows * BYTES_PER_HISTORY_ROW) / 1e6
    return Estimate(int(cells), float(memory), int(files), steps)


def limit_problems(data) -> list[tuple[str, str]]:
    """(key path, message) of each limit the case's estimate passes; empty when it fits."""
    e, num = estimate(data), data["numerics"]
    problems = []
    if e.cells > num["max_cells"]:
        key = "geometry.file" if data["geometry"]["shape"] == "mesh_file" else "mesh"
        problems.append((key, f"the mesh would have about {e.cells:,} cells, more than numerics.max_cells = "
                              f"{num['max_cells']:,}; use fewer cells, or raise numerics.max_cells if the "
                              "machine can hold it"))
    if e.output_files > num["max_output_files"]:
        key = "output.field_times" if data["output"]["field_times"] else "output.field_count"
        problems.append((key, f"the run would write {e.output_files:,} field files, more than "
                              f"numerics.max_output_files = {num['max_output_files']:,}; ask for fewer, or raise "
                              "numerics.max_output_files"))
    if e.steps > num["max_steps"]:
        key = "numerics.max_step" if num["adaptive"] else "numerics.initial_step"
        problems.append((key, f"the run needs at least {e.steps:,} steps (time.end = {data['time']['end']:g} s "
                              f"in steps of at most {data['time']['end'] / e.steps:.3g} s), more than "
                              f"numerics.max_steps = {num['max_steps']:,}; shorten time.end, allow longer steps, "
                              "or raise numerics.max_steps"))
    if not problems and e.memory_mb > num["max_memory_mb"]:
        problems.append(("mesh", f"the run would need about {e.memory_mb:,.0f} MB ({e.describe()}), more than "
                                 f"numerics.max_memory_mb = {num['max_memory_mb']:,.0f}; use fewer cells, steps or "
                                 "field outputs, or raise numerics.max_memory_mb"))
    return problems
