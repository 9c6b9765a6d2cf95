"""Solve a problem: per frequency, mesh, solve, refine until accurate, evaluate.

One frequency, step by step::

    mesh.build_panels            panels sized for the wavelength and the geometry
    formulations.formulation_for one formulation per contour
    system.BoundarySystem        the boundary equations on the mesh
    solve.solve_boundary         assemble, factorise once, all incident waves
    fields.far_field, ...        far field and cross sections
    adapt.refine_until_accurate  estimate, mark, refine, repeat
    nearfield                    field maps and probes, if asked for
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable

import numpy as np

from .adapt import AccuracyWarning, SolvePass, refine_until_accurate
from .fields import cross_sections, far_field, far_field_each, incident_field
from .formulations import formulation_for
from .mesh import BoundaryContour, PanelMesh, build_panels
from .problem import Problem
from .results import FieldSamples, FrequencySolution, NearFieldResult, RunResult, RunSettings
from .solve import (
    CONDITION_WARN,
    DenseLU,
    IllConditionedWarning,
    LinearSolver,
    fits_in_memory,
    solve_boundary,
)
from .system import BoundarySystem

__all__ = ["METHOD", "panel_wavelengths", "solve_problem"]

#: What the engine does, in words, for reports.
METHOD = (
    "Nystrom, kernel-split product integration on Gauss-Legendre panels; "
    "combined-field (Dirichlet) and Burton-Miller (Neumann, impedance) equations; dense LU"
)


def panel_wavelengths(problem: Problem) -> float:
    """Longest panel in wavelengths: the problem's setting, or the measured default.

    With 16 nodes, panels of one wavelength reach 1e-10 on smooth PEC
    bodies; impedance surfaces (whose equation differentiates the density)
    need half that for 1e-8 (measured against the circle's series).
    """
    if problem.solver.max_panel_wavelengths is not None:
        return problem.solver.max_panel_wavelengths
    has_impedance = any(s.boundary == "impedance" for s in problem.scatterers)
    return 0.5 if has_impedance else 1.0


def solve_problem(
    problem: Problem,
    *,
    progress: Callable[[str], None] | None = None,
    solver: LinearSolver | None = None,
) -> RunResult:
    """Solve every frequency of ``problem``.

    Parameters
    ----------
    problem
        The physics problem.
    progress
        Called with a short message as each frequency starts.
    solver
        The linear solver (default dense LU).

    Returns
    -------
    RunResult
    """
    start = time.perf_counter()
    active: LinearSolver = solver if solver is not None else DenseLU()
    results = []
    for n, freq in enumerate(problem.frequencies_hz):
        if progress is not None:
            progress(f"frequency {n + 1}/{len(problem.frequencies_hz)}: {freq:.6g} Hz")
        results.append(_solve_frequency(problem, freq, active))
    s = problem.solver
    settings = RunSettings(s.tolerance, s.nodes_per_panel, panel_wavelengths(problem), s.max_refinements, METHOD)
    return RunResult(problem, results, settings, time.perf_counter() - start)


def _system(problem: Problem, mesh: PanelMesh, k: float) -> BoundarySystem:
    formulations = [
        formulation_for(problem.field, problem.scatterers[int(b)], k) for b in mesh.body_of_contour
    ]
    return BoundarySystem(mesh, formulations, k)


def _fits(problem: Problem, solver: LinearSolver, k: float) -> Callable[[PanelMesh], bool]:
    def fits(mesh: PanelMesh) -> bool:
        return fits_in_memory(solver.memory_bytes(_system(problem, mesh, k).n_unknowns))

    return fits


def _first_mesh(problem: Problem, freq: float, fits: Callable[[PanelMesh], bool]) -> tuple[PanelMesh, list[str]]:
    """The first mesh; when deep corner refinement would not fit, corners are refined less."""
    lam = problem.wavelength(freq)
    boundaries = [BoundaryContour(s.body.outer, i, lam) for i, s in enumerate(problem.scatterers)]
    tol = problem.solver.tolerance
    corner_tol = tol
    while True:
        mesh = build_panels(
            boundaries,
            p=problem.solver.nodes_per_panel,
            tolerance=tol,
            max_panel_wavelengths=panel_wavelengths(problem),
            corner_tolerance=corner_tol,
        )
        if fits(mesh) or corner_tol >= 1e-2 or not mesh.corner_at_start.any():
            break
        # Deep corner refinement would not fit in memory: refine the corners
        # less (an answer with an honest error estimate beats a refusal).
        corner_tol *= 10.0
    notes = []
    if corner_tol > tol:
        msg = (
            f"at {freq:.6g} Hz the corners were refined for a tolerance of {corner_tol:.0e} "
            f"only, so that the {mesh.n_nodes} unknowns fit in memory"
        )
        warnings.warn(msg, AccuracyWarning, stacklevel=4)
        notes.append(msg)
    return mesh, notes


def _solve_frequency(problem: Problem, freq: float, solver: LinearSolver) -> FrequencySolution:
    k = problem.wavenumber(freq)
    lam = problem.wavelength(freq)
    t_mesh = time.perf_counter()
    fits = _fits(problem, solver, k)
    mesh, notes = _first_mesh(problem, freq, fits)
    mesh_s = time.perf_counter() - t_mesh
    incidents = problem.incidents
    plane = problem.plane_waves
    plane_from = np.array([incidents[i].from_deg for i in plane])
    angles = np.asarray(problem.far_field_deg, dtype=float)

    def evaluate(current: PanelMesh) -> SolvePass:
        solution = solve_boundary(_system(problem, current, k), incidents, solver=solver)
        t_ff = time.perf_counter()
        ff = far_field(current, k, solution.u, solution.dudn, angles)
        widths = None
        if plane:
            widths = cross_sections(current, k, solution.u[:, plane], solution.dudn[:, plane], plane_from)
        return SolvePass(solution, ff, widths, time.perf_counter() - t_ff)

    adaptive = refine_until_accurate(
        mesh, evaluate,
        tolerance=problem.solver.tolerance,
        max_refinements=problem.solver.max_refinements,
        fits=fits,
        where=f"at {freq:.6g} Hz",
    )
    mesh = adaptive.mesh
    solution = adaptive.last.solution
    u, dudn = solution.u, solution.dudn
    timings = {"mesh_s": mesh_s, **adaptive.timings_s}
    t_post = time.perf_counter()
    mono = np.full(len(incidents), np.nan + 0j)
    if plane:
        mono[plane] = far_field_each(mesh, k, u[:, plane], dudn[:, plane], plane_from)
    timings["far_field_s"] += time.perf_counter() - t_post
    notes += adaptive.notes
    condition = solution.report.condition_estimate
    if condition is not None and condition > CONDITION_WARN:
        msg = f"at {freq:.6g} Hz the system condition number is {condition:.2e}"
        warnings.warn(msg, IllConditionedWarning, stacklevel=3)
        notes.append(msg)
    near = None
    if problem.near_field is not None:
        t_near = time.perf_counter()
        near = _near_fields(problem, mesh, k, u, dudn)
        timings["near_field_s"] = time.perf_counter() - t_near
    return FrequencySolution(
        frequency_hz=freq,
        wavenumber_rad_per_m=k,
        wavelength_m=lam,
        mesh=mesh,
        incidents=incidents,
        unknowns=solution.report.unknowns,
        u=u,
        dudn=dudn,
        angles_deg=angles,
        farfield=adaptive.last.farfield,
        monostatic=mono,
        cross_sections=adaptive.last.cross_sections,
        condition_estimate=condition,
        estimated_error=adaptive.estimated_error,
        refinement_change=adaptive.refinement_change,
        refinements=adaptive.refinements,
        timings_s=timings,
        warnings=notes,
        near_field=near,
    )


def _near_fields(
    problem: Problem, mesh: PanelMesh, k: float, u: np.ndarray, dudn: np.ndarray
) -> NearFieldResult:
    """Fields on the requested grid and at the probes for the selected incident waves."""
    from .nearfield import field_at_points, field_on_grid

    request = problem.near_field
    assert request is not None
    chosen = list(request.incidents)
    waves = [problem.incidents[i] for i in chosen]

    def incident(points: np.ndarray) -> np.ndarray:
        return incident_field(waves, points, np.zeros_like(points), k)[0]

    grid = probes = None
    if request.x_m is not None and request.y_m is not None:
        grid = FieldSamples(**field_on_grid(mesh, k, u[:, chosen], dudn[:, chosen], incident, request.x_m, request.y_m))
    if request.probes_m is not None:
        probes = FieldSamples(**field_at_points(mesh, k, u[:, chosen], dudn[:, chosen], incident, request.probes_m))
    return NearFieldResult(tuple(chosen), grid, request.x_m, request.y_m, probes, request.probes_m)
