"""The mesh: a frozen dataclass of plain arrays, built from logically rectangular blocks.

Metrics are explicit.  In the ``"axisymmetric"`` system the first coordinate is the
radius r >= 0 and the second the axial coordinate z; volumes and face areas are full
revolutions (times 2 pi):

.. math:: V_P = 2\\pi \\bar r_P A_P, \\qquad A_f = 2\\pi r_f \\ell_f

(Pappus' theorems, exact for straight-edged cells).  In the ``"planar"`` system the
coordinates are (x, y) and volumes and areas are per metre of depth.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from fvsolver.errors import MeshError

AXIS_PATCH = "axis"
COORDINATE_SYSTEMS = ("axisymmetric", "planar")
SIDES = ("i_min", "i_max", "j_min", "j_max")


def distinct(values: np.ndarray) -> np.ndarray:
    """The sorted distinct values of a 1-D array of numbers (no NaN): ``np.unique(values)``
    without its masked-array check, which imports numpy.ma (15 ms of a `check`'s start-up)."""
    values = np.sort(np.asarray(values).ravel())
    if values.size < 2:
        return values
    keep = np.empty(values.size, dtype=bool)
    keep[0] = True
    np.not_equal(values[1:], values[:-1], out=keep[1:])
    return values[keep]


@dataclass(frozen=True)
class Block:
    """A logically rectangular block of quadrilateral cells.

    Parameters
    ----------
    nodes : (ni + 1, nj + 1, 2) float
        Node coordinates; cell (i, j) has corners (i, j), (i+1, j), (i+1, j+1), (i, j+1).
    material : str
        Material tag of every cell of the block.
    patches : dict
        Side name (``"i_min"``, ``"i_max"``, ``"j_min"``, ``"j_max"``) to a patch name,
        or to a sequence of patch names, one per face along that side.  A side that is
        joined to another block is left out (or given ``None``).
    """

    nodes: np.ndarray
    material: str
    patches: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Mesh:
    """A 2D mesh of quadrilaterals with face connectivity and metrics.

    Attributes
    ----------
    coordinate_system : {"axisymmetric", "planar"}
    nodes : (n_nodes, 2) float, m
    cells : (n_cells, 4) int, counter-clockwise node indices
    cell_material : (n_cells,) int, index into ``material_names``
    material_names : tuple of str
    cell_centres : (n_cells, 2) float, m, area centroids
    cell_areas : (n_cells,) float, m2, plane areas
    cell_volumes : (n_cells,) float, m3 (axisymmetric: 2 pi r A; planar: per metre depth)
    face_nodes : (n_faces, 2) int, interior faces
    owner, neighbour : (n_faces,) int, owner < neighbour
    face_centres : (n_faces, 2) float, m
    face_normals : (n_faces, 2) float, unit normals pointing from owner to neighbour
    face_areas : (n_faces,) float, m2 (axisymmetric: 2 pi r_f l_f)
    boundary_nodes : (n_boundary, 2) int
    boundary_cell : (n_boundary,) int
    boundary_centres : (n_boundary, 2) float, m
    boundary_normals : (n_boundary, 2) float, outward unit normals
    boundary_areas : (n_boundary,) float, m2 (zero on the axis)
    boundary_patch : (n_boundary,) int, index into ``patch_names``
    patch_names : tuple of str
    """

    coordinate_system: str
    nodes: np.ndarray
    cells: np.ndarray
    cell_material: np.ndarray
    material_names: tuple
    cell_centres: np.ndarray
    cell_areas: np.ndarray
    cell_volumes: np.ndarray
    face_nodes: np.ndarray
    owner: np.ndarray
    neighbour: np.ndarray
    face_centres: np.ndarray
    face_normals: np.ndarray
    face_areas: np.ndarray
    boundary_nodes: np.ndarray
    boundary_cell: np.ndarray
    boundary_centres: np.ndarray
    boundary_normals: np.ndarray
    boundary_areas: np.ndarray
    boundary_patch: np.ndarray
    patch_names: tuple

    @property
    def n_cells(self) -> int:
        return int(self.cells.shape[0])

    @property
    def n_faces(self) -> int:
        return int(self.owner.shape[0])

    @property
    def n_boundary(self) -> int:
        return int(self.boundary_cell.shape[0])

    def patch_faces(self, name: str) -> np.ndarray:
        """Indices of the boundary faces of patch ``name``."""
        if name not in self.patch_names:
            raise MeshError(
                f"patch {name!r}: no such patch (got {name!r}, expected one of "
                f"{', '.join(self.patch_names)}); check the patch name in the case file"
            )
        return np.flatnonzero(self.boundary_patch == self.patch_names.index(name))

    def material_cells(self, name: str) -> np.ndarray:
        """Indices of the cells tagged with material ``name``."""
        if name not in self.material_names:
            raise MeshError(
                f"material {name!r}: no such material tag (got {name!r}, expected one of "
                f"{', '.join(self.material_names)}); check the material name"
            )
        return np.flatnonzero(self.cell_material == self.material_names.index(name))

    def require_patches(self, expected, where: str = "mesh") -> None:
        """Refuse a mesh whose patch names differ from ``expected`` (unknown or missing)."""
        expected = set(expected)
        unknown = sorted(set(self.patch_names) - expected)
        missing = sorted(expected - set(self.patch_names))
        if unknown or missing:
            raise MeshError(
                f"{where}: patch names do not match (got {sorted(self.patch_names)}, expected "
                f"{sorted(expected)}; unknown {unknown}, missing {missing}); rename the patches "
                "in the mesh file or regenerate it from the case"
            )

    def patch_area(self, name: str) -> float:
        """Total area of a patch, m2 (full revolution in the axisymmetric system)."""
        return float(self.boundary_areas[self.patch_faces(name)].sum())


def polygon_metrics(nodes: np.ndarray, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Signed plane areas and area centroids of quadrilaterals.

    .. math:: A = \\tfrac12 \\sum_k (x_k y_{k+1} - x_{k+1} y_k)

    Returns
    -------
    areas : (n_cells,) float, positive for counter-clockwise cells
    centroids : (n_cells, 2) float
    """
    # about each cell's first node: the shoelace sums then cancel only cell-sized products, so
    # the centroid's rounding stays ~ eps |x| instead of growing as (|x| / cell size)^2
    x0 = nodes[cells[:, 0], 0]
    y0 = nodes[cells[:, 0], 1]
    x = nodes[cells, 0] - x0[:, None]
    y = nodes[cells, 1] - y0[:, None]
    xn = np.roll(x, -1, axis=1)
    yn = np.roll(y, -1, axis=1)
    cross = x * yn - xn * y
    areas = 0.5 * cross.sum(axis=1)
    safe = np.where(areas == 0.0, 1.0, areas)
    cx = ((x + xn) * cross).sum(axis=1) / (6.0 * safe)
    cy = ((y + yn) * cross).sum(axis=1) / (6.0 * safe)
    return areas, np.column_stack([x0 + cx, y0 + cy])


def _block_arrays(block: Block, index: int):
    nodes = np.asarray(block.nodes, dtype=float)
    if nodes.ndim != 3 or nodes.shape[2] != 2 or nodes.shape[0] < 2 or nodes.shape[1] < 2:
        raise MeshError(
            f"block {index}: nodes must have shape (ni+1, nj+1, 2) with ni, nj >= 1 "
            f"(got shape {nodes.shape}); build the block from a node grid"
        )
    if not np.all(np.isfinite(nodes)):
        raise MeshError(f"block {index}: node coordinates are not all finite; check the geometry")
    if not isinstance(block.material, str) or not block.material:
        raise MeshError(
            f"block {index}: material tag missing (got {block.material!r}, expected a non-empty "
            "name); give every block a material"
        )
    ni, nj = nodes.shape[0] - 1, nodes.shape[1] - 1
    ids = np.arange((ni + 1) * (nj + 1)).reshape(ni + 1, nj + 1)
    cells = np.stack(
        [ids[:-1, :-1], ids[1:, :-1], ids[1:, 1:], ids[:-1, 1:]], axis=-1
    ).reshape(-1, 4)
    flat = nodes.reshape(-1, 2)
    areas, _ = polygon_metrics(flat, cells)
    if areas.sum() < 0.0:  # a left-handed block: reverse each cell's node order
        cells = cells[:, ::-1].copy()
    # edges of each side, as node pairs, with their patch names
    sides = {
        "i_min": np.column_stack([ids[0, 1:], ids[0, :-1]]),
        "i_max": np.column_stack([ids[-1, :-1], ids[-1, 1:]]),
        "j_min": np.column_stack([ids[:-1, 0], ids[1:, 0]]),
        "j_max": np.column_stack([ids[1:, -1], ids[:-1, -1]]),
    }
    unknown = set(block.patches) - set(SIDES)
    if unknown:
        raise MeshError(
            f"block {index}: unknown side(s) {sorted(unknown)} (expected {', '.join(SIDES)}); "
            "name the block sides by their logical index"
        )
    edges, names = [], []
    for side, pairs in sides.items():
        spec = block.patches.get(side)
        if spec is None:
            continue
        if isinstance(spec, str):
            spec = [spec] * len(pairs)
        spec = list(spec)
        if len(spec) != len(pairs):
            raise MeshError(
                f"block {index}, side {side}: {len(spec)} patch names for {len(pairs)} faces; "
                "give one name for the whole side or one per face"
            )
        keep = [k for k, s in enumerate(spec) if s is not None]
        edges.append(pairs[keep])
        names.extend(spec[k] for k in keep)
    edges = np.concatenate(edges) if edges else np.zeros((0, 2), dtype=int)
    return flat, cells, edges, names


def from_blocks(
    blocks: list[Block], coordinate_system: str = "axisymmetric", tolerance: float | None = None
) -> Mesh:
    """Join blocks conformingly into one mesh and compute its metrics.

    Coincident nodes of different blocks (closer than ``tolerance``, by default 1e-9 of
    the mesh extent) are merged.  Every boundary face must belong to a named patch.
    """
    if coordinate_system not in COORDINATE_SYSTEMS:
        raise MeshError(
            f"coordinate_system: got {coordinate_system!r}, expected one of {COORDINATE_SYSTEMS}"
        )
    if not blocks:
        raise MeshError("blocks: got an empty list, expected at least one block")
    all_nodes, all_cells, all_edges, all_names, materials = [], [], [], [], []
    offset = 0
    for b, block in enumerate(blocks):
        flat, cells, edges, names = _block_arrays(block, b)
        all_nodes.append(flat)
        all_cells.append(cells + offset)
        all_edges.append(edges + offset)
        all_names.extend(names)
        materials.append(block.material)
        offset += len(flat)
    nodes = np.concatenate(all_nodes)
    extent = float(np.ptp(nodes, axis=0).max())
    tol = tolerance if tolerance is not None else 1e-9 * max(extent, 1e-300)
    # merge coincident nodes: connected components of the "closer than tol" graph
    label = merged_labels(nodes, tol)
    n = len(nodes)
    first = np.full(label.max() + 1, -1)
    first[label[::-1]] = np.arange(n)[::-1]
    merged_nodes = nodes[first]
    cells = label[np.concatenate(all_cells)]
    edges = label[np.concatenate(all_edges)] if all_edges else np.zeros((0, 2), dtype=int)
    material_names = tuple(dict.fromkeys(materials))
    block_material = np.array([material_names.index(b.material) for b in blocks], dtype=np.int64)
    cell_material = np.repeat(block_material, [len(c) for c in all_cells])
    return build_mesh(
        coordinate_system, merged_nodes, cells, cell_material, material_names, edges, all_names
    )


#: Up to this many points, :func:`close_pairs` bins them with numpy; beyond, a k-d tree is quicker
#: (at 66,000 points 115 ms against 45 ms) and its import (scipy.spatial, 0.14 s) no longer counts.
BINNED_PAIRS_UP_TO = 20_000


def close_pairs(points: np.ndarray, tol: float) -> np.ndarray:
    """Every pair ``(i, j)``, i < j, of ``points`` (n, 2) at most ``tol`` apart, (m, 2) int, sorted.

    Up to :data:`BINNED_PAIRS_UP_TO` points they are binned on a grid of spacing ``tol``: a pair that
    close lies in the same bin or in neighbouring ones, and only those are compared.  This keeps
    scipy.spatial (0.14 s of imports) out of the start-up of every run on a small mesh; larger
    point sets go to scipy's k-d tree, which gives the same pairs."""
    points = np.asarray(points, dtype=float)
    n = len(points)
    if n < 2 or not tol > 0.0:
        return np.zeros((0, 2), dtype=np.int64)
    lo = points.min(axis=0)
    cell = np.floor((points - lo) / tol)
    width = float(cell[:, 1].max()) + 3.0  # bins of one row and their neighbours never alias
    if n > BINNED_PAIRS_UP_TO or (float(cell[:, 0].max()) + 3.0) * width >= 2.0**62:
        from scipy.spatial import cKDTree

        pairs = cKDTree(points).query_pairs(tol, output_type="ndarray").astype(np.int64)
        return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))] if len(pairs) else pairs.reshape(0, 2)
    cell = cell.astype(np.int64)
    key = (cell[:, 0] + 1) * int(width) + (cell[:, 1] + 1)
    order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    found = []
    # the bin itself and four of its eight neighbours: each neighbouring pair of bins once
    for dx, dy in ((0, 0), (0, 1), (1, -1), (1, 0), (1, 1)):
        target = key + dx * int(width) + dy
        start = np.searchsorted(sorted_key, target, side="left")
        count = np.searchsorted(sorted_key, target, side="right") - start
        i = np.repeat(np.arange(n), count)
        if not i.size:
            continue
        within = np.arange(i.size) - np.repeat(np.cumsum(count) - count, count)
        j = order[np.repeat(start, count) + within]
        keep = (i < j) if (dx, dy) == (0, 0) else (i != j)
        i, j = i[keep], j[keep]
        d = points[i] - points[j]
        near = np.sqrt(d[:, 0] ** 2 + d[:, 1] ** 2) <= tol
        found.append(np.minimum(i, j)[near] * n + np.maximum(i, j)[near])
    codes = distinct(np.concatenate(found)) if found else np.zeros(0, dtype=np.int64)
    return np.column_stack((codes // n, codes % n)).astype(np.int64)


def merged_labels(points: np.ndarray, tol: float) -> np.ndarray:
    """Each point's group among points chained by steps of at most ``tol`` (the connected
    components of :func:`close_pairs`' graph), numbered 0, 1, ... in the order of each group's
    first point."""
    n = len(points)
    label = np.arange(n)
    pairs = close_pairs(points, tol)
    if len(pairs):
        a, b = pairs[:, 0], pairs[:, 1]
        while True:  # each group takes its smallest index: spread minima along pairs, then jump
            before = label.copy()
            low = np.minimum(label[a], label[b])
            np.minimum.at(label, a, low)
            np.minimum.at(label, b, low)
            label = label[label]
            if np.array_equal(label, before):
                break
    _, numbered = np.unique(label, return_inverse=True)
    return numbered.reshape(-1)


def build_mesh(
    coordinate_system: str,
    nodes: np.ndarray,
    cells: np.ndarray,
    cell_material: np.ndarray,
    material_names: tuple,
    patch_edges: np.ndarray,
    patch_edge_names: list,
) -> Mesh:
    """Build connectivity and metrics from cells and named boundary edges, and validate.

    Raises
    ------
    MeshError
        For inverted or degenerate cells, non-conforming joins, boundary faces without a
        patch, patch edges that are not on the boundary, untagged cells, or an axis
        patch that is not on r = 0.
    """
    nodes = np.array(nodes, dtype=float)  # a copy: r is clamped to >= 0 below
    cells = np.ascontiguousarray(cells, dtype=np.int64)
    n_cells = len(cells)
    if coordinate_system not in COORDINATE_SYSTEMS:
        raise MeshError(
            f"coordinate_system: got {coordinate_system!r}, expected one of {COORDINATE_SYSTEMS}"
        )
    cell_material = np.asarray(cell_material, dtype=np.int64)
    bad_tag = (cell_material < 0) | (cell_material >= len(material_names))
    if bad_tag.any() or any(not isinstance(m, str) or not m for m in material_names):
        raise MeshError(
            f"cells {np.flatnonzero(bad_tag)[:5].tolist()}: no material tag (expected an index "
            f"into {list(material_names)}); tag every cell with a material"
        )
    areas, centres = polygon_metrics(nodes, cells)
    extent = float(np.ptp(nodes, axis=0).max())
    ranked = np.sort(np.abs(areas))  # the median (np.median would import numpy.ma for a `check`)
    scale = max(0.5 * float(ranked[(ranked.size - 1) // 2] + ranked[ranked.size // 2]) if ranked.size else 0.0, 1e-300)
    if extent <= 0.0 or not np.isfinite(extent):
        raise MeshError(f"nodes: the mesh has no extent (got extent {extent}); check the geometry")
    inverted = np.flatnonzero(areas < 0.0)
    if inverted.size:
        raise MeshError(
            f"cells {inverted[:5].tolist()}: inverted (negative area {areas[inverted[0]]:.3e} m2; "
            f"{inverted.size} in all), expected counter-clockwise cells; check the block mapping"
        )
    degenerate = np.flatnonzero(areas <= 1e-10 * scale)
    if degenerate.size:
        raise MeshError(
            f"cells {degenerate[:5].tolist()}: degenerate (area {areas[degenerate[0]]:.3e} m2 against a "
            f"median of {scale:.3e} m2), expected a positive area; use a core block instead "
            "of collapsing nodes"
        )
    # every corner must turn left: catches non-convex (folded) quadrilaterals
    p = nodes[cells]
    e1 = np.roll(p, -1, axis=1) - p
    e0 = p - np.roll(p, 1, axis=1)
    turn = e0[..., 0] * e1[..., 1] - e0[..., 1] * e1[..., 0]
    folded = np.flatnonzero((turn <= 0.0).any(axis=1))
    if folded.size:
        raise MeshError(
            f"cells {folded[:5].tolist()}: not convex (a corner turns the wrong way), expected "
            "convex quadrilaterals; refine the mesh or change the block mapping"
        )
    if coordinate_system == "axisymmetric" and nodes[:, 0].min() < -1e-12 * extent:
        raise MeshError(
            f"nodes: radius {nodes[:, 0].min():.3e} m < 0, expected r >= 0 in the axisymmetric "
            "half-plane; mesh only the half-plane r >= 0"
        )
    if coordinate_system == "axisymmetric":
        nodes[:, 0] = np.maximum(nodes[:, 0], 0.0)

    # faces: every cell edge, matched by its sorted node pair
    edges = np.stack([cells, np.roll(cells, -1, axis=1)], axis=-1).reshape(-1, 2)
    edge_cell = np.repeat(np.arange(n_cells), 4)
    key = np.sort(edges, axis=1)
    uniq, inverse, counts = np.unique(key, axis=0, return_inverse=True, return_counts=True)
    inverse = inverse.ravel()
    if (counts > 2).any():
        raise MeshError("faces: an edge is shared by more than two cells; the blocks overlap")
    order = np.argsort(inverse, kind="stable")
    grouped = inverse[order]
    starts = np.searchsorted(grouped, np.arange(len(uniq)))
    interior = counts == 2
    first_edge = order[starts[interior]]
    second_edge = order[starts[interior] + 1]
    owner = edge_cell[first_edge]
    neighbour = edge_cell[second_edge]
    swap = owner > neighbour
    owner_edge = np.where(swap, second_edge, first_edge)
    owner, neighbour = np.minimum(owner, neighbour), np.maximum(owner, neighbour)
    face_nodes = edges[owner_edge]
    fo = np.lexsort((neighbour, owner))
    owner, neighbour, face_nodes = owner[fo], neighbour[fo], face_nodes[fo]

    boundary_edge = order[starts[~interior]]
    boundary_nodes = edges[boundary_edge]
    boundary_cell = edge_cell[boundary_edge]
    bkey = np.sort(boundary_nodes, axis=1)

    # patches
    patch_names = tuple(dict.fromkeys(patch_edge_names))
    boundary_patch = np.full(len(boundary_cell), -1, dtype=np.int64)
    if len(patch_edges):
        pkey = np.sort(np.asarray(patch_edges, dtype=np.int64), axis=1)
        n_nodes = len(nodes)
        bcode = bkey[:, 0] * n_nodes + bkey[:, 1]
        pcode = pkey[:, 0] * n_nodes + pkey[:, 1]
        border = np.argsort(bcode)
        pos = np.clip(np.searchsorted(bcode, pcode, sorter=border), 0, len(bcode) - 1)
        hit = border[pos]
        found = bcode[hit] == pcode
        if not found.all():
            k = pkey[np.flatnonzero(~found)[0]]
            name = patch_edge_names[int(np.flatnonzero(~found)[0])]
            raise MeshError(
                f"patch {name!r}: a face between nodes {nodes[k[0]].tolist()} and "
                f"{nodes[k[1]].tolist()} is not on the boundary; a joined block side "
                "must not carry a patch"
            )
        lookup = {name: i for i, name in enumerate(patch_names)}
        names = np.fromiter((lookup[s] for s in patch_edge_names), dtype=np.int64, count=len(patch_edge_names))
        boundary_patch[hit] = names
    missing = np.flatnonzero(boundary_patch < 0)
    if missing.size:
        c = 0.5 * (nodes[boundary_nodes[missing[0], 0]] + nodes[boundary_nodes[missing[0], 1]])
        raise MeshError(
            f"boundary: {missing.size} face(s) belong to no patch (first at r, z = {c.tolist()}); "
            "name the block side, or check that joined blocks share their nodes"
        )

    def metrics(pairs):
        a, b = nodes[pairs[:, 0]], nodes[pairs[:, 1]]
        d = b - a
        length = np.hypot(d[:, 0], d[:, 1])
        normals = np.column_stack([d[:, 1], -d[:, 0]]) / length[:, None]
        mid = 0.5 * (a + b)
        area = 2.0 * np.pi * mid[:, 0] * length if coordinate_system == "axisymmetric" else length
        return mid, normals, area

    face_centres, face_normals, face_areas = metrics(face_nodes)
    boundary_centres, boundary_normals, boundary_areas = metrics(boundary_nodes)
    if coordinate_system == "axisymmetric":
        on_axis = (nodes[boundary_nodes[:, 0], 0] <= 1e-12 * extent) & (
            nodes[boundary_nodes[:, 1], 0] <= 1e-12 * extent
        )
        axis_id = patch_names.index(AXIS_PATCH) if AXIS_PATCH in patch_names else -2
        wrong = np.flatnonzero(on_axis != (boundary_patch == axis_id))
        if wrong.size:
            i = wrong[0]
            raise MeshError(
                f"patch {patch_names[boundary_patch[i]]!r}: face at r, z = {boundary_centres[i].tolist()} "
                f"{'lies' if on_axis[i] else 'does not lie'} on r = 0, expected faces on r = 0 to form "
                f"the patch {AXIS_PATCH!r} and no others; fix the block side's patch name"
            )
        boundary_areas = np.where(on_axis, 0.0, boundary_areas)
        volumes = 2.0 * np.pi * centres[:, 0] * areas
    else:
        volumes = areas.copy()
    return Mesh(
        coordinate_system=coordinate_system,
        nodes=nodes,
        cells=cells,
        cell_material=cell_material,
        material_names=tuple(material_names),
        cell_centres=centres,
        cell_areas=areas,
        cell_volumes=volumes,
        face_nodes=np.ascontiguousarray(face_nodes),
        owner=np.ascontiguousarray(owner),
        neighbour=np.ascontiguousarray(neighbour),
        face_centres=face_centres,
        face_normals=face_normals,
        face_areas=face_areas,
        boundary_nodes=np.ascontiguousarray(boundary_nodes),
        boundary_cell=np.ascontiguousarray(boundary_cell),
        boundary_centres=boundary_centres,
        boundary_normals=boundary_normals,
        boundary_areas=boundary_areas,
        boundary_patch=boundary_patch,
        patch_names=patch_names,
    )
