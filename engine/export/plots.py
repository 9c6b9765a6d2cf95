"""PNG plots of field maps, echo widths and mesh previews.

Every function renders off screen with matplotlib's Agg canvas on a private
``Figure`` (never ``pyplot``, so no window opens and no global state is
touched), then writes the file atomically. The format follows the file's
suffix (``.png`` by default; ``.svg`` and ``.pdf`` also work). Colour maps
('cividis') and line styles stay distinguishable when printed in greyscale.
matplotlib is imported inside the functions, so importing this module is
cheap.
"""

from __future__ import annotations

import io
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .atomic import atomic_write_bytes
from .errors import ExportError

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure
    from matplotlib.projections.polar import PolarAxes

__all__ = [
    "plot_echo_width_cartesian",
    "plot_echo_width_polar",
    "plot_boundary_values",
    "plot_echo_width_vs_frequency",
    "plot_field_map",
    "plot_mesh_preview",
    "plot_range_profile",
]

#: Colour map for every filled plot: perceptually uniform, readable in greyscale.
COLORMAP = "cividis"

_DPI = 150
_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
# Black and greys with distinct dash patterns and markers, so curves stay
# apart on a greyscale print.
_LINE_STYLES: tuple[tuple[str, str | tuple[int, tuple[int, ...]], str], ...] = (
    ("black", "-", ""),
    ("0.35", "--", "o"),
    ("0.2", ":", "s"),
    ("0.5", "-.", "^"),
    ("0.1", (0, (5, 1, 1, 1, 1, 1)), "v"),
    ("0.6", (0, (1, 1)), "D"),
)


def _format_for(path: str | os.PathLike[str]) -> str:
    suffix = Path(path).suffix.lower()
    if suffix not in _FORMATS:
        raise ExportError(
            f"{str(path)!r}: plot files must end in {', '.join(_FORMATS)}, not {suffix!r}"
        )
    return _FORMATS[suffix]


def _new_figure(size_in: tuple[float, float]) -> Figure:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=size_in, dpi=_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def _save(figure: Figure, path: str | os.PathLike[str], file_format: str) -> Path:
    buffer = io.BytesIO()
    # Fixed metadata keeps files byte-identical between runs of the same case.
    metadata: dict[str, Any] = {"Software": None} if file_format == "png" else {}
    figure.savefig(buffer, format=file_format, metadata=metadata)
    return atomic_write_bytes(path, buffer.getvalue())


_MARKERS = ("", "o", "s", "^", "v", "D", "x", "+", "<", ">", "p", "*")
_DASHES: tuple[str | tuple[int, tuple[int, ...]], ...] = ("-", "--", ":", "-.")


def _style(index: int, n_points: int) -> dict[str, Any]:
    """Colour, dash and marker of curve ``index``: no two of the first 48 curves look alike."""
    if index < len(_LINE_STYLES):
        color, dash, marker = _LINE_STYLES[index]
    else:
        color = f"C{index % 10}"
        marker = _MARKERS[index % len(_MARKERS)]
        dash = _DASHES[(index // len(_MARKERS)) % len(_DASHES)]
    # Markers only every few points, or they hide the curve on fine sweeps.
    every = max(1, n_points // 12)
    return {"color": color, "linestyle": dash, "marker": marker, "markevery": every}


def _curves(
    path: str | os.PathLike[str], x: NDArray[np.float64], curves: Mapping[str, ArrayLike]
) -> dict[str, NDArray[np.float64]]:
    if not curves:
        raise ExportError(f"{str(path)!r}: no curve to plot")
    out: dict[str, NDArray[np.float64]] = {}
    for label, raw in curves.items():
        values = np.asarray(raw, dtype=np.float64)
        if values.shape != x.shape:
            raise ExportError(
                f"{str(path)!r}: curve {label!r} has shape {values.shape}, expected {x.shape}"
            )
        out[label] = values
    return out


def _vector(path: str | os.PathLike[str], name: str, raw: ArrayLike) -> NDArray[np.float64]:
    values = np.asarray(raw, dtype=np.float64)
    if values.ndim != 1 or values.size == 0:
        raise ExportError(f"{str(path)!r}: {name} must be a non-empty 1D array")
    return values


def _curve_inputs(
    path: str | os.PathLike[str], name: str, x: ArrayLike, curves: Mapping[str, ArrayLike]
) -> tuple[str, NDArray[np.float64], dict[str, NDArray[np.float64]]]:
    """File format, abscissa and curves of a curve plot, each checked."""
    file_format = _format_for(path)
    abscissa = _vector(path, name, x)
    return file_format, abscissa, _curves(path, abscissa, curves)


def _draw_curves(
    axes: Axes, x: NDArray[np.float64], curves: Mapping[str, NDArray[np.float64]]
) -> None:
    for index, (label, values) in enumerate(curves.items()):
        axes.plot(x, values, label=label, linewidth=1.4, **_style(index, x.size))


def _linear_axes(
    x: NDArray[np.float64],
    curves: Mapping[str, NDArray[np.float64]],
    xlabel: str,
    unit_label: str,
    ylabel: str | None = None,
) -> tuple[Figure, Axes]:
    """Figure with ``curves`` (echo width unless ``ylabel`` says otherwise) against ``x`` on linear axes."""
    figure = _new_figure((7.0, 4.2))
    axes = figure.add_subplot()
    _draw_curves(axes, x, curves)
    axes.set_xlabel(xlabel)
    axes.set_ylabel(ylabel or f"echo width ({unit_label})")
    axes.grid(True, color="0.85")
    return figure, axes


def _save_curves(
    figure: Figure,
    axes: Axes,
    path: str | os.PathLike[str],
    file_format: str,
    title: str | None,
    n_curves: int,
) -> Path:
    """Add the title and, for several curves, the legend; then save the figure."""
    if title:
        axes.set_title(title)
    if n_curves > 1:
        axes.legend(fontsize="small", framealpha=0.9)
    return _save(figure, path, file_format)


def plot_field_map(
    path: str | os.PathLike[str],
    x: ArrayLike,
    y: ArrayLike,
    values: ArrayLike,
    outlines: Sequence[ArrayLike] = (),
    *,
    quantity: Literal["abs", "real", "db"] = "abs",
    title: str | None = None,
    colorbar_label: str | None = None,
    field_symbol: str = "u",
    field_unit: str = "",
    db_range: float = 60.0,
) -> Path:
    """Plot a field on a grid as a colour map with the body outlines.

    Parameters
    ----------
    path : str or os.PathLike
        Destination (``.png``, ``.svg`` or ``.pdf``); its folder must exist.
    x, y : array_like
        Grid coordinates in metres, lengths ``nx`` and ``ny``.
    values : array_like, shape (ny, nx)
        Complex or real field; NaN (inside a body) is left blank.
    outlines : sequence of array_like of shape (m, 2)
        Closed body outlines in metres, drawn as black lines.
    quantity : {"abs", "real", "db"}
        Magnitude, real part (the field at time zero) or 20 log10 magnitude.
    title : str, optional
        Plot title.
    colorbar_label : str, optional
        Default built from ``field_symbol``, ``field_unit`` and ``quantity``,
        e.g. ``"|E_z| (V/m)"``.
    field_symbol : str
        Symbol of the field in the default label, e.g. ``"E_z"`` or ``"p"``.
    field_unit : str
        Unit of the field in the default label, e.g. ``"V/m"`` or ``"Pa"``.
    db_range : float
        For ``quantity="db"``, the colour scale spans the top ``db_range`` dB.

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        On a wrong suffix, shape or quantity.
    """
    file_format = _format_for(path)
    gx = _vector(path, "x", x)
    gy = _vector(path, "y", y)
    field = np.asarray(values)
    if field.shape != (gy.size, gx.size):
        raise ExportError(
            f"{str(path)!r}: values have shape {field.shape}, expected {(gy.size, gx.size)}"
        )
    unit = f" ({field_unit})" if field_unit else ""
    cmap_kwargs: dict[str, Any] = {}
    if quantity == "abs":
        shown = np.abs(field).astype(np.float64)
        default_label = f"|{field_symbol}|{unit}"
    elif quantity == "real":
        shown = np.real(field).astype(np.float64)
        default_label = f"Re {field_symbol}{unit}"
        limit = float(np.nanmax(np.abs(shown))) if np.any(np.isfinite(shown)) else 1.0
        cmap_kwargs = {"vmin": -limit, "vmax": limit}
    elif quantity == "db":
        with np.errstate(divide="ignore", invalid="ignore"):
            shown = 20.0 * np.log10(np.abs(field).astype(np.float64))
        finite = shown[np.isfinite(shown)]
        top = float(finite.max()) if finite.size else 0.0
        shown = np.where(np.isneginf(shown), top - db_range, shown)
        default_label = (
            f"20 log10 |{field_symbol}| (dB{' re 1 ' + field_unit if field_unit else ''})"
        )
        cmap_kwargs = {"vmin": top - db_range, "vmax": top}
    else:
        raise ExportError(
            f"{str(path)!r}: quantity must be 'abs', 'real' or 'db', not {quantity!r}"
        )

    import matplotlib

    cmap = matplotlib.colormaps[COLORMAP].with_extremes(bad="white")
    figure = _new_figure((6.4, 5.2))
    axes = figure.add_subplot()
    mesh = axes.pcolormesh(
        gx, gy, np.ma.masked_invalid(shown), shading="nearest", cmap=cmap, **cmap_kwargs
    )
    for outline in outlines:
        ring = np.asarray(outline, dtype=np.float64)
        if ring.ndim != 2 or ring.shape[1] != 2:
            raise ExportError(f"{str(path)!r}: an outline must have shape (m, 2), got {ring.shape}")
        closed = np.vstack([ring, ring[:1]])
        axes.plot(closed[:, 0], closed[:, 1], color="black", linewidth=1.2)
    axes.set_aspect("equal")
    axes.set_xlim(gx[0], gx[-1])
    axes.set_ylim(gy[0], gy[-1])
    axes.set_xlabel("x (m)")
    axes.set_ylabel("y (m)")
    if title:
        axes.set_title(title)
    figure.colorbar(mesh, ax=axes, label=colorbar_label or default_label, shrink=0.85)
    return _save(figure, path, file_format)


def plot_echo_width_polar(
    path: str | os.PathLike[str],
    angles_deg: ArrayLike,
    echo_width_db: Mapping[str, ArrayLike],
    *,
    title: str | None = None,
    unit_label: str = "dB m",
    db_range: float = 50.0,
) -> Path:
    """Plot echo width against observation angle on a polar chart.

    Parameters
    ----------
    path : str or os.PathLike
        Destination (``.png``, ``.svg`` or ``.pdf``); its folder must exist.
    angles_deg : array_like, shape (n,)
        Observation angles in degrees, counter-clockwise from +x (0 deg is
        drawn to the right, as in the drawing).
    echo_width_db : mapping of str to array_like
        Curve label (``"TM"``, ``"1 GHz"``) to echo width in dB, shape (n,).
    title : str, optional
        Plot title.
    unit_label : str
        Unit of the radial axis, ``"dB m"`` (re 1 m) or ``"dB lambda"``.
    db_range : float
        The radial axis spans the top ``db_range`` dB; lower values are drawn
        on the inner circle.

    Returns
    -------
    pathlib.Path
        The destination.
    """
    file_format, angles, curves = _curve_inputs(path, "angles_deg", angles_deg, echo_width_db)
    finite = np.concatenate([c[np.isfinite(c)] for c in curves.values()])
    top = float(np.ceil(finite.max() / 5.0) * 5.0) if finite.size else 0.0
    bottom = top - db_range
    figure = _new_figure((6.0, 6.0))
    axes = cast("PolarAxes", figure.add_subplot(projection="polar"))
    clipped = {label: np.clip(values, bottom, None) for label, values in curves.items()}
    _draw_curves(axes, np.radians(angles), clipped)
    axes.set_ylim(bottom, top)
    axes.set_theta_zero_location("E")
    axes.set_theta_direction(1)
    axes.set_rlabel_position(112.5)
    axes.set_xlabel(f"observation angle (deg); radius: echo width ({unit_label})")
    return _save_curves(figure, axes, path, file_format, title, len(curves))


def plot_echo_width_cartesian(
    path: str | os.PathLike[str],
    angles_deg: ArrayLike,
    echo_width_db: Mapping[str, ArrayLike],
    *,
    title: str | None = None,
    unit_label: str = "dB m",
    ylabel: str | None = None,
) -> Path:
    """Plot echo width (or, with ``ylabel``, another quantity in dB) against angle on linear axes.

    Parameters
    ----------
    path : str or os.PathLike
        Destination (``.png``, ``.svg`` or ``.pdf``); its folder must exist.
    angles_deg : array_like, shape (n,)
        Observation angles in degrees.
    echo_width_db : mapping of str to array_like
        Curve label to echo width in dB, shape (n,).
    title : str, optional
        Plot title.
    unit_label : str
        Unit of the vertical axis, ``"dB m"`` or ``"dB lambda"``.

    Returns
    -------
    pathlib.Path
        The destination.
    """
    file_format, angles, curves = _curve_inputs(path, "angles_deg", angles_deg, echo_width_db)
    figure, axes = _linear_axes(angles, curves, "observation angle (deg)", unit_label, ylabel)
    axes.set_xlim(float(angles.min()), float(angles.max()))
    span = float(angles.max() - angles.min())
    if span >= 90.0:
        axes.set_xticks(np.arange(np.ceil(angles.min() / 45.0) * 45.0, angles.max() + 1e-9, 45.0))
    return _save_curves(figure, axes, path, file_format, title, len(curves))


def _frequency_scale(frequency_hz: NDArray[np.float64]) -> tuple[float, str]:
    top = float(np.nanmax(np.abs(frequency_hz)))
    for factor, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if top >= factor:
            return factor, unit
    return 1.0, "Hz"


def plot_echo_width_vs_frequency(
    path: str | os.PathLike[str],
    frequency_hz: ArrayLike,
    echo_width_db: Mapping[str, ArrayLike],
    *,
    title: str | None = None,
    unit_label: str = "dB m",
) -> Path:
    """Plot echo width against frequency (e.g. monostatic per incidence).

    Parameters
    ----------
    path : str or os.PathLike
        Destination (``.png``, ``.svg`` or ``.pdf``); its folder must exist.
    frequency_hz : array_like, shape (n,)
        Frequencies in hertz; the axis is labelled in Hz, kHz, MHz or GHz.
    echo_width_db : mapping of str to array_like
        Curve label to echo width in dB, shape (n,).
    title : str, optional
        Plot title.
    unit_label : str
        Unit of the vertical axis, ``"dB m"`` or ``"dB lambda"``.

    Returns
    -------
    pathlib.Path
        The destination.
    """
    file_format, frequency, curves = _curve_inputs(
        path, "frequency_hz", frequency_hz, echo_width_db
    )
    factor, unit = _frequency_scale(frequency)
    figure, axes = _linear_axes(frequency / factor, curves, f"frequency ({unit})", unit_label)
    return _save_curves(figure, axes, path, file_format, title, len(curves))


def plot_range_profile(
    path: str | os.PathLike[str],
    range_m: ArrayLike,
    magnitude_db: Mapping[str, ArrayLike],
    *,
    title: str | None = None,
) -> Path:
    """Plot down-range profiles (dB) against range in metres, one curve per incidence."""
    file_format, ranges, curves = _curve_inputs(path, "range_m", range_m, magnitude_db)
    figure, axes = _linear_axes(ranges, curves, "range (m), positive away from the radar", "",
                                ylabel="profile magnitude (dB re 1 sqrt(m), per unit amplitude)")
    return _save_curves(figure, axes, path, file_format, title, len(curves))


def plot_boundary_values(
    path: str | os.PathLike[str],
    nodes: ArrayLike,
    values_db: ArrayLike,
    outlines: Sequence[ArrayLike] = (),
    *,
    title: str | None = None,
    colorbar_label: str = "dB",
    db_range: float = 40.0,
) -> Path:
    """Plot a quantity in dB along the boundary: nodes coloured by value over the body outlines."""
    file_format = _format_for(path)
    pts = np.asarray(nodes, dtype=np.float64)
    vals = np.asarray(values_db, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 2 or vals.shape != (pts.shape[0],):
        raise ExportError(f"{str(path)!r}: nodes must be (n, 2) and values (n,), got {pts.shape} and {vals.shape}")
    finite = vals[np.isfinite(vals)]
    top = float(finite.max()) if finite.size else 0.0
    figure = _new_figure((6.4, 5.2))
    axes = figure.add_subplot()
    for outline in outlines:
        ring = np.asarray(outline, dtype=np.float64)
        closed = np.vstack([ring, ring[:1]])
        axes.plot(closed[:, 0], closed[:, 1], color="0.6", linewidth=0.8)
    dots = axes.scatter(pts[:, 0], pts[:, 1], c=np.clip(vals, top - db_range, top), s=6, cmap=COLORMAP,
                        vmin=top - db_range, vmax=top)
    axes.set_aspect("equal")
    axes.set_xlabel("x (m)")
    axes.set_ylabel("y (m)")
    if title:
        axes.set_title(title)
    figure.colorbar(dots, ax=axes, label=colorbar_label, shrink=0.85)
    return _save(figure, path, file_format)


def plot_mesh_preview(
    path: str | os.PathLike[str],
    outline_points: Sequence[ArrayLike],
    nodes: ArrayLike,
    normals: ArrayLike,
    panel_ends: Sequence[ArrayLike] | ArrayLike,
    panel_size_wavelengths: ArrayLike,
    *,
    title: str | None = None,
    max_normals: int = 400,
) -> Path:
    """Plot the boundary mesh: outlines, panels coloured by size, nodes, normals.

    Parameters
    ----------
    path : str or os.PathLike
        Destination (``.png``, ``.svg`` or ``.pdf``); its folder must exist.
    outline_points : sequence of array_like of shape (m, 2)
        Densely sampled closed outlines in metres (the exact curves).
    nodes : array_like, shape (n, 2)
        Quadrature nodes in metres.
    normals : array_like, shape (n, 2)
        Unit normals at the nodes, drawn as arrows of a fixed fraction of
        the drawing size.
    panel_ends : sequence of array_like of shape (2, 2), or array (p, 2, 2)
        Start and end point of each panel.
    panel_size_wavelengths : array_like, shape (p,)
        Panel length in wavelengths (of the denser adjacent region), used to
        colour the panel chords.
    title : str, optional
        Plot title.
    max_normals : int
        At most this many arrows are drawn (evenly picked), so fine meshes
        stay readable.

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        On a wrong suffix or shape.
    """
    file_format = _format_for(path)
    xy = np.asarray(nodes, dtype=np.float64).reshape(-1, 2)
    nrm = np.asarray(normals, dtype=np.float64)
    if nrm.shape != xy.shape:
        raise ExportError(f"{str(path)!r}: normals have shape {nrm.shape}, expected {xy.shape}")
    ends = np.asarray(panel_ends, dtype=np.float64).reshape(-1, 2, 2)
    sizes = np.asarray(panel_size_wavelengths, dtype=np.float64).ravel()
    if sizes.shape != (ends.shape[0],):
        raise ExportError(f"{str(path)!r}: {sizes.size} panel sizes for {ends.shape[0]} panels")
    rings = [np.asarray(r, dtype=np.float64).reshape(-1, 2) for r in outline_points]

    from matplotlib.collections import LineCollection

    figure = _new_figure((6.8, 5.6))
    axes = figure.add_subplot()
    for ring in rings:
        closed = np.vstack([ring, ring[:1]])
        axes.plot(closed[:, 0], closed[:, 1], color="0.6", linewidth=0.8, zorder=1)
    if ends.shape[0]:
        chords = LineCollection(list(ends), cmap=COLORMAP, linewidths=3.0, zorder=2)
        chords.set_array(sizes)
        axes.add_collection(chords)
        figure.colorbar(chords, ax=axes, label="panel length (wavelengths)", shrink=0.85)
        tips = ends.reshape(-1, 2)
        axes.plot(tips[:, 0], tips[:, 1], "|", color="black", markersize=6, zorder=3)
    if xy.shape[0]:
        axes.plot(xy[:, 0], xy[:, 1], ".", color="black", markersize=2.0, zorder=4)
    everything = (
        np.vstack([xy, ends.reshape(-1, 2), *rings])
        if rings
        else np.vstack([xy, ends.reshape(-1, 2)])
    )
    if everything.shape[0]:
        extent = float(np.ptp(everything, axis=0).max()) or 1.0
        pick = np.unique(np.linspace(0, xy.shape[0] - 1, min(max_normals, xy.shape[0])).astype(int))
        if pick.size and xy.shape[0]:
            arrows = nrm[pick] * 0.04 * extent
            axes.quiver(
                xy[pick, 0],
                xy[pick, 1],
                arrows[:, 0],
                arrows[:, 1],
                angles="xy",
                scale_units="xy",
                scale=1.0,
                color="0.25",
                width=0.002,
                zorder=5,
            )
        margin = 0.08 * extent
        low, high = everything.min(axis=0) - margin, everything.max(axis=0) + margin
        axes.set_xlim(low[0], high[0])
        axes.set_ylim(low[1], high[1])
    axes.set_aspect("equal")
    axes.set_xlabel("x (m)")
    axes.set_ylabel("y (m)")
    axes.set_title(title or f"{ends.shape[0]} panels, {xy.shape[0]} nodes")
    return _save(figure, path, file_format)
