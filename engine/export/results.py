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
from dataclasses import replace
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from ..conventions import CONVENTION_TEXT, DB_FLOOR, FIELD_DESCRIPTION, FIELD_WORDS, TimeConvention
from ..fields import (
    FINITE_LENGTH_VALIDITY,
    backscatter_density,
    echo_width,
    finite_length,
    surface_quantities,
)
from ..problem import Scatterer
from ..products import RadarImage, RangeProfile, back_projection, range_profile
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


class _Derived:
    """What a write derives from a run once and several outputs share.

    The range profiles and the image feed their files and summary.json; the
    backscatter densities feed surface.csv, the boundary VTU, a plot and the
    body shares in summary.json.
    """

    def __init__(self, result: RunResult, options: OutputOptions) -> None:
        self.result = result
        self.options = options
        self._hot: dict[int, np.ndarray | None] = {}

    @cached_property
    def profile(self) -> tuple[RangeProfile, list[int]] | None:
        return _profile(self.result, self.options)

    @cached_property
    def image(self) -> RadarImage | None:
        return _radar_image(self.result, self.options)

    def backscatter(self, fr: FrequencySolution) -> np.ndarray | None:
        key = id(fr)
        if key not in self._hot:
            self._hot[key] = _backscatter(self.result, fr)
        return self._hot[key]


def _profile(result: RunResult, options: OutputOptions) -> tuple[RangeProfile, list[int]] | None:
    """The down-range profiles of every plane wave over the run's frequencies (None: not asked for)."""
    request = options.range_profile
    frs = sorted(result.frequencies, key=lambda fr: fr.frequency_hz)
    plane = [m for m, w in enumerate(result.problem.incidents) if w.is_plane]
    if request is None or not plane or len(frs) < 4:
        return None
    mono = np.array([fr.monostatic[plane] for fr in frs])
    freqs = np.array([fr.frequency_hz for fr in frs])
    return range_profile(freqs, mono, result.problem.medium.wave_speed_m_s, request), plane


def _write_range_profile(derived: _Derived, out_dir: Path) -> list[str]:
    """range_profile.csv (from_deg, range_m, magnitude, magnitude_db) and its plot."""
    result, options = derived.result, derived.options
    found = derived.profile
    if found is None:
        return []
    prof, plane = found
    waves = result.problem.incidents
    rows: dict[str, list[Any]] = {"from_deg": [], "range_m": [], "magnitude": [], "magnitude_db": []}
    curves = {}
    for j, m in enumerate(plane):
        with np.errstate(divide="ignore"):
            db = np.maximum(20 * np.log10(prof.magnitude[:, j]), DB_FLOOR)
        rows["from_deg"].append(np.full(prof.range_m.size, waves[m].from_deg))
        rows["range_m"].append(prof.range_m)
        rows["magnitude"].append(prof.magnitude[:, j])
        rows["magnitude_db"].append(db)
        curves[f"from_deg={waves[m].from_deg:g}"] = db
    write_csv(out_dir / "range_profile.csv", {k: np.concatenate(v) for k, v in rows.items()})
    written = ["range_profile.csv"]
    if options.plots:
        from .plots import plot_range_profile

        shown = dict(list(curves.items())[:MAX_PROFILE_CURVES])
        plot_range_profile(out_dir / "range_profile.png", prof.range_m, shown,
                           title=f"{options.title}: down-range profile, resolution {prof.resolution_m:.3g} m")
        written.append("range_profile.png")
    return written


def _range_summary(derived: _Derived) -> dict[str, Any] | None:
    result, options = derived.result, derived.options
    found = derived.profile
    if found is None or options.range_profile is None:
        return None
    prof = found[0]
    req = options.range_profile
    return {"window": req.window, "sidelobe_db": req.sidelobe_db if req.window == "taylor" else None,
            "padding": req.padding, "bandwidth_hz": prof.bandwidth_hz, "resolution_m": prof.resolution_m,
            "unambiguous_m": prof.unambiguous_m, "wave_speed_m_s": result.problem.medium.wave_speed_m_s,
            "range": "along the look direction from the drawing origin, positive away from the radar",
            "curves_plotted": min(MAX_PROFILE_CURVES, len(found[1]))}


def _radar_image(result: RunResult, options: OutputOptions) -> RadarImage | None:
    request = options.image
    plane = [m for m, w in enumerate(result.problem.incidents) if w.is_plane]
    if request is None or len(plane) < 2 or len(result.frequencies) < 2:
        return None
    freqs = np.array([fr.frequency_hz for fr in result.frequencies])
    mono = np.array([fr.monostatic[plane] for fr in result.frequencies])
    from_deg = np.array([result.problem.incidents[m].from_deg for m in plane])
    return back_projection(freqs, from_deg, mono, result.problem.medium.wave_speed_m_s, request)


def _write_image(derived: _Derived, out_dir: Path, conv: TimeConvention) -> list[str]:
    """image.csv (x_m, y_m, magnitude, magnitude_db), image.vtu and image.png with the outlines."""
    result, options = derived.result, derived.options
    img = derived.image
    if img is None or options.image is None:
        return []
    req = options.image
    xx, yy = np.meshgrid(req.x_m, req.y_m)
    mag = np.abs(img.values)
    with np.errstate(divide="ignore"):
        db = np.maximum(20 * np.log10(mag), DB_FLOOR)
    write_csv(out_dir / "image.csv", {"x_m": xx.ravel(), "y_m": yy.ravel(), "magnitude": mag.ravel(),
                                      "magnitude_db": db.ravel()})
    written = ["image.csv"]
    if options.vtk:
        from .vtk import write_grid_vtu

        write_grid_vtu(out_dir / "image.vtu", req.x_m, req.y_m, {"image": img.values},
                       metadata={"down_range_resolution_m": img.down_range_m,
                                 "cross_range_resolution_m": img.cross_range_m}, convention=conv)
        written.append("image.vtu")
    if options.plots:
        from .plots import plot_field_map

        outlines = [s.body.outer.sample(256) for s in result.problem.scatterers]
        plot_field_map(out_dir / "image.png", req.x_m, req.y_m, img.values, outlines, quantity="db",
                       db_range=req.dynamic_range_db, colorbar_label="image magnitude (dB re its unit)",
                       title=f"{options.title}: back-projected image, resolution {img.down_range_m:.3g} m x "
                             f"{img.cross_range_m:.3g} m")
        written.append("image.png")
    return written


def _image_summary(derived: _Derived) -> dict[str, Any] | None:
    options = derived.options
    img = derived.image
    if img is None or options.image is None:
        return None
    return {"window": options.image.window, "down_range_resolution_m": img.down_range_m,
            "cross_range_resolution_m": img.cross_range_m, "dynamic_range_db": options.image.dynamic_range_db,
            "method": "back-projection of the monostatic far field over the case's frequencies and incidences",
            "peak": float(np.max(np.abs(img.values)))}


#: Curves drawn in range_profile.png (the CSV holds every incidence).
MAX_PROFILE_CURVES = 12


def _finite_length_plot(
    result: RunResult, out_dir: Path, options: OutputOptions, plane: list[int], head: str
) -> list[str]:
    """rcs.png (dBsm) or target_strength.png (dB re 1 m) against from_deg, with ``[far_field] length_m``."""
    from .plots import plot_echo_width_cartesian

    if options.length_m is None:
        return []
    sound = result.problem.field == "acoustic"
    curves = {}
    for fr in _spread(list(result.frequencies), MAX_CURVES):
        three_d = finite_length(echo_width(fr.monostatic[plane], fr.wavelength_m)["m"], fr.wavelength_m,
                                options.length_m)
        curves[frequency_text(fr.frequency_hz)] = np.maximum(three_d["ts_db" if sound else "dbsm"], DB_FLOOR)
    angles = np.array([result.problem.incidents[m].from_deg for m in plane])
    name = "target_strength.png" if sound else "rcs.png"
    what = "target strength (dB re 1 m)" if sound else "radar cross-section (dBsm)"
    plot_echo_width_cartesian(out_dir / name, angles, curves, ylabel=what,
                              title=f"{head}{'TS' if sound else 'RCS'}, {options.length_m:g} m long, broadside, "
                                    f"{FIELD_WORDS[result.problem.field][0]}")
    return [name]


def _backscatter_plot(derived: _Derived, out_dir: Path, wsel: list[int], head: str) -> list[str]:
    """backscatter_map.png: where the echo of one plane wave comes from, along the outline (last frequency)."""
    from .plots import plot_boundary_values

    result = derived.result
    fr = result.frequencies[-1]
    dens = derived.backscatter(fr)
    plane = [m for m in wsel if fr.incidents[m].is_plane]
    if dens is None or not plane:
        return []
    m = plane[0]
    with np.errstate(divide="ignore"):
        db = 20 * np.log10(np.abs(dens[:, m]))
    outlines = [s.body.outer.sample(256) for s in result.problem.scatterers]
    plot_boundary_values(out_dir / "backscatter_map.png", fr.surface().mesh.nodes, db, outlines,
                         colorbar_label="|backscatter integrand| (dB re 1 sqrt(m)/m)",
                         title=f"{head}where the echo comes from, {frequency_text(fr.frequency_hz)}, "
                               f"{_wave_text(fr.incidents[m])}")
    return ["backscatter_map.png"]


def _hot_spots_apply(result: RunResult) -> bool:
    """Backscatter densities are written for impenetrable bodies without holes (every contour outside)."""
    return all(s.boundary != "penetrable" and not s.body.holes for s in result.problem.scatterers)


def _backscatter(result: RunResult, fr: FrequencySolution) -> np.ndarray | None:
    """Per node and incident wave, the backscatter density (NaN for line sources); None where not written."""
    if not _hot_spots_apply(result):
        return None
    s = fr.surface()
    from_deg = np.array([w.from_deg if w.is_plane else 0.0 for w in fr.incidents])
    dens = backscatter_density(s.mesh, fr.wavenumber_rad_per_m, s.u, s.dudn, from_deg)
    dens[:, [not w.is_plane for w in fr.incidents]] = np.nan
    return dens


def _backscatter_shares(derived: _Derived, fr: FrequencySolution) -> list[dict[str, Any]] | None:
    """Per plane wave: each body's share of the backscattered far field (Re(F_b conj F) / |F|^2, summing to 1)."""
    dens = derived.backscatter(fr)
    if dens is None:
        return None
    mesh = fr.surface().mesh
    names = [s.name for s in derived.result.problem.scatterers]
    out = []
    for m, wave in enumerate(fr.incidents):
        if not wave.is_plane:
            continue
        parts = {names[b]: complex(np.sum((dens[:, m] * mesh.weights)[mesh.body_of_node == b]))
                 for b in range(len(names))}
        total = sum(parts.values())
        norm = abs(total) ** 2
        out.append({"incident": wave.name, "from_deg": wave.from_deg,
                    "shares": {n: (float((c * np.conj(total)).real / norm) if norm > 0 else None)
                               for n, c in parts.items()}})
    return out


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
    derived = _Derived(result, options)
    problem = result.problem
    names = [s.name for s in problem.scatterers]
    conv: TimeConvention = convention or options.time_convention
    out_dir = Path(out_dir)
    written: list[str] = []

    ff_rows: dict[str, list[Any]] = {k: [] for k in (
        "frequency_hz", "incident", "from_deg", "angle_deg", "farfield_re_sqrt_m", "farfield_im_sqrt_m",
        "echo_width_m", "echo_width_db_m", "echo_width_db_lambda")}
    mono_rows: dict[str, list[Any]] = {k: [] for k in (
        "frequency_hz", "incident", "from_deg", "farfield_re_sqrt_m", "farfield_im_sqrt_m",
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
            ff_rows["farfield_re_sqrt_m"].append(ff[:, m].real)
            ff_rows["farfield_im_sqrt_m"].append(ff[:, m].imag)
            ff_rows["echo_width_m"].append(ew["m"][:, m])
            ff_rows["echo_width_db_m"].append(ew["db_m"][:, m])
            ff_rows["echo_width_db_lambda"].append(ew["db_lambda"][:, m])
        _monostatic_rows(mono_rows, fr, conv, options, result.problem.field)
        if not options.surface_csv:
            continue
        surf = fr.surface()
        mesh = surf.mesh
        phys = _surface(result, fr)
        hot = derived.backscatter(fr)
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
            block.update({"u_re": u.real, "u_im": u.imag, "dudn_re_per_m": dudn.real, "dudn_im_per_m": dudn.imag})
            if surf.dudn_inside is not None:
                inner = _conv(surf.dudn_inside[:, m], conv)
                block.update({"dudn_inside_re_per_m": inner.real, "dudn_inside_im_per_m": inner.imag})
            if hot is not None:
                h = _conv(hot[:, m], conv)
                block.update({"backscatter_re_sqrt_m_per_m": h.real, "backscatter_im_sqrt_m_per_m": h.imag})
            for name, values in phys.items():
                v = _conv(values[:, m], conv)
                stem, unit = _split_unit(name)
                block[f"{stem}_re_{unit}"] = v.real
                block[f"{stem}_im_{unit}"] = v.imag
            for key, val in block.items():
                surf_rows.setdefault(key, []).append(val)

    # CSVs open with their header row; what a comment line would say is in README.txt
    write_csv(out_dir / "farfield.csv", {k: np.concatenate(v) for k, v in ff_rows.items()})
    written.append("farfield.csv")
    if mono_rows["frequency_hz"]:
        write_csv(out_dir / "monostatic.csv", {k: np.concatenate(v) for k, v in mono_rows.items()})
        written.append("monostatic.csv")
    if surf_rows:
        write_csv(out_dir / "surface.csv", {k: np.concatenate(v) for k, v in surf_rows.items()})
        written.append("surface.csv")
    written += _write_range_profile(derived, out_dir)  # nothing unless [range_profile] asks
    written += _write_image(derived, out_dir, conv)  # nothing unless [image] asks
    if options.vtk:
        written += _write_boundary_vtk(derived, out_dir, conv, per_incidence=options.vtk_per_incidence)
    if any(fr.near_field is not None for fr in result.frequencies):
        written += _write_near_fields(result, out_dir, conv, options)
    plot_notes: list[str] = []
    if options.plots:
        written += _write_plots(derived, out_dir, plot_notes)
    written.append("README.txt")
    atomic_write_text(out_dir / "README.txt", folder_readme(result, options, conv, written + ["summary.json"]))
    if plot_notes:
        options = replace(options, notes=(*options.notes, *plot_notes))
    summary = summary_dict(result, options, conv, written + ["summary.json"], derived=derived)
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
    result: RunResult, options: OutputOptions, convention: TimeConvention, files: list[str],
    *, derived: _Derived | None = None,
) -> dict[str, Any]:
    """The content of summary.json (schema ``SUMMARY_SCHEMA``); ``derived`` reuses a write's products."""
    from .. import __version__

    derived = derived or _Derived(result, options)
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
            "solver_method": fr.solver_method,
            "iterations": fr.iterations,
            "backscatter_shares": _backscatter_shares(derived, fr),
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
            "field_description": FIELD_DESCRIPTION[problem.field],
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
        "range_profile": _range_summary(derived),
        "image": _image_summary(derived),
        "finite_length": None if options.length_m is None else {
            "length_m": options.length_m,
            "columns": ["target_strength_db"] if problem.field == "acoustic" else ["rcs_m2", "rcs_dbsm"],
            "validity": FINITE_LENGTH_VALIDITY,
        },
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


def _write_boundary_vtk(derived: _Derived, out_dir: Path, conv: TimeConvention, *, per_incidence: bool = True) -> list[str]:
    """Boundary ``.vtu`` files: one per (frequency, incident wave), or one per frequency.

    With ``per_incidence=False`` each frequency's file holds every incident
    wave, its arrays suffixed ``_i000``, ``_i001``, ... in the order of
    ``farfield.csv``; the sweep table then has ``from_deg`` NaN (all waves).
    """
    from .vtk import write_boundary_vtu, write_sweep_pvd

    result = derived.result
    runs = []
    names = []
    for nf, fr in enumerate(result.frequencies):
        surf = fr.surface()
        mesh = surf.mesh
        phys = _surface(result, fr)
        hot = derived.backscatter(fr)
        groups = [[m] for m in range(len(fr.incidents))] if per_incidence else [list(range(len(fr.incidents)))]
        for group in groups:
            fields: dict[str, np.ndarray] = {}
            for m in group:
                tag = "" if per_incidence else f"_i{m:03d}"
                fields[f"u{tag}"] = surf.u[:, m]
                fields[f"dudn{tag}"] = surf.dudn[:, m]
                if surf.dudn_inside is not None:
                    fields[f"dudn_inside{tag}"] = surf.dudn_inside[:, m]
                fields.update({f"{k}{tag}": v[:, m] for k, v in phys.items()})
                if hot is not None and fr.incidents[m].is_plane:
                    fields[f"backscatter{tag}"] = hot[:, m]  # where the echo comes from
            if per_incidence:
                wave = fr.incidents[group[0]]
                name, from_deg = f"boundary_f{nf:03d}_i{group[0]:03d}.vtu", wave.from_deg
            else:
                name, from_deg = f"boundary_f{nf:03d}.vtu", math.nan
            write_boundary_vtu(
                out_dir / name, mesh.nodes, mesh.normals, mesh.body_of_node, mesh.contour_of_node,
                fields, real_fields={"arc_weight_m": mesh.weights}, convention=conv,
                metadata={"frequency_hz": fr.frequency_hz, "from_deg": from_deg},
            )
            runs.append((fr.frequency_hz, from_deg, name))
            names.append(name)
    write_sweep_pvd(out_dir / "boundary.pvd", runs)
    return names + ["boundary.pvd", "boundary_steps.csv"]


def _write_near_fields(result: RunResult, out_dir: Path, conv: TimeConvention, options: OutputOptions) -> list[str]:
    """nearfield.csv, probes.csv, one grid .vtu per (frequency, incident wave), nearfield.pvd, field maps."""
    from .plots import plot_field_map
    from .vtk import write_grid_vtu, write_sweep_pvd

    written: list[str] = []
    grid_rows: dict[str, list[Any]] = {}
    probe_rows: dict[str, list[Any]] = {}
    runs = []
    outlines = [s.body.outer.sample(64) for s in result.problem.scatterers]
    fsel, wsel = _pick_for_plots(result, options)
    field, symbol, _ = FIELD_WORDS[result.problem.field]
    head = f"{options.title}: " if options.title and options.title != "untitled" else ""
    quantity = options.field_map
    bar = {"abs": f"|total {symbol}| per unit incident amplitude",
           "db": f"total {symbol}: 20 log10 |u / u_inc amplitude| (dB)",
           "real": f"Re total {symbol} per unit incident amplitude (field at t = 0)"}[quantity]
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
                    "incident": np.full(len(pts), wave.name),
                    "from_deg": np.full(len(pts), wave.from_deg),
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
                    metadata={"frequency_hz": fr.frequency_hz, "from_deg": wave.from_deg},
                )
                written.append(name)
                runs.append((fr.frequency_hz, wave.from_deg, name))
                if options.plots and nf in fsel and m in wsel:
                    png = f"nearfield_f{nf:03d}_i{m:03d}.png"
                    plot_field_map(
                        out_dir / png, near.x_m, near.y_m, data.total[..., slot], outlines,
                        quantity=quantity, colorbar_label=bar,
                        title=f"{head}total field, {field}, {frequency_text(fr.frequency_hz)}, {_wave_text(wave)}",
                    )
                    written.append(png)
    if grid_rows:
        write_csv(out_dir / "nearfield.csv", {k: np.concatenate(v) for k, v in grid_rows.items()})
        write_sweep_pvd(out_dir / "nearfield.pvd", runs)
        written += ["nearfield.csv", "nearfield.pvd", "nearfield_steps.csv"]
    if probe_rows:
        write_csv(out_dir / "probes.csv", {k: np.concatenate(v) for k, v in probe_rows.items()})
        written.append("probes.csv")
    return written


def _db_floored(farfield: np.ndarray, wavelength_m: float) -> np.ndarray:
    """Echo width in dB re 1 m, with a zero field drawn at ``DB_FLOOR`` instead of -inf."""
    return np.maximum(echo_width(farfield, wavelength_m)["db_m"], DB_FLOOR)


#: Most curves one plot holds; beyond it an evenly spread selection is drawn and the rest named in a note.
MAX_CURVES = 12


def frequency_text(frequency_hz: float) -> str:
    """A frequency in the unit an engineer would say: ``"9.4 GHz"``, ``"250 kHz"``.

    Examples
    --------
    >>> frequency_text(9.4e9), frequency_text(2.5e5), frequency_text(50.0)
    ('9.4 GHz', '250 kHz', '50 Hz')
    """
    for factor, unit in ((1e12, "THz"), (1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if abs(frequency_hz) >= factor:
            return f"{frequency_hz / factor:.4g} {unit}"
    return f"{frequency_hz:.4g} Hz"


def _wave_text(wave: Any) -> str:
    return f"from_deg={wave.from_deg:g}" if wave.is_plane else f"{wave.name} (line source)"


def _spread(items: list[Any], count: int) -> list[Any]:
    """``count`` items spread evenly over ``items`` (first and last included)."""
    if len(items) <= count:
        return list(items)
    picks = np.unique(np.round(np.linspace(0, len(items) - 1, count)).astype(int))
    return [items[i] for i in picks]


def _pick_for_plots(result: RunResult, options: OutputOptions) -> tuple[list[int], list[int]]:
    """Frequencies and incident waves to draw: the case's selection, else an even spread within MAX_CURVES."""
    frs = result.frequencies
    waves = list(frs[0].incidents)
    fsel = list(range(len(frs)))
    wsel = list(range(len(waves)))
    if options.plot_frequencies_hz is not None:
        fsel = [i for i, fr in enumerate(frs)
                if any(abs(fr.frequency_hz - f) <= 1e-9 * abs(f) for f in options.plot_frequencies_hz)]
    if options.plot_from_deg is not None:
        wsel = [m for m, w in enumerate(waves)
                if w.is_plane and any(abs(w.from_deg - a) < 1e-9 for a in options.plot_from_deg)]
    n_f = min(len(fsel), max(1, MAX_CURVES // max(1, len(wsel))), MAX_CURVES) if len(wsel) > 1 else min(len(fsel), MAX_CURVES)
    fsel = _spread(fsel, max(1, n_f))
    wsel = _spread(wsel, max(1, MAX_CURVES // len(fsel)))
    return fsel, wsel


def _selection_note(result: RunResult, fsel: list[int], wsel: list[int]) -> str | None:
    frs = result.frequencies
    waves = frs[0].incidents
    total, shown = len(frs) * len(waves), len(fsel) * len(wsel)
    if shown == total:
        return None
    freqs = ", ".join(frequency_text(frs[i].frequency_hz) for i in fsel)
    which = ", ".join(_wave_text(waves[m]) for m in wsel)
    return (f"the bistatic plots show {shown} of {total} (frequency, incident wave) curves: {freqs}; {which}; "
            "every curve is in farfield.csv; choose others with [output] plot_frequencies_hz and plot_from_deg")


def _write_plots(derived: _Derived, out_dir: Path, notes: list[str]) -> list[str]:
    """Echo-width plots (bistatic, monostatic, against frequency) and the mesh preview."""
    result, options = derived.result, derived.options
    from .plots import (
        plot_echo_width_cartesian,
        plot_echo_width_polar,
        plot_echo_width_vs_frequency,
        plot_mesh_preview,
    )

    written = []
    frs = result.frequencies
    fr0 = frs[0]
    code, _, words = FIELD_WORDS[result.problem.field]
    field = f"{code}: {words}"
    head = f"{options.title}: " if options.title and options.title != "untitled" else ""
    fsel, wsel = _pick_for_plots(result, options)
    note = _selection_note(result, fsel, wsel)
    if note:
        notes.append(note)
    labels: dict[str, np.ndarray] = {}
    for i in fsel:
        fr = frs[i]
        ew = echo_width(fr.farfield, fr.wavelength_m)
        for m in wsel:
            labels[f"{frequency_text(fr.frequency_hz)}, {_wave_text(fr.incidents[m])}"] = ew["db_m"][:, m]
    title = f"{head}bistatic echo width, {field}"
    plot_echo_width_polar(out_dir / "echo_width_polar.png", fr0.angles_deg, labels, title=title)
    plot_echo_width_cartesian(out_dir / "echo_width.png", fr0.angles_deg, labels, title=title)
    written += ["echo_width_polar.png", "echo_width.png"]
    plane = [m for m, w in enumerate(fr0.incidents) if w.is_plane]
    if len(plane) > 1:
        mono: dict[str, np.ndarray] = {}
        for i in _spread(list(range(len(frs))), MAX_CURVES) if options.plot_frequencies_hz is None else fsel:
            fr = frs[i]
            mono[frequency_text(fr.frequency_hz)] = _db_floored(fr.monostatic[plane], fr.wavelength_m)
        angles = np.array([fr0.incidents[m].from_deg for m in plane])
        title = f"{head}monostatic echo width, {field}"
        plot_echo_width_polar(out_dir / "monostatic_polar.png", angles, mono, title=title)
        plot_echo_width_cartesian(out_dir / "monostatic.png", angles, mono, title=title)
        written += ["monostatic_polar.png", "monostatic.png"]
        written += _finite_length_plot(result, out_dir, options, plane, head)
    written += _backscatter_plot(derived, out_dir, wsel, head)
    if len(frs) > 1 and plane:
        curves = {}
        for m in [m for m in wsel if m in plane] or plane[:1]:
            curves[f"monostatic, from_deg={fr0.incidents[m].from_deg:g}"] = np.array(
                [_db_floored(fr.monostatic[[m]], fr.wavelength_m)[0] for fr in frs]
            )
        plot_echo_width_vs_frequency(out_dir / "echo_width_vs_frequency.png", np.array([fr.frequency_hz for fr in frs]),
                                     curves, title=f"{head}monostatic echo width against frequency, {field}")
        written.append("echo_width_vs_frequency.png")
    mesh = frs[-1].mesh
    outlines = [s.body.outer.sample(64) for s in result.problem.scatterers]
    plot_mesh_preview(
        out_dir / "mesh.png", outlines, mesh.nodes, mesh.normals, list(mesh.ends),
        mesh.lengths / frs[-1].wavelength_m, title=f"{head}panels at {frequency_text(frs[-1].frequency_hz)}",
    )
    written.append("mesh.png")
    return written


def _monostatic_rows(
    mono_rows: dict[str, list[Any]], fr: FrequencySolution, conv: TimeConvention, options: OutputOptions,
    field: str,
) -> None:
    """Append one frequency's backscatter rows (plane waves only), with the finite-length columns if asked."""
    plane = [m for m, w in enumerate(fr.incidents) if w.is_plane]
    if not plane:
        return
    mono = _conv(fr.monostatic[plane], conv)
    mono_ew = echo_width(mono, fr.wavelength_m)
    mono_rows["frequency_hz"].append(np.full(len(plane), fr.frequency_hz))
    mono_rows["incident"].append(np.array([fr.incidents[m].name for m in plane]))
    mono_rows["from_deg"].append(np.array([fr.incidents[m].from_deg for m in plane]))
    mono_rows["farfield_re_sqrt_m"].append(mono.real)
    mono_rows["farfield_im_sqrt_m"].append(mono.imag)
    mono_rows["echo_width_m"].append(mono_ew["m"])
    mono_rows["echo_width_db_m"].append(mono_ew["db_m"])
    mono_rows["echo_width_db_lambda"].append(mono_ew["db_lambda"])
    if options.length_m is not None:
        three_d = finite_length(mono_ew["m"], fr.wavelength_m, options.length_m)
        if field == "acoustic":
            mono_rows.setdefault("target_strength_db", []).append(three_d["ts_db"])
        else:
            mono_rows.setdefault("rcs_m2", []).append(three_d["m2"])
            mono_rows.setdefault("rcs_dbsm", []).append(three_d["dbsm"])


def folder_readme(result: RunResult, options: OutputOptions, convention: TimeConvention, files: list[str]) -> str:
    """README.txt of a results folder: what every file and column holds, with units."""
    field, symbol, _ = FIELD_WORDS[result.problem.field]
    amp = {"tm": "per unit incident E_z (V/m per V/m)", "te": "per unit incident H_z (A/m per A/m)",
           "acoustic": "per unit incident pressure (Pa per Pa)"}[result.problem.field]
    time_factor = "exp(+j w t)" if convention == "engineering" else "exp(-i w t) (complex conjugates of the engine's values)"
    lines = [
        f"sectionwave results: {options.title}",
        f"case: {options.case}",
        f"field: {FIELD_DESCRIPTION[result.problem.field]}; time factor {time_factor}",
        "",
        CAUTION,
        "",
        "Every CSV file starts with its header row; every column name ends in its unit",
        "(_hz, _deg, _m, _sqrt_m, _per_m, _db_m = dB re 1 m, _db_lambda = dB re 1 wavelength,",
        "_a_per_m, _pa, _m_per_s); columns without a unit are names, indices, flags (0/1) or",
        f"dimensionless field values. Complex fields are {amp}: the incident wave has amplitude 1.",
        "A plane wave 'from_deg' arrives from that direction (counter-clockwise from +x);",
        "line sources have from_deg = nan and a unit source strength.",
        "",
        "farfield.csv     frequency_hz, incident, from_deg, angle_deg, farfield_re_sqrt_m, farfield_im_sqrt_m,",
        "                 echo_width_m, echo_width_db_m, echo_width_db_lambda. The far field F is defined by",
        "                 u_scat ~ F exp(-j k r) / sqrt(r), so it is in sqrt(m) per unit incident amplitude;",
        "                 echo width = 2 pi |F|^2 (m).",
        "monostatic.csv   frequency_hz, incident, from_deg, then the same far-field and echo-width columns at",
        "                 the backscatter direction (plane waves only)"
        + (f"; with [far_field] length_m = {options.length_m:g}: "
           + ("target_strength_db (dB re 1 m)" if result.problem.field == "acoustic" else "rcs_m2, rcs_dbsm (dB re 1 m^2)")
           + f", the broadside estimate for that length ({FINITE_LENGTH_VALIDITY})" if options.length_m else "")
        + ".",
        "surface.csv      frequency_hz, incident, from_deg, body, contour, x_m, y_m, normal_x, normal_y (unit",
        "                 outward normal), arc_weight_m (quadrature weight), u_re, u_im (total field on the",
        "                 boundary), dudn_re_per_m, dudn_im_per_m (its outward normal derivative) and the",
        "                 physical surface quantity with its unit; for impenetrable bodies without holes,",
        "                 backscatter_re/_im_sqrt_m_per_m: where the echo comes from, the far-field integrand",
        "                 at the wave's backscatter direction (its sum times arc_weight_m is the monostatic",
        "                 far field; summary.json gives each body's share).",
        "nearfield.csv    frequency_hz, incident, from_deg, x_m, y_m, inside (1: inside an impenetrable body,",
        "probes.csv       fields NaN), total_re/_im, scattered_re/_im, incident_re/_im (dimensionless).",
        "summary.json     inputs, settings, errors, cross sections, numerical warnings (key 'warnings').",
        "*.vtu, *.pvd     the same surface and near fields for ParaView (*_steps.csv maps steps to",
        "                 frequency_hz and from_deg).",
        "",
        "Files: " + ", ".join(sorted(files)),
    ]
    return "\n".join(lines) + "\n"
