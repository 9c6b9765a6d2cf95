"""VTK files for ParaView: near-field grids, boundary fields and sweep collections.

File layouts
------------
Grid (``write_grid_vtu``)
    ``.vtu`` unstructured grid (VTK XML, zlib-compressed binary, written by
    meshio). Points ``(x[i], y[j], 0)`` in metres, numbered ``j * nx + i``
    so a field ``values[j, i]`` of shape ``(ny, nx)`` maps to
    ``values.ravel()``. Cells are quads ``(j, i), (j, i+1), (j+1, i+1),
    (j+1, i)`` (counter-clockwise); a grid one point wide gets line cells,
    a single point a vertex. Point data: for every complex field ``NAME``
    the arrays ``NAME_re``, ``NAME_im``, ``NAME_abs``, ``NAME_phase_deg``,
    ``NAME_db`` (see :func:`.tables.split_complex`); ``inside`` (int32, 1
    inside an impenetrable body, where every field array is NaN); any
    ``extra_point_data`` as given.
Boundary (``write_boundary_vtu``)
    ``.vtu`` with one point per surface node (z = 0), line cells joining
    consecutive nodes of each contour (closed loops by default). Point
    data: ``normal`` (3 components, z = 0), ``body_id`` and ``contour_id``
    (int32), the complex fields split as above, then ``real_fields``.
Metadata
    Scalars such as ``frequency_hz`` or ``from_deg`` given as
    ``metadata`` are stored as VTK FieldData (one Float64 value each; meshio
    5 does not write FieldData, so it is inserted into its XML).
Collection (``write_pvd``, ``write_sweep_pvd``)
    ``.pvd`` VTK XML ``Collection`` with one ``DataSet`` per file carrying
    ``timestep``, ``part``, ``file`` (relative to the ``.pvd``, forward
    slashes) and, optionally, ``name``.

Sweeps over two dimensions
--------------------------
A ``.pvd`` has a single time axis. ``write_sweep_pvd`` writes one entry per
(frequency, incidence) pair, ordered frequency first then incidence, with
``timestep`` = running index 0, 1, 2, ... so ParaView's time slider steps
through every solution. Using the frequency as the time value would force
several incidences into ``part`` slots, which ParaView overlays as one
multiblock data set on the same grid. Each entry's ``name`` attribute reads
``"f=<hz> Hz, from_deg=<deg>"`` and a companion CSV ``<stem>_steps.csv``
(columns ``timestep``, ``frequency_hz``, ``from_deg``, ``file``) maps
steps back to the sweep; the same values are in each file's FieldData when
the files were written with ``metadata``.
"""

from __future__ import annotations

import math
import os
import xml.etree.ElementTree as ET
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .atomic import atomic_path, atomic_write_bytes
from .errors import ExportError
from .tables import Convention, conjugate_for_convention, split_complex, write_csv

__all__ = [
    "PvdEntry",
    "read_pvd",
    "read_vtu",
    "write_boundary_vtu",
    "write_grid_vtu",
    "write_pvd",
    "write_sweep_pvd",
]

_RESERVED_GRID = ("inside",)
_RESERVED_BOUNDARY = ("normal", "body_id", "contour_id")


@dataclass(frozen=True)
class PvdEntry:
    """One ``DataSet`` line of a ``.pvd`` collection.

    Attributes
    ----------
    timestep : float
        Value on ParaView's time axis.
    file : str
        Path of the data file, relative to the ``.pvd`` file's folder.
    part : int
        Part number; entries sharing a timestep but not a part are shown
        together as one multiblock data set.
    name : str or None
        Optional label, shown by ParaView as the block name.
    """

    timestep: float
    file: str
    part: int = 0
    name: str | None = None


def _fail(path: str | os.PathLike[str], message: str) -> ExportError:
    return ExportError(f"{str(path)!r}: {message}")


def _axis(path: str | os.PathLike[str], name: str, values: ArrayLike) -> NDArray[np.float64]:
    axis = np.asarray(values, dtype=np.float64)
    if axis.ndim != 1 or axis.size == 0:
        raise _fail(path, f"grid axis {name} must be a non-empty 1D array, got shape {axis.shape}")
    if not np.all(np.isfinite(axis)):
        raise _fail(path, f"grid axis {name} holds NaN or infinite values")
    if axis.size > 1 and not np.all(np.diff(axis) > 0):
        raise _fail(path, f"grid axis {name} must be strictly increasing")
    return axis


def _grid_cells(nx: int, ny: int) -> list[tuple[str, NDArray[np.int64]]]:
    index = np.arange(nx * ny, dtype=np.int64).reshape(ny, nx)
    if nx > 1 and ny > 1:
        quads = np.stack(
            [index[:-1, :-1], index[:-1, 1:], index[1:, 1:], index[1:, :-1]], axis=-1
        ).reshape(-1, 4)
        return [("quad", quads)]
    if nx * ny > 1:
        flat = index.ravel()
        return [("line", np.stack([flat[:-1], flat[1:]], axis=-1))]
    return [("vertex", np.zeros((1, 1), dtype=np.int64))]


def _add(
    path: str | os.PathLike[str],
    point_data: dict[str, NDArray[Any]],
    name: str,
    values: NDArray[Any],
) -> None:
    if name in point_data:
        raise _fail(path, f"point data array {name!r} would be written twice")
    point_data[name] = values


def _format_scalar(value: float) -> str:
    # repr keeps every digit; VTK's ascii parser reads nan and inf.
    return repr(float(value))


def _field_data_xml(path: str | os.PathLike[str], metadata: Mapping[str, float]) -> bytes:
    parent = ET.Element("FieldData")
    for key, value in metadata.items():
        if not key or any(c.isspace() for c in key):
            raise _fail(path, f"metadata name {key!r} must be non-empty without spaces")
        array = ET.SubElement(
            parent,
            "DataArray",
            type="Float64",
            Name=key,
            NumberOfTuples="1",
            format="ascii",
        )
        array.text = _format_scalar(value)
    return ET.tostring(parent, encoding="utf-8", xml_declaration=False)


def _write_mesh(
    path: str | os.PathLike[str],
    points: NDArray[np.float64],
    cells: list[tuple[str, NDArray[np.int64]]],
    point_data: dict[str, NDArray[Any]],
    metadata: Mapping[str, float] | None,
) -> Path:
    import meshio  # imported here so that importing sectionwave stays fast

    target = Path(path)
    if target.suffix.lower() != ".vtu":
        raise _fail(path, "a VTK XML unstructured grid file must end in .vtu")
    mesh = meshio.Mesh(points, cells, point_data=point_data)
    extra = _field_data_xml(path, metadata) if metadata else b""
    with atomic_path(target) as temp:
        meshio.write(temp, mesh, file_format="vtu", binary=True, compression="zlib")
        if extra:
            content = temp.read_bytes()
            tag = b"<UnstructuredGrid>"
            at = content.find(tag)
            if at < 0:  # pragma: no cover - meshio always writes the tag
                raise _fail(path, "cannot place FieldData: no <UnstructuredGrid> tag")
            at += len(tag)
            temp.write_bytes(content[:at] + b"\n" + extra + content[at:])
    return target


def write_grid_vtu(
    path: str | os.PathLike[str],
    x: ArrayLike,
    y: ArrayLike,
    fields: Mapping[str, ArrayLike],
    *,
    inside_mask: ArrayLike | None = None,
    extra_point_data: Mapping[str, ArrayLike] | None = None,
    metadata: Mapping[str, float] | None = None,
    convention: Convention = "engineering",
) -> Path:
    """Write complex fields sampled on a rectangular grid as a ``.vtu`` file.

    Parameters
    ----------
    path : str or os.PathLike
        Destination, ending in ``.vtu``; its folder must exist.
    x, y : array_like
        Strictly increasing grid coordinates in metres, lengths ``nx``, ``ny``.
    fields : mapping of str to array_like
        Field name (``"u_total"``, ``"u_scat"``) to complex values of shape
        ``(ny, nx)``, in the exp(+j w t) convention.
    inside_mask : array_like of bool, optional
        Shape ``(ny, nx)``, true at points inside an impenetrable body. Field
        arrays are set to NaN there whatever the input holds. Default: no
        point inside.
    extra_point_data : mapping of str to array_like, optional
        Further real arrays of shape ``(ny, nx)`` or ``(ny, nx, k)``, written
        as float64 (e.g. ``"region_id"``, ``"error_estimate"``).
    metadata : mapping of str to float, optional
        Scalars stored as FieldData, e.g. ``{"frequency_hz": 1e9}``.
    convention : {"engineering", "physics"}
        Time convention of the written phasors; ``"physics"`` conjugates.

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        On a wrong suffix, shape, axis or a repeated array name.
    """
    gx = _axis(path, "x", x)
    gy = _axis(path, "y", y)
    nx, ny = gx.size, gy.size
    xx, yy = np.meshgrid(gx, gy)
    points = np.column_stack([xx.ravel(), yy.ravel(), np.zeros(nx * ny)])

    if inside_mask is None:
        inside = np.zeros((ny, nx), dtype=bool)
    else:
        inside = np.asarray(inside_mask, dtype=bool)
        if inside.shape != (ny, nx):
            raise _fail(path, f"inside_mask has shape {inside.shape}, expected {(ny, nx)}")

    point_data: dict[str, NDArray[Any]] = {}
    for name in fields:
        if name in _RESERVED_GRID:
            raise _fail(path, f"field name {name!r} is reserved")
        values = conjugate_for_convention(fields[name], convention)
        if values.shape != (ny, nx):
            raise _fail(
                path, f"field {name!r} has shape {values.shape}, expected (ny, nx) = {(ny, nx)}"
            )
        values[inside] = complex(math.nan, math.nan)
        for key, part in split_complex(name, values).items():
            _add(path, point_data, key, part.ravel())
    _add(path, point_data, "inside", inside.ravel().astype(np.int32))
    for name, raw in (extra_point_data or {}).items():
        array = np.asarray(raw, dtype=np.float64)
        if array.shape[:2] != (ny, nx) or array.ndim > 3:
            raise _fail(
                path,
                f"extra point data {name!r} has shape {array.shape}, "
                f"expected {(ny, nx)} or {(ny, nx)} + (k,)",
            )
        _add(path, point_data, name, array.reshape(nx * ny, *array.shape[2:]))
    return _write_mesh(path, points, _grid_cells(nx, ny), point_data, metadata)


def _contour_cells(contour: NDArray[np.int64], *, closed: bool) -> list[NDArray[np.int64]]:
    """Line segments through the nodes of each contour, in the given order."""
    segments: list[NDArray[np.int64]] = []
    _, first = np.unique(contour, return_index=True)
    for label in contour[np.sort(first)]:
        nodes = np.flatnonzero(contour == label)
        if nodes.size < 2:
            continue
        if closed and nodes.size > 2:
            ends = np.roll(nodes, -1)
        else:
            ends = nodes[1:]
            nodes = nodes[:-1]
        segments.append(np.column_stack([nodes, ends]))
    return segments


def write_boundary_vtu(
    path: str | os.PathLike[str],
    points: ArrayLike,
    normals: ArrayLike,
    body_id: ArrayLike,
    contour_id: ArrayLike,
    fields: Mapping[str, ArrayLike],
    *,
    real_fields: Mapping[str, ArrayLike] | None = None,
    closed: bool = True,
    metadata: Mapping[str, float] | None = None,
    convention: Convention = "engineering",
) -> Path:
    """Write surface fields on the boundary nodes as a ``.vtu`` file.

    Parameters
    ----------
    path : str or os.PathLike
        Destination, ending in ``.vtu``; its folder must exist.
    points : array_like, shape (n, 2)
        Node coordinates in metres.
    normals : array_like, shape (n, 2)
        Unit normals (out of the body), written as the 3-vector ``normal``.
    body_id, contour_id : array_like of int, shape (n,)
        Body and contour of each node. The nodes of one contour follow each
        other along the curve in array order (they need not be adjacent in
        the array).
    fields : mapping of str to array_like
        Complex surface fields of shape ``(n,)`` (e.g. ``"u"``, ``"dudn"``),
        exp(+j w t) convention.
    real_fields : mapping of str to array_like, optional
        Real arrays of shape ``(n,)`` or ``(n, k)``, e.g. quadrature weights
        ``"weight_m"`` or a per-node error estimate.
    closed : bool
        Join each contour's last node to its first.
    metadata : mapping of str to float, optional
        Scalars stored as FieldData.
    convention : {"engineering", "physics"}
        Time convention of the written phasors; ``"physics"`` conjugates.

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        On a wrong suffix or shape, or a repeated array name.
    """
    xy = np.asarray(points, dtype=np.float64)
    if xy.ndim != 2 or xy.shape[1] != 2 or xy.shape[0] == 0:
        raise _fail(path, f"points must have shape (n, 2) with n > 0, got {xy.shape}")
    n = xy.shape[0]
    nrm = np.asarray(normals, dtype=np.float64)
    if nrm.shape != (n, 2):
        raise _fail(path, f"normals have shape {nrm.shape}, expected {(n, 2)}")
    ids: dict[str, NDArray[np.int64]] = {}
    for label, raw in (("body_id", body_id), ("contour_id", contour_id)):
        array = np.asarray(raw)
        if array.shape != (n,) or array.dtype.kind not in "iub":
            raise _fail(
                path,
                f"{label} must be integers of shape {(n,)}, got {array.dtype} {array.shape}",
            )
        ids[label] = array.astype(np.int64)

    point_data: dict[str, NDArray[Any]] = {
        "normal": np.column_stack([nrm, np.zeros(n)]),
        "body_id": ids["body_id"].astype(np.int32),
        "contour_id": ids["contour_id"].astype(np.int32),
    }
    for name in fields:
        if name in _RESERVED_BOUNDARY:
            raise _fail(path, f"field name {name!r} is reserved")
        values = conjugate_for_convention(fields[name], convention)
        if values.shape != (n,):
            raise _fail(path, f"field {name!r} has shape {values.shape}, expected {(n,)}")
        for key, part in split_complex(name, values).items():
            _add(path, point_data, key, part)
    for name, raw in (real_fields or {}).items():
        array = np.asarray(raw, dtype=np.float64)
        if array.shape[:1] != (n,) or array.ndim > 2:
            raise _fail(
                path, f"real field {name!r} has shape {array.shape}, expected {(n,)} or (n, k)"
            )
        _add(path, point_data, name, array)

    segments = _contour_cells(ids["contour_id"], closed=closed)
    cells: list[tuple[str, NDArray[np.int64]]]
    if segments:
        cells = [("line", np.concatenate(segments).astype(np.int64))]
    else:
        cells = [("vertex", np.arange(n, dtype=np.int64).reshape(-1, 1))]
    points3 = np.column_stack([xy, np.zeros(n)])
    return _write_mesh(path, points3, cells, point_data, metadata)


def read_vtu(path: str | os.PathLike[str]) -> Any:
    """Read a ``.vtu`` file with meshio.

    Parameters
    ----------
    path : str or os.PathLike
        File to read.

    Returns
    -------
    meshio.Mesh
        Points (n, 3), cells, ``point_data`` and ``field_data`` (where
        FieldData scalars come back as 1-element arrays).
    """
    import meshio

    return meshio.read(path, file_format="vtu")


def _relative_file(pvd: Path, file: str | os.PathLike[str]) -> str:
    data = Path(file)
    if data.is_absolute():
        data = Path(os.path.relpath(data, pvd.absolute().parent))
    return data.as_posix()


def write_pvd(
    path: str | os.PathLike[str],
    entries: Sequence[PvdEntry | tuple[float, str | os.PathLike[str]]],
) -> Path:
    """Write a ParaView collection (``.pvd``) listing data files over time.

    Parameters
    ----------
    path : str or os.PathLike
        Destination, ending in ``.pvd``; its folder must exist.
    entries : sequence of PvdEntry or (timestep, file) tuples
        One ``DataSet`` each. A file given as an absolute path is written
        relative to the ``.pvd`` file's folder; a relative one is taken as
        already relative to it.

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        If the suffix is not ``.pvd``, there is no entry, or a timestep is
        not finite.

    Notes
    -----
    Files are not required to exist when the collection is written, so a
    collection can be written first; ParaView needs them when opening it.
    """
    target = Path(path)
    if target.suffix.lower() != ".pvd":
        raise _fail(path, "a ParaView collection file must end in .pvd")
    if not entries:
        raise _fail(path, "a collection needs at least one entry")
    root = ET.Element("VTKFile", type="Collection", version="0.1", byte_order="LittleEndian")
    collection = ET.SubElement(root, "Collection")
    for raw in entries:
        entry = raw if isinstance(raw, PvdEntry) else PvdEntry(float(raw[0]), str(raw[1]))
        if not math.isfinite(entry.timestep):
            raise _fail(path, f"timestep {entry.timestep!r} of {entry.file!r} is not finite")
        attributes = {
            "timestep": _format_scalar(entry.timestep),
            "part": str(int(entry.part)),
            "file": _relative_file(target, entry.file),
        }
        if entry.name is not None:
            attributes["name"] = entry.name
        ET.SubElement(collection, "DataSet", attributes)
    ET.indent(root)
    body = ET.tostring(root, encoding="utf-8", xml_declaration=False)
    return atomic_write_bytes(target, b'<?xml version="1.0"?>\n' + body + b"\n")


def write_sweep_pvd(
    path: str | os.PathLike[str],
    runs: Sequence[tuple[float, float, str | os.PathLike[str]]],
    *,
    timestep: Literal["index", "frequency"] = "index",
) -> Path:
    """Write a ``.pvd`` collection for a sweep over frequency and incidence.

    Parameters
    ----------
    path : str or os.PathLike
        Destination, ending in ``.pvd``; its folder must exist.
    runs : sequence of (frequency_hz, from_deg, file)
        One data file per solution. Entries are sorted by frequency, then
        incidence angle.
    timestep : {"index", "frequency"}
        ``"index"``: running index 0, 1, 2, ... (works for any sweep).
        ``"frequency"``: the frequency in hertz, allowed only when each
        frequency appears once (a single incidence).

    Returns
    -------
    pathlib.Path
        The ``.pvd`` file. A companion table ``<stem>_steps.csv`` is written
        beside it (columns ``timestep``, ``frequency_hz``, ``from_deg``,
        ``file``).

    Raises
    ------
    ExportError
        If ``runs`` is empty, repeats a (frequency, incidence) pair, or
        ``timestep="frequency"`` is asked for several incidences.

    See Also
    --------
    write_pvd : the general collection writer.
    """
    target = Path(path)
    if not runs:
        raise _fail(path, "a sweep collection needs at least one run")
    ordered = sorted(
        ((float(f), float(a), _relative_file(target, file)) for f, a, file in runs),
        key=lambda run: (run[0], run[1]),
    )
    pairs = [(f, a) for f, a, _ in ordered]
    if len(set(pairs)) != len(pairs):
        raise _fail(path, "a (frequency, incidence) pair appears twice in the sweep")
    if timestep == "frequency":
        frequencies = [f for f, _ in pairs]
        if len(set(frequencies)) != len(frequencies):
            raise _fail(
                path,
                "timestep='frequency' needs one incidence per frequency; use timestep='index'",
            )
        steps = frequencies
    elif timestep == "index":
        steps = [float(i) for i in range(len(ordered))]
    else:
        raise _fail(path, f"timestep must be 'index' or 'frequency', not {timestep!r}")
    entries = [
        PvdEntry(step, file, 0, f"f={f:.9g} Hz, from_deg={a:.9g}")
        for step, (f, a, file) in zip(steps, ordered, strict=True)
    ]
    write_csv(
        target.with_name(f"{target.stem}_steps.csv"),
        {
            "timestep": np.array(steps),
            "frequency_hz": np.array([f for f, _, _ in ordered]),
            "from_deg": np.array([a for _, a, _ in ordered]),
            "file": np.array([file for _, _, file in ordered], dtype=str),
        },
    )
    return write_pvd(target, entries)


def read_pvd(path: str | os.PathLike[str]) -> list[PvdEntry]:
    """Read the entries of a ``.pvd`` collection.

    Parameters
    ----------
    path : str or os.PathLike
        Collection file.

    Returns
    -------
    list of PvdEntry
        In file order; ``file`` as written (relative to the collection).

    Raises
    ------
    ExportError
        If the file is not a VTK ``Collection`` or an entry lacks
        ``timestep`` or ``file``.
    """
    from defusedxml import ElementTree as SafeET  # refuses entity tricks in foreign files

    root = SafeET.parse(path).getroot()
    if root.tag != "VTKFile" or root.get("type") != "Collection":
        raise _fail(path, "not a VTK Collection file (root must be <VTKFile type='Collection'>)")
    entries: list[PvdEntry] = []
    for item in root.iter("DataSet"):
        if "timestep" not in item.attrib or "file" not in item.attrib:
            raise _fail(path, "a DataSet entry lacks its timestep or file attribute")
        entries.append(
            PvdEntry(
                float(item.attrib["timestep"]),
                item.attrib["file"],
                int(item.attrib.get("part", "0")),
                item.attrib.get("name"),
            )
        )
    return entries
