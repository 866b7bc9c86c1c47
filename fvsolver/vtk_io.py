"""VTU (VTK XML unstructured grid) input and output of meshes and fields, and PVD series.

Mesh files (:func:`write_mesh`, read back by :func:`read_mesh`):

* points: (n_nodes, 3) Float64, x = r (or x), y = z (or y), z = 0;
* cells: the quadrilaterals (VTK_QUAD, counter-clockwise) first, then the boundary
  faces as VTK_LINE cells in the mesh's boundary order, oriented with the domain on
  their left;
* cell data ``"material"`` (Int32): material index on quads, -1 on lines;
  ``"patch"`` (Int32): patch index on lines, -1 on quads;
* field data (dataset-level arrays inside ``<FieldData>``, shown by ParaView in its
  information panel): ``"material_names"``, ``"patch_names"`` and
  ``"coordinate_system"`` (``"axisymmetric"`` or ``"planar"``) as VTK string arrays;
  ``"mesh_format"`` (Int32) is the layout version, 1.  Files written before the names
  became strings (UTF-8 bytes as UInt8, each name followed by a zero byte) still read.

Field files of a run keep the body and its boundary apart, so that ParaView's automatic
colour ranges see only real values:

* :func:`write_fields`: the quadrilaterals only, with ``"material"``, ``"cell_volume"``
  (m3, 2 pi r A in the axisymmetric system, since ParaView's integration works on plane
  areas) and the given cell fields (vectors in r, z get a zero third component);
* :func:`write_boundary_fields`: the boundary faces only, as lines, with ``"patch"``,
  ``"face_area"`` (m2, a full revolution) and the given face fields.

meshio's VTU writer drops field data and its reader does not know string arrays, so
the field data is added to the XML after meshio wrote the file and read back here.
Every write goes to a temporary file in the target folder, then replaces the target.
"""
from __future__ import annotations

import math
import os
import uuid
import xml.etree.ElementTree as ET
from xml.sax.saxutils import quoteattr

import meshio
import numpy as np

from fvsolver.errors import MeshError
from fvsolver.mesh.core import COORDINATE_SYSTEMS, Mesh, build_mesh

__all__ = ["write_mesh", "read_mesh", "write_fields", "write_boundary_fields", "write_pvd",
           "read_cell_field", "MESH_FORMAT"]

MESH_FORMAT = 1
_RESERVED = ("material", "patch", "cell_volume", "face_area")
_NAME_TABLES = ("material_names", "patch_names", "coordinate_system")


# ----------------------------------------------------------------------------- helpers
def _atomic(path, write) -> None:
    """Call ``write(tmp_path)`` on a temporary file next to ``path``, then replace ``path``."""
    path = os.fspath(path)
    folder, base = os.path.split(os.path.abspath(path))
    # a fresh name, created by the writer itself so the file gets the usual permissions
    tmp = os.path.join(folder, f".{base}.{uuid.uuid4().hex}.tmp")
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def _check_names(names, what: str) -> tuple:
    for name in names:
        if not isinstance(name, str) or not name or "\0" in name:
            raise MeshError(
                f"{what}: name {name!r} cannot be stored, expected a non-empty string without "
                "zero characters; rename it"
            )
    return tuple(names)


def _decode_names(codes: np.ndarray) -> tuple:
    parts = np.asarray(codes).astype(np.int64).astype(np.uint8).tobytes().split(b"\0")
    parts = parts[:-1] if parts[-1] == b"" else parts
    return tuple(part.decode("utf-8") for part in parts)


def _string_array(parent: ET.Element, name: str, names: tuple) -> None:
    """A VTK string array: in ASCII, the UTF-8 bytes of each string (as VTK writes them,
    signed) followed by a zero."""
    codes = np.frombuffer(b"".join(n.encode("utf-8") + b"\0" for n in names), dtype=np.int8)
    da = ET.SubElement(parent, "Array", type="String", Name=name, NumberOfTuples=str(len(names)),
                       format="ascii")
    da.text = " ".join(map(str, codes.tolist()))


def _field_array(parent: ET.Element, name: str, data: np.ndarray, vtk_type: str) -> None:
    da = ET.SubElement(
        parent, "DataArray", type=vtk_type, Name=name, NumberOfTuples=str(len(data)),
        format="ascii",
    )
    da.text = " ".join(map(str, np.asarray(data, dtype=np.int64).tolist()))


def _read_vtu(path: str):
    """meshio's reading of a VTU, with the field data read here (string arrays included):
    (meshio.Mesh, dict name -> tuple of str or array)."""
    tree = ET.parse(path)
    grid = tree.getroot().find("UnstructuredGrid")
    field_data = {}
    block = grid.find("FieldData") if grid is not None else None
    if block is not None:
        for array in block:
            values = np.array((array.text or "").split(), dtype=np.int64)
            if array.get("type") == "String" or array.get("Name") in _NAME_TABLES:
                field_data[array.get("Name")] = _decode_names(values)
            else:
                field_data[array.get("Name")] = values
        grid.remove(block)
    folder = os.path.dirname(os.path.abspath(path))
    tmp = os.path.join(folder, f".{os.path.basename(path)}.{uuid.uuid4().hex}.read")
    try:
        tree.write(tmp, encoding="utf-8", xml_declaration=True)
        raw = meshio.vtu.read(tmp)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return raw, field_data


def _write_vtu(path: str, mesh: Mesh, cell_data: dict, line_data: dict, blocks=("quad", "line")) -> None:
    """Write the quads and/or the boundary lines with ``cell_data`` / ``line_data`` (name -> 2D
    arrays); with both blocks, an array missing on one block is 0 there."""
    points = np.column_stack([mesh.nodes, np.zeros(len(mesh.nodes))])
    sizes = {"quad": mesh.n_cells, "line": mesh.n_boundary}
    given = {"quad": dict(cell_data), "line": dict(line_data)}
    if "quad" in blocks:
        given["quad"]["material"] = mesh.cell_material[:, None]
        given["line"].setdefault("material", np.full((mesh.n_boundary, 1), -1))
    if "line" in blocks:
        given["line"]["patch"] = mesh.boundary_patch[:, None]
        given["quad"].setdefault("patch", np.full((mesh.n_cells, 1), -1))
    names = list(dict.fromkeys(k for b in blocks for k in given[b]))
    cell_arrays = {}
    for name in names:
        width = next(given[b][name].shape[1] for b in blocks if name in given[b])
        parts = [given[b].get(name, np.zeros((sizes[b], width))) for b in blocks]
        integer = name in ("material", "patch")
        parts = [np.asarray(v, dtype=np.int32 if integer else np.float64) for v in parts]
        cell_arrays[name] = [v[:, 0] if v.shape[1] == 1 else v for v in parts]  # one array per block
    fields = {
        "material_names": _check_names(mesh.material_names, "material_names"),
        "patch_names": _check_names(mesh.patch_names, "patch_names"),
        "coordinate_system": _check_names([mesh.coordinate_system], "coordinate_system"),
    }
    connectivity = {"quad": mesh.cells, "line": mesh.boundary_nodes}
    raw = meshio.Mesh(points, [(b, connectivity[b]) for b in blocks], cell_data=cell_arrays)

    def write(tmp: str) -> None:
        meshio.write(tmp, raw, file_format="vtu")
        tree = ET.parse(tmp)
        grid = tree.getroot().find("UnstructuredGrid")
        block = ET.Element("FieldData")
        for name, values in fields.items():
            _string_array(block, name, values)
        _field_array(block, "mesh_format", np.array([MESH_FORMAT]), "Int32")
        grid.insert(0, block)
        tree.write(tmp, encoding="utf-8", xml_declaration=True)

    _atomic(path, write)


# ----------------------------------------------------------------------------- mesh I/O
def write_mesh(mesh: Mesh, path) -> None:
    """Write ``mesh`` as a VTU file (layout in the module docstring).

    Parameters
    ----------
    mesh : Mesh
    path : str or os.PathLike
        Target file, conventionally ``*.vtu``; replaced atomically.
    """
    if not isinstance(mesh, Mesh):
        raise MeshError(f"mesh: got {type(mesh).__name__}, expected a Mesh; build one first")
    _write_vtu(os.fspath(path), mesh, {}, {})


def read_mesh(path) -> Mesh:
    """Read a VTU mesh written by :func:`write_mesh` (or :func:`write_fields`).

    The mesh is rebuilt with :func:`fvsolver.mesh.core.build_mesh`, so every check of
    the mesh applies; any problem raises :class:`MeshError` naming the file.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Mesh
    """
    path = os.fspath(path)
    try:
        # the format's own reader: meshio.read() exits the interpreter on a parse failure
        raw, field_data = _read_vtu(path)
    except Exception as exc:  # meshio and the XML parser raise several unrelated types on bad input
        raise MeshError(
            f"{path}: cannot be read as a VTU file ({type(exc).__name__}: {exc}); expected a "
            "file written by fvsolver.vtk_io.write_mesh; check the path or rewrite the file"
        ) from exc
    points = np.asarray(raw.points, dtype=float)
    if points.ndim != 2 or points.shape[1] not in (2, 3) or len(points) == 0:
        raise MeshError(f"{path}: points have shape {points.shape}, expected (n_nodes, 3)")
    if points.shape[1] == 3:
        extent = max(float(np.ptp(points[:, :2], axis=0).max()), 1e-300)
        if np.abs(points[:, 2]).max() > 1e-12 * extent:
            raise MeshError(
                f"{path}: points have z up to {np.abs(points[:, 2]).max():.3e} m, expected a "
                "2D mesh in the z = 0 plane (x = r, y = z); flatten or re-export the mesh"
            )
    if "material" not in raw.cell_data:
        raise MeshError(
            f"{path}: cell data 'material' is missing, expected an integer material index on "
            "every quad; tag the cells or rewrite the file with write_mesh"
        )
    quads, lines, materials, patches = [], [], [], []
    patch_data = raw.cell_data.get("patch")
    for k, block in enumerate(raw.cells):
        if block.type == "quad":
            quads.append(block.data)
            materials.append(raw.cell_data["material"][k])
        elif block.type == "line":
            if patch_data is None:
                raise MeshError(
                    f"{path}: cell data 'patch' is missing, expected an integer patch index on "
                    "every line cell; rewrite the file with write_mesh"
                )
            lines.append(block.data)
            patches.append(patch_data[k])
        else:
            raise MeshError(
                f"{path}: cell block {k} has cell type {block.type!r}, expected only 'quad' "
                "cells and 'line' boundary faces; remesh with quadrilaterals"
            )
    if not quads:
        raise MeshError(f"{path}: no 'quad' cells found, expected a quadrilateral mesh")
    names = {}
    for key in _NAME_TABLES:
        if key not in field_data:
            raise MeshError(
                f"{path}: field data {key!r} is missing, expected the name tables written by "
                "fvsolver.vtk_io.write_mesh; rewrite the file with write_mesh"
            )
        names[key] = field_data[key]
    version = np.asarray(field_data.get("mesh_format", [MESH_FORMAT])).ravel()
    if version.size != 1 or not 1 <= int(version[0]) <= MESH_FORMAT:
        raise MeshError(
            f"{path}: mesh_format {version.tolist()}, expected [1]..[{MESH_FORMAT}]; the file "
            "was written by a newer or unknown writer, rewrite it with write_mesh"
        )
    system = names["coordinate_system"][0] if names["coordinate_system"] else ""
    if system not in COORDINATE_SYSTEMS:
        raise MeshError(
            f"{path}: coordinate_system {system!r}, expected one of {COORDINATE_SYSTEMS}"
        )
    material_names, patch_names = names["material_names"], names["patch_names"]
    cells = np.concatenate(quads).astype(np.int64)
    cell_material = np.concatenate(materials).astype(np.int64).ravel()
    bad = np.flatnonzero((cell_material < 0) | (cell_material >= len(material_names)))
    if bad.size:
        raise MeshError(
            f"{path}: quad {bad[0]} has material {cell_material[bad[0]]}, expected an index "
            f"into the material names {list(material_names)}; retag the cell"
        )
    edges = np.concatenate(lines).astype(np.int64) if lines else np.zeros((0, 2), np.int64)
    edge_patch = np.concatenate(patches).astype(np.int64).ravel() if lines else np.zeros(0, int)
    bad = np.flatnonzero((edge_patch < 0) | (edge_patch >= len(patch_names)))
    if bad.size:
        raise MeshError(
            f"{path}: line cell {bad[0]} has patch {edge_patch[bad[0]]}, expected an index "
            f"into the patch names {list(patch_names)}; retag the boundary face"
        )
    order = np.argsort(edge_patch, kind="stable")  # keeps the patch indices of the file
    edge_names = np.asarray(patch_names, dtype=object)[edge_patch[order]].tolist()
    try:
        return build_mesh(
            system, points[:, :2], cells, cell_material, material_names, edges[order], edge_names
        )
    except MeshError as exc:
        raise MeshError(f"{path}: {exc}") from exc


# ----------------------------------------------------------------------------- fields
def _as_columns(name: str, value, n: int, allowed: tuple, what: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 1 and arr.shape[0] == n:
        return arr[:, None]
    if arr.ndim == 2 and arr.shape[0] == n and arr.shape[1] in allowed and arr.shape[1] > 1:
        return np.column_stack([arr, np.zeros(n)]) if arr.shape[1] == 2 else arr
    shapes = " or ".join([f"({n},)"] + [f"({n}, {k})" for k in allowed if k > 1])
    raise MeshError(
        f"{what}[{name!r}]: got shape {arr.shape}, expected {shapes}; pass one value per "
        f"{'cell' if what == 'cell_fields' else 'boundary face'}"
    )


def _check_field_names(what: str, given) -> None:
    if not isinstance(given, dict):
        raise MeshError(f"{what}: got {type(given).__name__}, expected a dict name -> array")
    for name in given:
        if not isinstance(name, str) or not name or name in _RESERVED:
            raise MeshError(
                f"{what}: field name {name!r} is not allowed, expected a non-empty name "
                f"other than {_RESERVED}; rename the field"
            )


def write_fields(path, mesh: Mesh, cell_fields: dict, boundary_fields: dict | None = None,
                 boundary_path=None) -> None:
    """Write one VTU of cell fields at one time: the quadrilaterals only.

    Parameters
    ----------
    path : str or os.PathLike
        Target ``*.vtu`` file; replaced atomically.
    mesh : Mesh
    cell_fields : dict of str to (n_cells,) or (n_cells, 2) float
        Cell-centred values (vectors as (r, z) components).
    boundary_fields : dict of str to (n_boundary,) float, optional
        Values on the boundary faces, written by :func:`write_boundary_fields` to
        ``boundary_path`` (required with them): never into the cell file, where they
        would stretch the cell fields' colour ranges.
    boundary_path : str or os.PathLike, optional

    Notes
    -----
    ``"material"`` and ``"cell_volume"`` (m3) are always written; the names
    ``"material"``, ``"patch"``, ``"cell_volume"`` and ``"face_area"`` are reserved.
    """
    if not isinstance(mesh, Mesh):
        raise MeshError(f"mesh: got {type(mesh).__name__}, expected a Mesh")
    _check_field_names("cell_fields", cell_fields)
    if boundary_fields is not None:
        _check_field_names("boundary_fields", boundary_fields)
        if boundary_path is None:
            raise MeshError("boundary_fields: given without boundary_path, expected the file for the "
                            "boundary faces (they are kept out of the cell file); pass boundary_path")
    cells = {
        k: _as_columns(k, v, mesh.n_cells, (1, 2), "cell_fields") for k, v in cell_fields.items()
    }
    if boundary_fields is not None:  # all checks before any file is written
        faces = {k: _as_columns(k, v, mesh.n_boundary, (1,), "boundary_fields")
                 for k, v in boundary_fields.items()}
    cells = {"cell_volume": mesh.cell_volumes[:, None], **cells}
    _write_vtu(os.fspath(path), mesh, cells, {}, blocks=("quad",))
    if boundary_fields is not None:
        faces = {"face_area": mesh.boundary_areas[:, None], **faces}
        _write_vtu(os.fspath(boundary_path), mesh, {}, faces, blocks=("line",))


def write_boundary_fields(path, mesh: Mesh, boundary_fields: dict) -> None:
    """Write one VTU of boundary-face values at one time: the boundary faces only, as lines
    with ``"patch"`` and ``"face_area"`` (m2).

    Parameters
    ----------
    path : str or os.PathLike
    mesh : Mesh
    boundary_fields : dict of str to (n_boundary,) float (NaN is kept where a value does not apply)
    """
    if not isinstance(mesh, Mesh):
        raise MeshError(f"mesh: got {type(mesh).__name__}, expected a Mesh")
    _check_field_names("boundary_fields", boundary_fields)
    faces = {k: _as_columns(k, v, mesh.n_boundary, (1,), "boundary_fields") for k, v in boundary_fields.items()}
    faces = {"face_area": mesh.boundary_areas[:, None], **faces}
    _write_vtu(os.fspath(path), mesh, {}, faces, blocks=("line",))


def write_pvd(path, entries: list) -> None:
    """Write a ParaView collection (``*.pvd``) of VTU files at increasing times.

    Parameters
    ----------
    path : str or os.PathLike
        Target ``*.pvd`` file; replaced atomically.
    entries : list of (float, str)
        (time in s, VTU file name relative to the folder of ``path``), times strictly
        increasing.
    """
    lines = [
        '<?xml version="1.0"?>',
        '<VTKFile type="Collection" version="0.1" byte_order="LittleEndian">',
        "  <Collection>",
    ]
    previous = -math.inf
    for k, entry in enumerate(entries):
        try:
            time, name = entry
            time = float(time)
        except (TypeError, ValueError):
            raise MeshError(
                f"entries[{k}]: got {entry!r}, expected a pair (time_s, relative_file_name)"
            ) from None
        if not math.isfinite(time) or time <= previous:
            raise MeshError(
                f"entries[{k}]: time {time!r} s, expected a finite time greater than the "
                f"previous one ({previous!r} s); list the files in time order"
            )
        if not isinstance(name, (str, os.PathLike)) or os.path.isabs(name) or not os.fspath(name):
            raise MeshError(
                f"entries[{k}]: file {name!r}, expected a file name relative to the .pvd "
                "folder; pass e.g. 'run_0001.vtu'"
            )
        previous = time
        file_attr = quoteattr(os.fspath(name).replace(os.sep, "/"))
        lines.append(f'    <DataSet timestep="{time!r}" group="" part="0" file={file_attr}/>')
    lines += ["  </Collection>", "</VTKFile>", ""]
    text = "\n".join(lines)

    def write(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8") as handle:
            handle.write(text)

    _atomic(os.fspath(path), write)


def read_cell_field(path, name: str) -> np.ndarray:
    """One cell field of a VTU written by :func:`write_fields`, on the cells (not the boundary
    lines): (n_cells,) or (n_cells, k).

    Raises
    ------
    MeshError
        If the file cannot be read or has no such cell field.
    """
    path = os.fspath(path)
    try:
        raw = meshio.vtu.read(path)
    except Exception as exc:  # meshio raises several unrelated types on bad input
        raise MeshError(f"{path}: cannot be read as a VTU file ({type(exc).__name__}: {exc}); "
                        "expected a fields file written by fvsolver") from exc
    if name not in raw.cell_data:
        raise MeshError(f"{path}: no cell field {name!r} (got {sorted(raw.cell_data)}); expected a fields "
                        "file written by fvsolver")
    for block, values in zip(raw.cells, raw.cell_data[name]):
        if block.type == "quad":
            values = np.asarray(values, dtype=float)
            return values[:, 0] if values.ndim == 2 and values.shape[1] == 1 else values
    raise MeshError(f"{path}: no quadrilateral cells; expected a fields file written by fvsolver")


def read_fields(path) -> tuple[np.ndarray, np.ndarray, dict, dict]:
    """The quads and cell fields of a VTU written by :func:`write_fields`.

    Returns
    -------
    nodes : (n_nodes, 2) m
    quads : (n_cells, 4) node indices
    cell_data : dict of str to (n_cells,) or (n_cells, k) arrays
    field_data : dict (the name tables as tuples of str)
    """
    path = os.fspath(path)
    try:
        raw, field_data = _read_vtu(path)
    except Exception as exc:  # meshio and the XML parser raise several unrelated types on bad input
        raise MeshError(f"{path}: cannot be read as a VTU file ({type(exc).__name__}: {exc}); "
                        "expected a fields file written by fvsolver") from exc
    for k, block in enumerate(raw.cells):
        if block.type == "quad":
            data = {name: np.asarray(values[k]) for name, values in raw.cell_data.items()}
            return np.asarray(raw.points)[:, :2], np.asarray(block.data, dtype=np.int64), data, field_data
    raise MeshError(f"{path}: no quadrilateral cells; expected a fields file written by fvsolver")


def write_cells(path, points: np.ndarray, cells: dict, cell_data: dict, names: dict | None = None) -> None:
    """Write any cells (e.g. a revolved 3D mesh) as VTU, atomically.

    Parameters
    ----------
    points : (n_points, 3)
    cells : dict of meshio cell type ("hexahedron", "wedge", ...) to connectivity arrays
    cell_data : dict of cell type to dict of str to arrays, one row per cell
    names : dict of str to tuple of str, written as VTK string arrays in the field data
    """
    types = list(cells)
    keys = list(dict.fromkeys(k for t in types for k in cell_data.get(t, {})))
    arrays = {k: [cell_data[t][k] for t in types] for k in keys if all(k in cell_data.get(t, {}) for t in types)}
    raw = meshio.Mesh(np.asarray(points, dtype=float), [(t, cells[t]) for t in types], cell_data=arrays)

    def write(tmp: str) -> None:
        meshio.write(tmp, raw, file_format="vtu")
        if names:
            tree = ET.parse(tmp)
            block = ET.Element("FieldData")
            for name, values in names.items():
                _string_array(block, name, _check_names(values, name))
            tree.getroot().find("UnstructuredGrid").insert(0, block)
            tree.write(tmp, encoding="utf-8", xml_declaration=True)

    _atomic(os.fspath(path), write)
