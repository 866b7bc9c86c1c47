"""A run's axisymmetric fields revolved about the axis into 3D cells, for a look at the whole bulb.

Each quadrilateral (r, z) is swept through ``sectors`` equal angles: a cell off the axis becomes a
hexahedron, a cell with an edge on the axis a wedge (its axis nodes shared by every sector), a
cell with a single node on the axis a degenerate hexahedron.  Points are laid out with the axis
along y: (x, y, z) = (r cos phi, z, r sin phi), the axisymmetric outputs' x = r, y = z plane at
phi = 0.  Cell values are copied to every sector; ``cell_volume`` is recomputed for the sector
(2 pi r A x angle / 360 deg), so ParaView's volume integrals stay true.
"""
from __future__ import annotations

import numpy as np

from fvsolver.errors import CaseError

AXIS_TOLERANCE = 1e-12  # m, relative to the mesh size: nodes this close to r = 0 are on the axis


def revolve(nodes: np.ndarray, quads: np.ndarray, cell_data: dict, sectors: int = 36,
            angle_deg: float = 270.0) -> tuple[np.ndarray, dict, dict]:
    """Sweep a meridional mesh about its axis.

    Parameters
    ----------
    nodes : (n_nodes, 2) m, (r, z)
    quads : (n_cells, 4) node indices, counter-clockwise in (r, z)
    cell_data : dict of str to (n_cells,) or (n_cells, k) arrays
    sectors : int, number of angular steps (>= 1)
    angle_deg : float, swept angle in (0, 360] degrees (less than 360 leaves a cut to look inside)

    Returns
    -------
    points : (n_points, 3) m
    cells : dict of VTK cell type name ("hexahedron", "wedge") to (n, 8) / (n, 6) node indices
    data : dict of cell type name to dict of str to arrays (one row per 3D cell)
    """
    if not (isinstance(sectors, (int, np.integer)) and sectors >= 1):
        raise CaseError(f"--sectors: got {sectors!r}, expected a whole number >= 1 (e.g. 36)")
    if not 0.0 < angle_deg <= 360.0:
        raise CaseError(f"--angle: got {angle_deg!r}, expected an angle in (0, 360] degrees (e.g. 270)")
    nodes = np.asarray(nodes, dtype=float)
    quads = np.asarray(quads, dtype=np.int64)
    r, z = nodes[:, 0], nodes[:, 1]
    scale = max(float(np.ptp(nodes, axis=0).max()), 1e-300)
    on_axis = np.abs(r) <= AXIS_TOLERANCE * scale
    full = angle_deg == 360.0
    n_rings = sectors if full else sectors + 1
    phi = np.radians(angle_deg) * np.arange(n_rings) / sectors
    # point ids: one per (ring, node) off the axis, one per axis node
    n = len(nodes)
    ids = np.arange(n_rings)[:, None] * n + np.arange(n)[None, :]
    ids[:, on_axis] = ids[0, on_axis]  # the axis nodes are shared by every ring
    used = np.unique(ids)
    renumber = np.full(n_rings * n, -1, dtype=np.int64)
    renumber[used] = np.arange(used.size)
    ring, node = np.divmod(used, n)
    points = np.column_stack([r[node] * np.cos(phi[ring]), z[node], r[node] * np.sin(phi[ring])])

    def pid(k, q):  # point ids of quad nodes q on ring k
        return renumber[ids[k % n_rings, q]]

    n_axis = on_axis[quads].sum(axis=1)
    wedge_cells = np.flatnonzero(n_axis == 2)
    hex_cells = np.flatnonzero(n_axis != 2)
    if np.any(n_axis > 2):
        raise CaseError("revolve: a cell has more than two nodes on the axis; the mesh is not a meridional mesh")
    # wedges: rotate each quad so that its axis edge comes first (a, b on the axis, then c, d)
    wq = quads[wedge_cells]
    flags = on_axis[wq]
    shift = np.argmax(flags & np.roll(flags, -1, axis=1), axis=1)
    wq = np.take_along_axis(wq, (shift[:, None] + np.arange(4)[None, :]) % 4, axis=1)
    hexes, wedges = [], []
    for k in range(sectors):
        q = quads[hex_cells]
        hexes.append(np.column_stack([pid(k, q[:, j]) for j in range(4)] + [pid(k + 1, q[:, j]) for j in range(4)]))
        a, b, c, d = (wq[:, j] for j in range(4))
        # in meshio's wedge order, which its VTU writer turns into VTK's (a, d0, d1, b, c0, c1)
        wedges.append(np.column_stack([pid(k, a), pid(k + 1, d), pid(k, d), pid(k, b), pid(k + 1, c), pid(k, c)]))
    phi_mid = np.radians(angle_deg) * (np.arange(sectors) + 0.5) / sectors
    cells, data = {}, {}
    for name, cell_ids, blocks in (("hexahedron", hex_cells, hexes), ("wedge", wedge_cells, wedges)):
        if cell_ids.size == 0:
            continue
        cells[name] = np.concatenate(blocks)
        data[name] = {key: _sector_values(np.asarray(v)[cell_ids], phi_mid) for key, v in cell_data.items()}
        if "cell_volume" in data[name]:
            data[name]["cell_volume"] = data[name]["cell_volume"] * (angle_deg / 360.0 / sectors)
    return points, cells, data


def _sector_values(values: np.ndarray, phi_mid: np.ndarray) -> np.ndarray:
    """Cell values for every sector: scalars copied, (r, z, 0) vectors turned to each sector's
    mid-plane, (r cos phi, z, r sin phi)."""
    if values.ndim == 2 and values.shape[1] == 3:
        return np.concatenate([np.column_stack([values[:, 0] * np.cos(p), values[:, 1], values[:, 0] * np.sin(p)])
                               for p in phi_mid])
    return np.concatenate([values] * len(phi_mid))


def revolve_run(folder, sectors: int = 36, angle_deg: float = 270.0) -> list:
    """Revolve every field file of a run's ``fields.pvd``; writes ``revolved_NNNN.vtu`` and
    ``revolved.pvd`` into ``folder``.  Returns the (time, file name) entries written."""
    import xml.etree.ElementTree as ET
    from pathlib import Path

    from fvsolver.vtk_io import read_fields, write_cells, write_pvd

    folder = Path(folder)
    pvd = folder / "fields.pvd"
    if not pvd.is_file():
        raise CaseError(f"revolve {folder}: no fields.pvd there (expected the output folder of a run); "
                        "run the case first or give its --out folder")
    entries = []
    for k, entry in enumerate(ET.parse(pvd).getroot().iter("DataSet")):
        time = float(entry.get("timestep"))
        nodes, quads, cell_data, field_data = read_fields(folder / entry.get("file"))
        if field_data.get("coordinate_system", ("axisymmetric",))[0] != "axisymmetric":
            raise CaseError(f"revolve {folder}: the run is planar, expected an axisymmetric run to revolve")
        points, cells, data = revolve(nodes, quads, cell_data, sectors, angle_deg)
        name = f"revolved_{k:04d}.vtu"
        names = {key: v for key, v in field_data.items() if isinstance(v, tuple)}
        write_cells(folder / name, points, cells, data, names)
        entries.append((time, name))
        write_pvd(folder / "revolved.pvd", entries)
    return entries
