"""Write a solved scene: CSV tables, summary.json, VTK files and plots.

Files in the run folder
-----------------------
farfield.csv
    ``frequency_hz, incident, from_deg, angle_deg, farfield_re, farfield_im,
    echo_width_m, echo_width_db_m, echo_width_db_lambda``; ``from_deg`` is
    empty (nan) for line sources.
monostatic.csv
    ``frequency_hz, from_deg, farfield_re, farfield_im, echo_width_m,
    echo_width_db_m, echo_width_db_lambda`` (plane waves only).
surface.csv
    One row per boundary node and incident wave: position, normal, arc
    weight, total field ``u`` and ``dudn``, and the physical quantity
    (surface current for PEC, pressure and normal velocity for sound).
summary.json
    Versioned (``schema``); see the README for every key.
boundary_*.vtu, boundary.pvd
    The boundary as line cells with the surface fields, for ParaView.
*.png
    Echo-width plots and a mesh preview.
"""

from __future__ import annotations

import json
import math
import platform
from pathlib import Path
from typing import Any

import numpy as np

from ..fields import echo_width
from .atomic import atomic_write_text
from .tables import conjugate_for_convention, write_csv

__all__ = ["CAUTION", "SUMMARY_SCHEMA", "summary_dict", "write_run"]

SUMMARY_SCHEMA = "sectionwave.summary/1"

CAUTION = (
    "2D results model an infinitely long, uniform cross-section; they are engineering "
    "estimates. Where they feed a safety decision (RF exposure, noise limits, structural "
    "or navigation use), local codes and licensed practice decide."
)


def _conv(values: Any, convention: str) -> np.ndarray:
    return conjugate_for_convention(np.asarray(values, dtype=complex), convention)


def write_run(result: Any, out_dir: Path, *, convention: str | None = None) -> list[str]:
    """Write every output of ``result`` (a ``RunResult``) into ``out_dir``.

    Returns the names of the files written (relative to ``out_dir``).
    """
    from ..run import echo_width_table, physical_surface_quantities

    scene = result.scene
    conv = convention or scene.time_convention
    out_dir = Path(out_dir)
    written: list[str] = []

    ff_rows: dict[str, list[Any]] = {k: [] for k in (
        "frequency_hz", "incident", "from_deg", "angle_deg", "farfield_re", "farfield_im",
        "echo_width_m", "echo_width_db_m", "echo_width_db_lambda")}
    mono_rows: dict[str, list[Any]] = {k: [] for k in (
        "frequency_hz", "from_deg", "farfield_re", "farfield_im",
        "echo_width_m", "echo_width_db_m", "echo_width_db_lambda")}
    surf_rows: dict[str, list[Any]] = {}
    for fr in result.frequencies:
        ew = echo_width_table(fr)
        ff = _conv(fr.farfield, conv)
        na = fr.angles_deg.size
        for m, col in enumerate(fr.columns):
            ff_rows["frequency_hz"].append(np.full(na, fr.frequency_hz))
            ff_rows["incident"].append(np.full(na, col["incident"]))
            ff_rows["from_deg"].append(np.full(na, col["from_deg"]))
            ff_rows["angle_deg"].append(fr.angles_deg)
            ff_rows["farfield_re"].append(ff[:, m].real)
            ff_rows["farfield_im"].append(ff[:, m].imag)
            ff_rows["echo_width_m"].append(ew["m"][:, m])
            ff_rows["echo_width_db_m"].append(ew["db_m"][:, m])
            ff_rows["echo_width_db_lambda"].append(ew["db_lambda"][:, m])
        plane = [m for m, c in enumerate(fr.columns) if c["kind"] == "plane"]
        if plane:
            mono = _conv(fr.monostatic[plane], conv)
            mono_ew = echo_width(mono, fr.wavelength_m)
            mono_rows["frequency_hz"].append(np.full(len(plane), fr.frequency_hz))
            mono_rows["from_deg"].append(np.array([fr.columns[m]["from_deg"] for m in plane]))
            mono_rows["farfield_re"].append(mono.real)
            mono_rows["farfield_im"].append(mono.imag)
            mono_rows["echo_width_m"].append(mono_ew["m"])
            mono_rows["echo_width_db_m"].append(mono_ew["db_m"])
            mono_rows["echo_width_db_lambda"].append(mono_ew["db_lambda"])
        mesh = fr.mesh
        phys = physical_surface_quantities(scene, fr)
        n = mesh.n_nodes
        for m, col in enumerate(fr.columns):
            block: dict[str, Any] = {
                "frequency_hz": np.full(n, fr.frequency_hz),
                "incident": np.full(n, col["incident"]),
                "from_deg": np.full(n, col["from_deg"]),
                "body": np.array([scene.bodies[b].name for b in mesh.body_of_node]),
                "contour": mesh.contour_of_node,
                "x_m": mesh.nodes[:, 0],
                "y_m": mesh.nodes[:, 1],
                "normal_x": mesh.normals[:, 0],
                "normal_y": mesh.normals[:, 1],
                "arc_weight_m": mesh.weights,
            }
            u = _conv(fr.u[:, m], conv)
            dudn = _conv(fr.psi[:, m], conv)
            block.update({"u_re": u.real, "u_im": u.imag, "dudn_re": dudn.real, "dudn_im": dudn.imag})
            for name, values in phys.items():
                v = _conv(values[:, m], conv)
                stem, unit = _split_unit(name)
                block[f"{stem}_re_{unit}"] = v.real
                block[f"{stem}_im_{unit}"] = v.imag
            for key, val in block.items():
                surf_rows.setdefault(key, []).append(val)

    header = f"sectionwave results; time convention {conv}; {CAUTION}"
    write_csv(out_dir / "farfield.csv", {k: np.concatenate(v) for k, v in ff_rows.items()}, header_comment=header)
    written.append("farfield.csv")
    if mono_rows["frequency_hz"]:
        write_csv(out_dir / "monostatic.csv", {k: np.concatenate(v) for k, v in mono_rows.items()}, header_comment=header)
        written.append("monostatic.csv")
    write_csv(out_dir / "surface.csv", {k: np.concatenate(v) for k, v in surf_rows.items()}, header_comment=header)
    written.append("surface.csv")
    if scene.vtk:
        written += _write_boundary_vtk(result, out_dir, conv)
    if any(fr.near is not None for fr in result.frequencies):
        written += _write_near_fields(result, out_dir, conv)
    if scene.plots:
        written += _write_plots(result, out_dir)
    summary = summary_dict(result, conv, written + ["summary.json"])
    atomic_write_text(out_dir / "summary.json", json.dumps(summary, indent=2, allow_nan=False, default=_json_default) + "\n")
    return written + ["summary.json"]


def _split_unit(name: str) -> tuple[str, str]:
    for unit in ("a_per_m", "m_per_s", "pa"):
        if name.endswith("_" + unit):
            return name[: -len(unit) - 1], unit
    return name, ""


def _json_default(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(type(value).__name__)


def _finite(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def summary_dict(result: Any, convention: str, files: list[str]) -> dict[str, Any]:
    """The content of summary.json (schema ``SUMMARY_SCHEMA``)."""
    from .. import __version__
    from ..run import panel_wavelengths

    scene = result.scene
    freqs = []
    for fr in result.frequencies:
        entry: dict[str, Any] = {
            "frequency_hz": fr.frequency_hz,
            "wavelength_m": fr.wavelength_m,
            "wavenumber_rad_per_m": fr.k,
            "unknowns": int(fr.mesh.n_nodes),
            "panels": int(fr.mesh.n_panels),
            "unknowns_per_wavelength": float(fr.mesh.n_nodes * fr.wavelength_m / fr.mesh.lengths.sum()),
            "estimated_error": _finite(fr.estimated_error),
            "refinement_change": _finite(fr.refinement_change),
            "refinements": fr.refinements,
            "condition_estimate": _finite(fr.condition),
            "timings_s": fr.timings_s,
            "warnings": fr.warnings,
        }
        if fr.widths:
            entry["cross_sections"] = {
                "from_deg": [c["from_deg"] for c in fr.columns if c["kind"] == "plane"],
                **{k: [float(v) for v in vals] for k, vals in fr.widths.items()},
            }
            entry["optical_theorem_residual_max"] = float(np.max(fr.widths["optical_residual"]))
        freqs.append(entry)
    return {
        "schema": SUMMARY_SCHEMA,
        "program": {"name": "sectionwave", "version": __version__, "python": platform.python_version()},
        "title": scene.title,
        "case": scene.source,
        "caution": CAUTION,
        "conventions": {
            "time_factor": "exp(+j w t)" if convention == "engineering" else "exp(-i w t) (exported as complex conjugates)",
            "green_function": "G = -(j/4) H0^(2)(k r)",
            "incident_plane_wave": "u_inc = exp(+j k (x cos phi_i + y sin phi_i)), arriving from phi_i",
            "far_field": "u_scat ~ F(phi) exp(-j k r) / sqrt(r)",
            "echo_width": "sigma_2D = 2 pi |F|^2",
            "angles": "degrees, counter-clockwise from +x",
            "normals": "out of the body",
        },
        "units": {
            "length": "m", "frequency": "Hz", "echo_width": "m, dB re 1 m, dB re 1 wavelength",
            "angles": "deg", "surface_current": "A/m per unit incident amplitude",
            "pressure": "Pa per Pa incident", "velocity": "m/s per Pa incident",
        },
        "inputs": {
            "field": scene.field,
            "frequencies_hz": list(scene.frequencies_hz),
            "wave_speed_m_s": scene.wave_speed_m_s,
            "bodies": [
                {
                    "name": b.name,
                    "boundary": b.boundary,
                    "impedance": None if b.impedance is None else [b.impedance.real, b.impedance.imag],
                    "source": b.source,
                    "area_m2": b.body.area(),
                    "perimeter_m": b.body.outer.perimeter(),
                    "holes_ignored": len(b.body.holes),
                }
                for b in scene.bodies
            ],
            "incidents": [
                {"name": i.name, "kind": i.kind, "from_deg": list(i.from_deg), "position_m": i.position_m}
                for i in scene.incidents
            ],
            "far_field_angles": int(np.size(scene.far_field_deg)),
            "solver": {
                "tolerance": scene.tolerance,
                "nodes_per_panel": scene.nodes_per_panel,
                "max_panel_wavelengths": panel_wavelengths(scene),
                "max_refinements": scene.max_refinements,
                "method": "Nystrom, kernel-split product integration on Gauss-Legendre panels; "
                "combined-field (Dirichlet) and Burton-Miller (Neumann, impedance) equations; dense LU",
            },
        },
        "drawing_audit": scene.drawing_audit,
        "notes": scene.notes,
        "frequencies": freqs,
        "estimated_error_max": _finite(max((fr.estimated_error for fr in result.frequencies), default=math.nan)),
        "elapsed_s": result.elapsed_s,
        "files": files,
    }


def _write_boundary_vtk(result: Any, out_dir: Path, conv: str) -> list[str]:
    from ..run import physical_surface_quantities
    from .vtk import write_boundary_vtu, write_sweep_pvd

    runs = []
    names = []
    for nf, fr in enumerate(result.frequencies):
        mesh = fr.mesh
        phys = physical_surface_quantities(result.scene, fr)
        for m, col in enumerate(fr.columns):
            name = f"boundary_f{nf:03d}_i{m:03d}.vtu"
            fields = {"u": fr.u[:, m], "dudn": fr.psi[:, m]}
            fields.update({k: v[:, m] for k, v in phys.items()})
            write_boundary_vtu(
                out_dir / name, mesh.nodes, mesh.normals, mesh.body_of_node, mesh.contour_of_node,
                fields, real_fields={"arc_weight_m": mesh.weights}, convention=conv,
                metadata={"frequency_hz": fr.frequency_hz, "incidence_deg": col["from_deg"]},
            )
            runs.append((fr.frequency_hz, col["from_deg"], name))
            names.append(name)
    write_sweep_pvd(out_dir / "boundary.pvd", runs)
    return names + ["boundary.pvd", "boundary_steps.csv"]


def _write_near_fields(result: Any, out_dir: Path, conv: str) -> list[str]:
    """nearfield.csv, probes.csv, one grid .vtu per (frequency, incident wave), nearfield.pvd, field maps."""
    from .plots import plot_field_map
    from .vtk import write_grid_vtu, write_sweep_pvd

    written: list[str] = []
    grid_rows: dict[str, list[Any]] = {}
    probe_rows: dict[str, list[Any]] = {}
    runs = []
    outlines = [b.body.outer.sample(64) for b in result.scene.bodies]
    for nf, fr in enumerate(result.frequencies):
        near = fr.near
        if near is None:
            continue
        for slot, m in enumerate(near["columns"]):
            col = fr.columns[m]
            for key, rows, pts in (("grid", grid_rows, None), ("probes", probe_rows, near.get("probe_points"))):
                if key not in near:
                    continue
                data = near[key]
                if key == "grid":
                    xx, yy = np.meshgrid(near["x"], near["y"])
                    pts = np.column_stack([xx.ravel(), yy.ravel()])
                    inside = data["inside"].ravel()
                    values = {n: data[n][..., slot].ravel() for n in ("total", "scattered", "incident")}
                else:
                    inside = data["inside"]
                    values = {n: data[n][:, slot] for n in ("total", "scattered", "incident")}
                assert pts is not None
                block: dict[str, Any] = {
                    "frequency_hz": np.full(len(pts), fr.frequency_hz),
                    "from_deg": np.full(len(pts), col["from_deg"]),
                    "incident": np.full(len(pts), col["incident"]),
                    "x_m": pts[:, 0],
                    "y_m": pts[:, 1],
                    "inside": inside.astype(bool),
                }
                for name, v in values.items():
                    c = _conv(v, conv)
                    block[f"{name}_re"] = c.real
                    block[f"{name}_im"] = c.imag
                for key2, val in block.items():
                    rows.setdefault(key2, []).append(val)
            if "grid" in near:
                data = near["grid"]
                name = f"nearfield_f{nf:03d}_i{m:03d}.vtu"
                write_grid_vtu(
                    out_dir / name, near["x"], near["y"],
                    {n: data[n][..., slot] for n in ("total", "scattered", "incident")},
                    inside_mask=data["inside"], convention=conv,
                    metadata={"frequency_hz": fr.frequency_hz, "incidence_deg": col["from_deg"]},
                )
                written.append(name)
                runs.append((fr.frequency_hz, col["from_deg"], name))
                if result.scene.plots and nf < 4 and slot < 3:
                    png = f"nearfield_f{nf:03d}_i{m:03d}.png"
                    what = f"from {col['from_deg']:g} deg" if col["kind"] == "plane" else col["incident"]
                    plot_field_map(
                        out_dir / png, near["x"], near["y"], data["total"][..., slot], outlines,
                        quantity="abs", title=f"|total field|, {fr.frequency_hz:.4g} Hz, {what}",
                    )
                    written.append(png)
    header = f"sectionwave near field; time convention {conv}; NaN where inside=1 (inside an impenetrable body)"
    if grid_rows:
        write_csv(out_dir / "nearfield.csv", {k: np.concatenate(v) for k, v in grid_rows.items()}, header_comment=header)
        write_sweep_pvd(out_dir / "nearfield.pvd", runs)
        written += ["nearfield.csv", "nearfield.pvd", "nearfield_steps.csv"]
    if probe_rows:
        write_csv(out_dir / "probes.csv", {k: np.concatenate(v) for k, v in probe_rows.items()}, header_comment=header)
        written.append("probes.csv")
    return written


def _db_floored(farfield: np.ndarray, wavelength_m: float) -> np.ndarray:
    """Echo width in dB re 1 m, with a zero field drawn at -3000 dB instead of -inf."""
    return np.maximum(echo_width(farfield, wavelength_m)["db_m"], -3000.0)


def _write_plots(result: Any, out_dir: Path) -> list[str]:
    from ..run import echo_width_table
    from .plots import (
        plot_echo_width_cartesian,
        plot_echo_width_polar,
        plot_echo_width_vs_frequency,
        plot_mesh_preview,
    )

    written = []
    frs = result.frequencies
    fr0 = frs[0]
    labels: dict[str, np.ndarray] = {}
    for fr in frs[:4]:
        ew = echo_width_table(fr)
        for m, col in enumerate(fr.columns[:3]):
            what = f"from {col['from_deg']:g} deg" if col["kind"] == "plane" else col["incident"]
            labels[f"{fr.frequency_hz:.4g} Hz, {what}"] = ew["db_m"][:, m]
    plot_echo_width_polar(out_dir / "echo_width_polar.png", fr0.angles_deg, labels, title="Bistatic echo width")
    plot_echo_width_cartesian(out_dir / "echo_width.png", fr0.angles_deg, labels, title="Bistatic echo width")
    written += ["echo_width_polar.png", "echo_width.png"]
    plane = [m for m, c in enumerate(fr0.columns) if c["kind"] == "plane"]
    if len(plane) > 1:
        mono: dict[str, np.ndarray] = {}
        for fr in frs[:4]:
            mono[f"{fr.frequency_hz:.4g} Hz"] = _db_floored(fr.monostatic[plane], fr.wavelength_m)
        angles = np.array([fr0.columns[m]["from_deg"] for m in plane])
        plot_echo_width_polar(out_dir / "monostatic_polar.png", angles, mono, title="Monostatic echo width")
        plot_echo_width_cartesian(out_dir / "monostatic.png", angles, mono, title="Monostatic echo width")
        written += ["monostatic_polar.png", "monostatic.png"]
    if len(frs) > 1 and plane:
        curves = {}
        for m in plane[:3]:
            curves[f"monostatic from {fr0.columns[m]['from_deg']:g} deg"] = np.array(
                [_db_floored(fr.monostatic[[m]], fr.wavelength_m)[0] for fr in frs]
            )
        plot_echo_width_vs_frequency(out_dir / "echo_width_vs_frequency.png", np.array([fr.frequency_hz for fr in frs]), curves)
        written.append("echo_width_vs_frequency.png")
    mesh = frs[-1].mesh
    outlines = [b.body.outer.sample(64) for b in result.scene.bodies]
    plot_mesh_preview(
        out_dir / "mesh.png", outlines, mesh.nodes, mesh.normals, list(mesh.ends),
        mesh.lengths / frs[-1].wavelength_m, title=f"Panels at {frs[-1].frequency_hz:.4g} Hz",
    )
    written.append("mesh.png")
    return written
