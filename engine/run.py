"""Solve a scene: mesh, assemble, factorise once per frequency, refine until accurate.

Glossary
--------
estimated error
    The a-posteriori estimate: on each panel, the size of the last two
    Legendre coefficients of the boundary unknown, times the panel length,
    relative to the unknown's integral over the whole boundary, summed; once
    a refinement has happened, the smaller of that and the far-field change
    under the last refinement; never less than the optical-theorem residual.
    The fewest panels carrying MARK_FRACTION of the estimate are halved and the system solved
    again, at most ``max_refinements`` times.
"""

from __future__ import annotations

import logging
import math
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveWarning

from .case import MU0_H_M, CaseError, Scene
from .fields import cross_sections, echo_width, far_field, far_field_each, line_source_wave, plane_wave
from .formulations import (
    DIRICHLET,
    NEUMANN,
    ROBIN,
    SurfaceConditions,
    needed_operators,
    right_hand_sides,
    surface_traces,
    system_matrix,
)
from .mesh import BoundaryContour, PanelMesh, build_panels, regrade
from .operators import assemble_operators
from .solve import ProblemTooLargeError, check_memory, factorise

__all__ = [
    "AccuracyWarning",
    "FrequencyResult",
    "IllConditionedWarning",
    "RunResult",
    "echo_width_table",
    "incident_values",
    "panel_wavelengths",
    "physical_surface_quantities",
    "solve_scene",
]

log = logging.getLogger(__name__)
ComplexArray = NDArray[np.complex128]

#: Condition numbers above this are flagged (digits lost ~ log10(cond)).
CONDITION_WARN = 1e10
#: Doerfler marking: refine the fewest panels that carry this share of the estimate.
MARK_FRACTION = 0.8


class AccuracyWarning(SectionwaveWarning):
    """The requested tolerance was not reached within the refinement budget."""


class IllConditionedWarning(SectionwaveWarning):
    """The system matrix is badly conditioned; digits may be lost."""


@dataclass
class FrequencyResult:
    """Everything computed at one frequency."""

    frequency_hz: float
    k: float
    wavelength_m: float
    mesh: PanelMesh
    conditions: SurfaceConditions
    columns: list[dict[str, Any]]
    u: ComplexArray
    psi: ComplexArray
    angles_deg: NDArray[np.float64]
    farfield: ComplexArray
    monostatic: ComplexArray
    widths: dict[str, NDArray[np.float64]]
    condition: float
    estimated_error: float
    refinement_change: float | None
    refinements: int
    timings_s: dict[str, float]
    warnings: list[str] = field(default_factory=list)
    near: dict[str, Any] | None = None


@dataclass
class RunResult:
    """A solved scene: one ``FrequencyResult`` per frequency."""

    scene: Scene
    frequencies: list[FrequencyResult]
    elapsed_s: float


def _incident_columns(scene: Scene) -> list[dict[str, Any]]:
    cols: list[dict[str, Any]] = []
    for idx, inc in enumerate(scene.incidents):
        if inc.kind == "plane":
            for a in inc.from_deg:
                cols.append({"incident": inc.name, "index": idx, "kind": "plane", "from_deg": a})
        else:
            cols.append({"incident": inc.name, "index": idx, "kind": "line", "position_m": inc.position_m, "from_deg": math.nan})
    return cols


def incident_values(
    columns: list[dict[str, Any]], points: NDArray[np.float64], normals: NDArray[np.float64], k: float
) -> tuple[ComplexArray, ComplexArray]:
    """Incident field and its normal derivative at ``points``, one column per incident wave."""
    u = np.empty((points.shape[0], len(columns)), dtype=complex)
    dn = np.empty_like(u)
    plane = [i for i, c in enumerate(columns) if c["kind"] == "plane"]
    if plane:
        u[:, plane], dn[:, plane] = plane_wave(points, normals, k, np.array([columns[i]["from_deg"] for i in plane]))
    for i, c in enumerate(columns):
        if c["kind"] == "line":
            a, b = line_source_wave(points, normals, k, np.array(c["position_m"]))
            u[:, [i]], dn[:, [i]] = a, b
    return u, dn


def _conditions(scene: Scene, mesh: PanelMesh, k: float) -> SurfaceConditions:
    body = mesh.body_of_node
    kind = np.empty(mesh.n_nodes, dtype=np.int64)
    lam = np.zeros(mesh.n_nodes, dtype=complex)
    for b, spec in enumerate(scene.bodies):
        sel = body == b
        if spec.boundary == "impedance":
            z = complex(spec.impedance or 0)
            # Leontovich / normal-impedance condition du/dn = lam u (n out of the
            # body, exp(+j w t)): TM and sound: lam = j k / z; TE: lam = j k z.
            kind[sel] = ROBIN
            lam[sel] = 1j * k * z if scene.field == "te" else 1j * k / z
        elif spec.boundary == "hard" or (spec.boundary == "pec" and scene.field == "te"):
            kind[sel] = NEUMANN
        else:
            kind[sel] = DIRICHLET
    return SurfaceConditions(kind, lam, np.repeat(mesh.lengths, mesh.p))


def _fits(n_unknowns: int) -> bool:
    try:
        check_memory(n_unknowns)
    except ProblemTooLargeError:
        return False
    return True


def _panel_estimates(mesh: PanelMesh, x: ComplexArray) -> NDArray[np.float64]:
    """Relative error estimate of every panel, worst over the right-hand sides."""
    norm = np.sum(np.abs(x) * mesh.weights[:, None], axis=0)
    norm = np.where(norm > 0, norm, 1.0)
    est = np.zeros(mesh.n_panels)
    for m in range(x.shape[1]):
        est = np.maximum(est, mesh.legendre_tails(x[:, m]) * mesh.lengths / norm[m])
    return est


def _solve_once(scene: Scene, mesh: PanelMesh, k: float, columns: list[dict[str, Any]]):
    t0 = time.perf_counter()
    check_memory(mesh.n_nodes)
    cond = _conditions(scene, mesh, k)
    ops = assemble_operators(mesh, k, **needed_operators(cond))
    a = system_matrix(ops, cond)
    del ops
    t1 = time.perf_counter()
    fac = factorise(a)
    del a
    u_inc, dn_inc = incident_values(columns, mesh.nodes, mesh.normals, k)
    x = fac.solve(right_hand_sides(cond, k, u_inc, dn_inc))
    t2 = time.perf_counter()
    return cond, x, fac.condition, {"assemble_s": t1 - t0, "factorise_and_solve_s": t2 - t1}


def solve_scene(scene: Scene, *, progress: Callable[[str], None] | None = None) -> RunResult:
    """Solve every frequency of ``scene``.

    Parameters
    ----------
    scene
        A validated case (``load_case``).
    progress
        Called with a short message as each frequency starts.

    Returns
    -------
    RunResult
    """
    start = time.perf_counter()
    columns = _incident_columns(scene)
    results = []
    for n, freq in enumerate(scene.frequencies_hz):
        if progress is not None:
            progress(f"frequency {n + 1}/{len(scene.frequencies_hz)}: {freq:.6g} Hz")
        results.append(_solve_frequency(scene, freq, columns))
    return RunResult(scene, results, time.perf_counter() - start)


def _solve_frequency(scene: Scene, freq: float, columns: list[dict[str, Any]]) -> FrequencyResult:
    k = scene.wavenumber(freq)
    lam = scene.wavelength(freq)
    t_mesh = time.perf_counter()
    boundaries = [BoundaryContour(b.body.outer, i, lam) for i, b in enumerate(scene.bodies)]
    notes: list[str] = []
    corner_tol = scene.tolerance
    while True:
        mesh = build_panels(
            boundaries,
            p=scene.nodes_per_panel,
            tolerance=scene.tolerance,
            max_panel_wavelengths=panel_wavelengths(scene),
            corner_tolerance=corner_tol,
        )
        if _fits(mesh.n_nodes) or corner_tol >= 1e-2 or not mesh.corner_at_start.any():
            break
        # Deep corner refinement would not fit in memory: refine the corners
        # less (an answer with an honest error estimate beats a refusal).
        corner_tol *= 10.0
    if corner_tol > scene.tolerance:
        msg = (
            f"at {freq:.6g} Hz the corners were refined for a tolerance of {corner_tol:.0e} "
            f"only, so that the {mesh.n_nodes} unknowns fit in memory"
        )
        warnings.warn(msg, AccuracyWarning, stacklevel=3)
        notes.append(msg)
    timings = {
        "mesh_s": time.perf_counter() - t_mesh,
        "assemble_s": 0.0,
        "factorise_and_solve_s": 0.0,
        "far_field_s": 0.0,
    }
    plane_cols = [i for i, c in enumerate(columns) if c["kind"] == "plane"]
    plane_from = np.array([columns[i]["from_deg"] for i in plane_cols])
    previous_ff = None
    change = None
    widths: dict[str, NDArray[np.float64]] = {}
    refinements = 0
    angles = scene.far_field_deg
    while True:
        cond, x, condition, t = _solve_once(scene, mesh, k, columns)
        for key, val in t.items():
            timings[key] += val
        u, psi = surface_traces(cond, k, x)
        t_ff = time.perf_counter()
        ff = far_field(mesh, k, u, psi, angles)
        if previous_ff is not None:
            change = float(np.max(np.abs(ff - previous_ff)) / max(np.max(np.abs(ff)), 1e-300))
        est = _panel_estimates(mesh, x)
        tail_estimate = float(np.sum(est))
        # The far-field change under the last refinement measures the error
        # of the coarser mesh, so it bounds the final one as well.
        estimated = tail_estimate if change is None else min(tail_estimate, change)
        # The optical theorem is necessary, not sufficient: a residual above
        # the estimate proves the estimate too optimistic.
        if plane_cols:
            widths = cross_sections(mesh, k, u[:, plane_cols], psi[:, plane_cols], plane_from)
            estimated = max(estimated, float(np.max(widths["optical_residual"])))
        timings["far_field_s"] += time.perf_counter() - t_ff
        if estimated <= scene.tolerance or refinements >= scene.max_refinements:
            break
        # Doerfler marking: the fewest panels carrying MARK_FRACTION of the estimate.
        order = np.argsort(est)[::-1]
        count = int(np.searchsorted(np.cumsum(est[order]), MARK_FRACTION * tail_estimate)) + 1
        bad = order[:count]
        refined = regrade(mesh.split(sorted(bad.tolist())))
        if not _fits(refined.n_nodes):
            msg = (
                f"at {freq:.6g} Hz refinement stopped at {mesh.n_nodes} unknowns: "
                f"the next mesh ({refined.n_nodes}) would not fit in memory"
            )
            warnings.warn(msg, AccuracyWarning, stacklevel=3)
            notes.append(msg)
            break
        previous_ff = ff
        refinements += 1
        log.info("refining %d of %d panels (estimate %.2e)", bad.size, mesh.n_panels, estimated)
        mesh = refined
    t_post = time.perf_counter()
    mono = np.full(len(columns), np.nan + 0j)
    if plane_cols:
        mono[plane_cols] = far_field_each(mesh, k, u[:, plane_cols], psi[:, plane_cols], plane_from)
    timings["far_field_s"] += time.perf_counter() - t_post
    if estimated > scene.tolerance:
        msg = (
            f"at {freq:.6g} Hz the estimated error {estimated:.2e} is above the tolerance "
            f"{scene.tolerance:.1e} after {refinements} refinements"
            + ("; raise [solver] max_refinements" if refinements >= scene.max_refinements else "")
        )
        warnings.warn(msg, AccuracyWarning, stacklevel=3)
        notes.append(msg)
    if condition > CONDITION_WARN:
        msg = f"at {freq:.6g} Hz the system condition number is {condition:.2e}"
        warnings.warn(msg, IllConditionedWarning, stacklevel=3)
        notes.append(msg)
    near = None
    if scene.near_field is not None:
        t_near = time.perf_counter()
        near = _near_fields(scene, mesh, k, u, psi, columns)
        timings["near_field_s"] = time.perf_counter() - t_near
    return FrequencyResult(
        near=near,
        frequency_hz=freq,
        k=k,
        wavelength_m=lam,
        mesh=mesh,
        conditions=cond,
        columns=columns,
        u=u,
        psi=psi,
        angles_deg=np.asarray(angles, dtype=float),
        farfield=ff,
        monostatic=mono,
        widths=widths,
        condition=condition,
        estimated_error=estimated,
        refinement_change=change,
        refinements=refinements,
        timings_s=timings,
        warnings=notes,
    )


def _near_fields(
    scene: Scene, mesh: PanelMesh, k: float, u: ComplexArray, psi: ComplexArray,
    columns: list[dict[str, Any]],
) -> dict[str, Any]:
    """Fields on the case's grid and at its probes for the selected incident waves."""
    from .nearfield import field_at_points, field_on_grid

    spec = scene.near_field
    assert spec is not None
    if spec.from_deg is None:
        chosen = list(range(len(columns)))
    else:
        chosen = [
            i for i, c in enumerate(columns)
            if c["kind"] == "plane" and any(abs(c["from_deg"] - a) < 1e-9 for a in spec.from_deg)
        ]
        if not chosen:
            raise CaseError(
                f"{scene.source}: [near_field.from_deg] {list(spec.from_deg)} matches no plane-wave "
                "incidence; use angles listed in [[incident]] from_deg"
            )
    cols = [columns[i] for i in chosen]

    def incident(points: NDArray[np.float64]) -> ComplexArray:
        return incident_values(cols, points, np.zeros_like(points), k)[0]

    out: dict[str, Any] = {"columns": chosen}
    if spec.x is not None and spec.y is not None:
        out["grid"] = field_on_grid(mesh, k, u[:, chosen], psi[:, chosen], incident, spec.x, spec.y)
        out["x"], out["y"] = spec.x, spec.y
    if spec.probes is not None:
        out["probes"] = field_at_points(mesh, k, u[:, chosen], psi[:, chosen], incident, spec.probes)
        out["probe_points"] = spec.probes
    return out


def panel_wavelengths(scene: Scene) -> float:
    """Longest panel in wavelengths: the case's setting, or the measured default.

    With 16 nodes, panels of one wavelength reach 1e-10 on smooth PEC
    bodies; impedance surfaces (whose equation differentiates the density)
    need half that for 1e-8 (measured against the circle's series).
    """
    if scene.max_panel_wavelengths is not None:
        return scene.max_panel_wavelengths
    has_impedance = any(b.boundary == "impedance" for b in scene.bodies)
    return 0.5 if has_impedance else 1.0


def physical_surface_quantities(scene: Scene, fr: FrequencyResult) -> dict[str, ComplexArray]:
    """The trade's surface quantities for a unit-amplitude incident wave.

    TM (u = E_z, 1 V/m): surface current ``J_z = (du/dn) / (j w mu0)`` in A/m.
    TE (u = H_z, 1 A/m): surface current along the contour ``J_t = -H_z`` in A/m.
    Sound (u = p, 1 Pa): surface pressure ``p`` in Pa and the normal particle
    velocity ``v_n = -(dp/dn) / (j w rho)`` in m/s (out of the body).
    """
    omega = 2 * math.pi * fr.frequency_hz
    if scene.field == "tm":
        return {"current_z_a_per_m": fr.psi / (1j * omega * MU0_H_M)}
    if scene.field == "te":
        return {"current_t_a_per_m": -fr.u}
    return {
        "pressure_pa": fr.u,
        "normal_velocity_m_per_s": -fr.psi / (1j * omega * scene.density_kg_m3),
    }


def echo_width_table(fr: FrequencyResult) -> dict[str, NDArray[np.float64]]:
    """Echo width of the bistatic far field at ``fr``, keyed by unit."""
    return echo_width(fr.farfield, fr.wavelength_m)
