"""Write a solved run: CSV tables, summary.json, VTK files and plots.

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

from ..conventions import CONVENTION_TEXT, DB_FLOOR, TimeConvention
from ..fields import echo_width, surface_quantities
from ..problem import Scatterer
from ..results import FrequencySolution, RunResult
from .atomic import atomic_write_text
from .options import OutputOptions
from .tables import conjugate_for_convention, write_csv

__all__ = ["CAUTION", "SUMMARY_SCHEMA", "summary_dict", "write_run"]

SUMMARY_SCHEMA = "sectionwave.summary/1"

CAUTION = (
    "2D results model an infinitely long, uniform cross-section; they are engineering "
    "estimates. Where they feed a safety decision (RF exposure, noise limits, structural "
    "or navigation use), local codes and licensed practice decide."
)


def _conv(values: Any, convention: TimeConvention) -> np.ndarray:
    return conjugate_for_convention(np.asarray(values, dtype=complex), convention)


def _surface(result: RunResult, fr: FrequencySolution) -> dict[str, np.ndarray]:
    problem = result.problem
    s = fr.surface()
    return surface_quantities(problem.field, fr.frequency_hz, s.u, s.dudn, problem.medium.density_kg_m3)


def write_run(
    result: RunResult,
    out_dir: Path,
    options: OutputOptions | None = None,
    *,
    convention: TimeConvention | None = None,
) -> list[str]:
    """Write every output of ``result`` into ``out_dir``.

    ``convention`` overrides ``options.time_convention``. Returns the names
    of the files written (relative to ``out_dir``).
    """
    options = options or OutputOptions()
    problem = result.problem
    names = [s.name for s in problem.scatterers]
    conv: TimeConvention = convention or options.time_convention
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
        ew = echo_width(fr.farfield, fr.wavelength_m)
        ff = _conv(fr.farfield, conv)
        na = fr.angles_deg.size
        for m, wave in enumerate(fr.incidents):
            ff_rows["frequency_hz"].append(np.full(na, fr.frequency_hz))
            ff_rows["incident"].append(np.full(na, wave.name))
            ff_rows["from_deg"].append(np.full(na, wave.from_deg))
            ff_rows["angle_deg"].append(fr.angles_deg)
            ff_rows["farfield_re"].append(ff[:, m].real)
            ff_rows["farfield_im"].append(ff[:, m].imag)
            ff_rows["echo_width_m"].append(ew["m"][:, m])
            ff_rows["echo_width_db_m"].append(ew["db_m"][:, m])
            ff_rows["echo_width_db_lambda"].append(ew["db_lambda"][:, m])
        plane = [m for m, w in enumerate(fr.incidents) if w.is_plane]
        if plane:
            mono = _conv(fr.monostatic[plane], conv)
            mono_ew = echo_width(mono, fr.wavelength_m)
            mono_rows["frequency_hz"].append(np.full(len(plane), fr.frequency_hz))
            mono_rows["from_deg"].append(np.array([fr.incidents[m].from_deg for m in plane]))
            mono_rows["farfield_re"].append(mono.real)
            mono_rows["farfield_im"].append(mono.imag)
            mono_rows["echo_width_m"].append(mono_ew["m"])
            mono_rows["echo_width_db_m"].append(mono_ew["db_m"])
            mono_rows["echo_width_db_lambda"].append(mono_ew["db_lambda"])
        surf = fr.surface()
        mesh = surf.mesh
        phys = _surface(result, fr)
        n = mesh.n_nodes
        for m, wave in enumerate(fr.incidents):
            block: dict[str, Any] = {
                "frequency_hz": np.full(n, fr.frequency_hz),
                "incident": np.full(n, wave.name),
                "from_deg": np.full(n, wave.from_deg),
                "body": np.array([names[b] for b in mesh.body_of_node]),
                "contour": mesh.contour_of_node,
                "x_m": mesh.nodes[:, 0],
                "y_m": mesh.nodes[:, 1],
                "normal_x": mesh.normals[:, 0],
                "normal_y": mesh.normals[:, 1],
                "arc_weight_m": mesh.weights,
            }
            u = _conv(surf.u[:, m], conv)
            dudn = _conv(surf.dudn[:, m], conv)
            block.update({"u_re": u.real, "u_im": u.imag, "dudn_re": dudn.real, "dudn_im": dudn.imag})
            if surf.dudn_inside is not None:
                inner = _conv(surf.dudn_inside[:, m], conv)
                block.update({"dudn_inside_re": inner.real, "dudn_inside_im": inner.imag})
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
    if options.vtk:
        written += _write_boundary_vtk(result, out_dir, conv)
    if any(fr.near_field is not None for fr in result.frequencies):
        written += _write_near_fields(result, out_dir, conv, plots=options.plots)
    if options.plots:
        written += _write_plots(result, out_dir)
    summary = summary_dict(result, options, conv, written + ["summary.json"])
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


def summary_dict(
    result: RunResult, options: OutputOptions, convention: TimeConvention, files: list[str]
) -> dict[str, Any]:
    """The content of summary.json (schema ``SUMMARY_SCHEMA``)."""
    from .. import __version__

    problem = result.problem
    freqs = []
    for fr in result.frequencies:
        entry: dict[str, Any] = {
            "frequency_hz": fr.frequency_hz,
            "wavelength_m": fr.wavelength_m,
            "wavenumber_rad_per_m": fr.wavenumber_rad_per_m,
            "unknowns": int(fr.unknowns),
            "panels": int(fr.mesh.n_panels),
            "unknowns_per_wavelength": float(fr.unknowns * fr.wavelength_m / fr.mesh.lengths.sum()),
            "estimated_error": _finite(fr.estimated_error),
            "refinement_change": _finite(fr.refinement_change),
            "refinements": fr.refinements,
            "condition_estimate": _finite(fr.condition_estimate),
            "timings_s": fr.timings_s,
            "warnings": fr.warnings,
        }
        if fr.cross_sections is not None:
            widths = fr.cross_sections.widths()
            entry["cross_sections"] = {
                "from_deg": [w.from_deg for w in fr.incidents if w.is_plane],
                **{k: [float(v) for v in vals] for k, vals in widths.items()},
            }
            entry["optical_theorem_residual_max"] = float(np.max(widths["optical_residual"]))
        freqs.append(entry)
    groups: dict[str, dict[str, Any]] = {}
    for w in problem.incidents:
        g = groups.setdefault(w.name, {"name": w.name, "kind": w.kind, "from_deg": [], "position_m": w.position_m})
        if w.is_plane:
            g["from_deg"].append(w.from_deg)
    settings = result.settings
    return {
        "schema": SUMMARY_SCHEMA,
        "program": {"name": "sectionwave", "version": __version__, "python": platform.python_version()},
        "title": options.title,
        "case": options.case,
        "caution": CAUTION,
        "conventions": {
            "time_factor": "exp(+j w t)" if convention == "engineering" else "exp(-i w t) (exported as complex conjugates)",
            **CONVENTION_TEXT,
        },
        "units": {
            "length": "m", "frequency": "Hz", "echo_width": "m, dB re 1 m, dB re 1 wavelength",
            "angles": "deg", "surface_current": "A/m per unit incident amplitude",
            "pressure": "Pa per Pa incident", "velocity": "m/s per Pa incident",
        },
        "inputs": {
            "field": problem.field,
            "frequencies_hz": list(problem.frequencies_hz),
            "wave_speed_m_s": problem.medium.wave_speed_m_s,
            "bodies": [_body_summary(b) for b in problem.scatterers],
            "incidents": list(groups.values()),
            "far_field_angles": int(np.size(problem.far_field_deg)),
            "solver": {
                "tolerance": settings.tolerance,
                "nodes_per_panel": settings.nodes_per_panel,
                "max_panel_wavelengths": settings.max_panel_wavelengths,
                "max_refinements": settings.max_refinements,
                "method": settings.method,
            },
        },
        "drawing_audit": options.drawing_audit,
        "notes": list(options.notes),
        "warnings": list(options.warnings),
        "frequencies": freqs,
        "estimated_error_max": _finite(max((fr.estimated_error for fr in result.frequencies), default=math.nan)),
        "elapsed_s": result.elapsed_s,
        "files": files,
    }


def _body_summary(b: Scatterer) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "name": b.name,
        "boundary": b.boundary,
        "impedance": None if b.impedance is None else [b.impedance.real, b.impedance.imag],
        "source": b.source,
        "area_m2": b.body.area(),
        "perimeter_m": b.body.outer.perimeter(),
        "holes_ignored": 0 if b.is_penetrable else len(b.body.holes),
    }
    if b.material is not None:
        m = b.material
        pair = lambda z: None if z is None else [complex(z).real, complex(z).imag]  # noqa: E731
        entry["material"] = {
            "name": m.name,
            "eps_r": pair(m.eps_r),
            "mu_r": pair(m.mu_r),
            "loss_tangent": m.loss_tangent,
            "conductivity_s_m": m.conductivity_s_m,
            "sound_speed_m_s": pair(m.sound_speed_m_s),
            "density_kg_m3": m.density_kg_m3,
            "attenuation_db_per_wavelength": m.attenuation_db_per_wavelength,
        }
        entry["holes"] = len(b.body.holes)
    return entry


def _write_boundary_vtk(result: RunResult, out_dir: Path, conv: TimeConvention) -> list[str]:
    from .vtk import write_boundary_vtu, write_sweep_pvd

    runs = []
    names = []
    for nf, fr in enumerate(result.frequencies):
        surf = fr.surface()
        mesh = surf.mesh
        phys = _surface(result, fr)
        for m, wave in enumerate(fr.incidents):
            name = f"boundary_f{nf:03d}_i{m:03d}.vtu"
            fields = {"u": surf.u[:, m], "dudn": surf.dudn[:, m]}
            if surf.dudn_inside is not None:
                fields["dudn_inside"] = surf.dudn_inside[:, m]
            fields.update({k: v[:, m] for k, v in phys.items()})
            write_boundary_vtu(
                out_dir / name, mesh.nodes, mesh.normals, mesh.body_of_node, mesh.contour_of_node,
                fields, real_fields={"arc_weight_m": mesh.weights}, convention=conv,
                metadata={"frequency_hz": fr.frequency_hz, "incidence_deg": wave.from_deg},
            )
            runs.append((fr.frequency_hz, wave.from_deg, name))
            names.append(name)
    write_sweep_pvd(out_dir / "boundary.pvd", runs)
    return names + ["boundary.pvd", "boundary_steps.csv"]


def _write_near_fields(result: RunResult, out_dir: Path, conv: TimeConvention, *, plots: bool) -> list[str]:
    """nearfield.csv, probes.csv, one grid .vtu per (frequency, incident wave), nearfield.pvd, field maps."""
    from .plots import plot_field_map
    from .vtk import write_grid_vtu, write_sweep_pvd

    written: list[str] = []
    grid_rows: dict[str, list[Any]] = {}
    probe_rows: dict[str, list[Any]] = {}
    runs = []
    outlines = [s.body.outer.sample(64) for s in result.problem.scatterers]
    for nf, fr in enumerate(result.frequencies):
        near = fr.near_field
        if near is None:
            continue
        grid_points = None
        if near.grid is not None:
            assert near.x_m is not None and near.y_m is not None
            xx, yy = np.meshgrid(near.x_m, near.y_m)
            grid_points = np.column_stack([xx.ravel(), yy.ravel()])
        for slot, m in enumerate(near.incidents):
            wave = fr.incidents[m]
            for samples, rows, pts in ((near.grid, grid_rows, grid_points), (near.probes, probe_rows, near.probes_m)):
                if samples is None:
                    continue
                assert pts is not None
                inside = samples.inside.ravel()
                values = {n: getattr(samples, n)[..., slot].ravel() for n in ("total", "scattered", "incident")}
                block: dict[str, Any] = {
                    "frequency_hz": np.full(len(pts), fr.frequency_hz),
                    "from_deg": np.full(len(pts), wave.from_deg),
                    "incident": np.full(len(pts), wave.name),
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
            if near.grid is not None:
                data = near.grid
                assert near.x_m is not None and near.y_m is not None
                name = f"nearfield_f{nf:03d}_i{m:03d}.vtu"
                write_grid_vtu(
                    out_dir / name, near.x_m, near.y_m,
                    {n: getattr(data, n)[..., slot] for n in ("total", "scattered", "incident")},
                    inside_mask=data.inside, convention=conv,
                    metadata={"frequency_hz": fr.frequency_hz, "incidence_deg": wave.from_deg},
                )
                written.append(name)
                runs.append((fr.frequency_hz, wave.from_deg, name))
                if plots and nf < 4 and slot < 3:
                    png = f"nearfield_f{nf:03d}_i{m:03d}.png"
                    plot_field_map(
                        out_dir / png, near.x_m, near.y_m, data.total[..., slot], outlines,
                        quantity="abs", title=f"|total field|, {fr.frequency_hz:.4g} Hz, {wave.label()}",
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
    """Echo width in dB re 1 m, with a zero field drawn at ``DB_FLOOR`` instead of -inf."""
    return np.maximum(echo_width(farfield, wavelength_m)["db_m"], DB_FLOOR)


def _write_plots(result: RunResult, out_dir: Path) -> list[str]:
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
        ew = echo_width(fr.farfield, fr.wavelength_m)
        for m, wave in enumerate(fr.incidents[:3]):
            labels[f"{fr.frequency_hz:.4g} Hz, {wave.label()}"] = ew["db_m"][:, m]
    plot_echo_width_polar(out_dir / "echo_width_polar.png", fr0.angles_deg, labels, title="Bistatic echo width")
    plot_echo_width_cartesian(out_dir / "echo_width.png", fr0.angles_deg, labels, title="Bistatic echo width")
    written += ["echo_width_polar.png", "echo_width.png"]
    plane = [m for m, w in enumerate(fr0.incidents) if w.is_plane]
    if len(plane) > 1:
        mono: dict[str, np.ndarray] = {}
        for fr in frs[:4]:
            mono[f"{fr.frequency_hz:.4g} Hz"] = _db_floored(fr.monostatic[plane], fr.wavelength_m)
        angles = np.array([fr0.incidents[m].from_deg for m in plane])
        plot_echo_width_polar(out_dir / "monostatic_polar.png", angles, mono, title="Monostatic echo width")
        plot_echo_width_cartesian(out_dir / "monostatic.png", angles, mono, title="Monostatic echo width")
        written += ["monostatic_polar.png", "monostatic.png"]
    if len(frs) > 1 and plane:
        curves = {}
        for m in plane[:3]:
            curves[f"monostatic from {fr0.incidents[m].from_deg:g} deg"] = np.array(
                [_db_floored(fr.monostatic[[m]], fr.wavelength_m)[0] for fr in frs]
            )
        plot_echo_width_vs_frequency(out_dir / "echo_width_vs_frequency.png", np.array([fr.frequency_hz for fr in frs]), curves)
        written.append("echo_width_vs_frequency.png")
    mesh = frs[-1].mesh
    outlines = [s.body.outer.sample(64) for s in result.problem.scatterers]
    plot_mesh_preview(
        out_dir / "mesh.png", outlines, mesh.nodes, mesh.normals, list(mesh.ends),
        mesh.lengths / frs[-1].wavelength_m, title=f"Panels at {frs[-1].frequency_hz:.4g} Hz",
    )
    written.append("mesh.png")
    return written
