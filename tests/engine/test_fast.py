"""The fast solver (GMRES with fast multipole products) and the cost plan.

Sources of the checks:
- the circular-cylinder series (Balanis, Advanced Engineering Electromagnetics,
  ch. 11; ``tests/reference.py``) at ka = 500, TM and TE;
- the dense solver of the same equations (LU, an independent way to solve
  them) on bodies with corners, impedance and a dielectric body;
- direct summation of the Green's function (DLMF 10.2 Hankel functions from
  scipy) for the multipole sums and their convention;
- a finite difference of the double-layer kernel for the hypersingular kernel;
- the process's own peak memory (Linux ``VmHWM``) for the memory plan.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import scipy.special as ss
from sectionwave.engine import parse_case, solve_problem
from sectionwave.engine import solve as solve_mod
from sectionwave.engine.fast import FastMultipole, FastSystem, hypersingular_kernel
from sectionwave.engine.fields import far_field
from sectionwave.engine.formulations import Dirichlet, Neumann
from sectionwave.engine.kernels import kernel_matrices
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.multipole import fmm_sums
from sectionwave.engine.plan import AutoSolver, plan_system
from sectionwave.engine.problem import IncidentWave
from sectionwave.engine.solve import DenseLU, solve_boundary
from sectionwave.engine.system import BoundarySystem
from sectionwave.importers.curves import Contour, circular_arc

from tests.reference import C0, L_SHAPE, SQUARE, case, circle_far_field, relative_error


def _circle_system(ka: float, formulation, tolerance: float = 1e-8) -> BoundarySystem:
    contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
    mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / ka)], tolerance=tolerance)
    return BoundarySystem(mesh, [formulation], ka)


def test_multipole_sums_match_direct_summation():
    """Charges and dipoles at a complex wavenumber, against G = -(j/4) H0^(2)(k r) summed directly."""
    rng = np.random.default_rng(3)
    pts = rng.random((2, 300))
    nrm = rng.standard_normal((2, 300))
    nrm /= np.linalg.norm(nrm, axis=0)
    q = rng.standard_normal(300) + 1j * rng.standard_normal(300)
    d = rng.standard_normal(300) + 1j * rng.standard_normal(300)
    k = 9.0 - 0.4j
    pot, grad = fmm_sums(pts, nrm, k, q, d, 4, True)
    dx = pts[0][:, None] - pts[0][None, :]
    dy = pts[1][:, None] - pts[1][None, :]
    r = np.hypot(dx, dy)
    np.fill_diagonal(r, 1.0)
    g = -0.25j * ss.hankel2(0, k * r)
    gp = 0.25j * k * ss.hankel2(1, k * r)  # dG/dr
    dgdny = -gp * (dx * nrm[0][None, :] + dy * nrm[1][None, :]) / r
    for m in (g, dgdny):
        np.fill_diagonal(m, 0.0)
    direct = g @ q + dgdny @ d
    assert relative_error(pot, direct) < 1e-12
    # gradient: d/dx of G is G' dx / r; of dG/dn_y by a central difference
    h = 1e-6

    def potential_at(shift):
        tx = pts[0][:, None] + shift
        ddx = tx - pts[0][None, :]
        rr = np.hypot(ddx, dy)
        np.fill_diagonal(rr, 1.0)
        gg = -0.25j * ss.hankel2(0, k * rr)
        ggp = 0.25j * k * ss.hankel2(1, k * rr)
        dd = -ggp * (ddx * nrm[0][None, :] + dy * nrm[1][None, :]) / rr
        np.fill_diagonal(gg, 0.0)
        np.fill_diagonal(dd, 0.0)
        return gg @ q + dd @ d

    assert grad is not None
    fd = (potential_at(h) - potential_at(-h)) / (2 * h)
    assert relative_error(grad[0], fd) < 1e-6


def test_hypersingular_kernel_is_the_normal_derivative_of_the_double_layer():
    rng = np.random.default_rng(4)
    tgt, src = rng.random((5, 2)), rng.random((4, 2)) + 2.0
    tn, sn = rng.standard_normal((5, 2)), rng.standard_normal((4, 2))
    tn /= np.linalg.norm(tn, axis=1)[:, None]
    sn /= np.linalg.norm(sn, axis=1)[:, None]
    k, h = 3.7, 1e-6
    _, dp, _, _ = kernel_matrices(tgt + h * tn, tn, src, sn, k, want_s=False, want_dp=False)
    _, dm, _, _ = kernel_matrices(tgt - h * tn, tn, src, sn, k, want_s=False, want_dp=False)
    fd = (dp - dm) / (2 * h)
    assert relative_error(hypersingular_kernel(tgt, tn, src, sn, k), fd) < 1e-7


@pytest.mark.parametrize("formulation", [Dirichlet(), Neumann()], ids=["dirichlet", "neumann"])
def test_product_equals_the_dense_matrix(formulation):
    system = _circle_system(12.0, formulation)
    fast = FastSystem(system, 4, radiation_rows=False)
    x = np.random.default_rng(1).standard_normal(system.n_unknowns) + 0j
    dense = system.dense_matrix() @ x
    # D, S, D' to the FMM's error; T to the quadrature error of far pairs (integrated by parts
    # in the dense path, summed directly by the FMM)
    assert relative_error(fast.apply(x), dense) < 1e-10


def _both(doc: dict, tol: float):
    problem = parse_case(doc).problem
    dense = solve_problem(problem, solver=DenseLU()).frequencies[0]
    fast = solve_problem(problem, solver=FastMultipole(tol)).frequencies[0]
    return dense, fast


@pytest.mark.parametrize(
    ("field", "body"),
    [
        ("tm", {"name": "b", "shape": SQUARE, "boundary": "pec"}),
        ("te", {"name": "b", "shape": SQUARE, "boundary": "pec"}),
        ("te", {"name": "b", "shape": L_SHAPE, "boundary": "impedance", "impedance": [0.5, 0.2]}),
        ("tm", {"name": "b", "shape": SQUARE, "boundary": "penetrable", "eps_r": 3.0}),
        ("tm", {"name": "b", "shape": {"kind": "ellipse", "semi_axes_m": [1.0, 0.4]}, "boundary": "pec"}),
    ],
    ids=["square-tm", "square-te", "impedance-L-te", "dielectric-square-tm", "ellipse-tm"],
)
def test_fast_agrees_with_dense(field, body):
    """Corners (compressed), impedance, a dielectric body, a smooth body: same far field to the tolerance."""
    tol = 1e-8
    dense, fast = _both(case(field, 5 * C0 / (2 * math.pi), [body], solver={"tolerance": tol}), tol)
    assert fast.solver_method == "fast multipole + GMRES" and fast.iterations
    assert relative_error(fast.farfield, dense.farfield) < tol


@pytest.mark.parametrize(("field", "kind"), [("tm", "dirichlet"), ("te", "neumann")])
def test_circle_series_at_ka_500(field, kind):
    """Balanis ch. 11 series, ka = 500, tolerance 1e-8 (about 8000 unknowns)."""
    ka = 500.0
    system = _circle_system(ka, Dirichlet() if field == "tm" else Neumann())
    sol = solve_boundary(system, [IncidentWave("p", "plane", from_deg=30.0)], solver=FastMultipole(1e-8))
    angles = np.linspace(0.0, 360.0, 2001)
    ff = far_field(system.mesh, ka, sol.u, sol.dudn, angles)[:, 0]
    assert relative_error(ff, circle_far_field(ka, ka, angles, 30.0, kind)) < 1e-8
    assert max(sol.report.iterations or [999]) < 60


def test_many_incidences_recycle_krylov_directions():
    """Later right-hand sides start in the span of earlier ones' directions: fewer iterations."""
    system = _circle_system(60.0, Neumann())
    incidents = [IncidentWave(f"p{i}", "plane", from_deg=float(i)) for i in range(12)]
    sol = solve_boundary(system, incidents, solver=FastMultipole(1e-8))
    its = sol.report.iterations
    assert its is not None and len(its) == 12
    assert sum(its[6:]) < 0.6 * 6 * its[0]
    dense = solve_boundary(system, incidents, solver=DenseLU())
    assert relative_error(sol.dudn + sol.u, dense.dudn + dense.u) < 1e-8


def test_auto_picks_dense_for_small_and_fast_for_large():
    small = _circle_system(10.0, Dirichlet())
    large = _circle_system(2000.0, Dirichlet(), tolerance=1e-6)
    assert plan_system(small).chosen == "dense"
    assert plan_system(large).chosen == "fast"
    assert AutoSolver().chosen(small) == "dense"


def test_neither_fits_is_refused_before_allocating(monkeypatch):
    system = _circle_system(400.0, Neumann())
    monkeypatch.setattr(solve_mod, "available_memory_bytes", lambda: 1 << 20)
    plan = plan_system(system)
    assert plan.chosen is None
    with pytest.raises(solve_mod.ProblemTooLargeError, match="fit neither method"):
        AutoSolver().prepare(system)


_PEAK = textwrap.dedent(
    """
    import json, math, sys
    from sectionwave.engine.mesh import BoundaryContour, build_panels
    from sectionwave.engine.system import BoundarySystem
    from sectionwave.engine.formulations import Dirichlet, Neumann
    from sectionwave.engine.fast import FastMultipole
    from sectionwave.engine.plan import fast_memory_bytes
    from sectionwave.engine.solve import solve_boundary
    from sectionwave.engine.problem import IncidentWave
    from sectionwave.importers.curves import Contour, circular_arc

    def status(key):
        for line in open("/proc/self/status"):
            if line.startswith(key):
                return int(line.split()[1]) * 1024

    def system(ka, field):
        contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
        mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / ka)], tolerance=1e-8)
        return BoundarySystem(mesh, [Dirichlet() if field == "tm" else Neumann()], ka)

    ka, field, n_inc = float(sys.argv[1]), sys.argv[2], int(sys.argv[3])
    inc = [IncidentWave(f"p{i}", "plane", from_deg=float(i)) for i in range(n_inc)]
    solve_boundary(system(5.0, field), inc, solver=FastMultipole(1e-8))  # load compiled code first
    s = system(ka, field)
    plan = fast_memory_bytes(s, n_inc)
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")
    base = status("VmRSS:")
    solve_boundary(s, inc, solver=FastMultipole(1e-8))
    print(json.dumps({"plan": plan, "peak": status("VmHWM:") - base}))
    """
)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="peak memory read from /proc")
@pytest.mark.parametrize(("ka", "field", "n_inc"), [(150.0, "tm", 1), (300.0, "te", 2), (600.0, "tm", 3)])
def test_memory_plan_within_20_percent_of_the_measured_peak(ka, field, n_inc):
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
    except OSError:
        pytest.skip("the peak memory cannot be reset here")
    out = subprocess.run([sys.executable, "-c", _PEAK, str(ka), field, str(n_inc)],
                         capture_output=True, text=True, timeout=600, check=True)
    figures = json.loads(out.stdout.strip().splitlines()[-1])
    assert 0.8 <= figures["plan"] / figures["peak"] <= 1.2, figures


def test_plan_command_and_method_key(tmp_path, capsys):
    """``sectionwave plan --json`` reports both methods; ``method = "fast"`` runs the fast solver."""
    from sectionwave.engine.cli import main

    doc = textwrap.dedent(
        """
        title = "plan check"
        [wave]
        field = "te"
        frequency_hz = [1e9, 3e9]
        [[body]]
        name = "b"
        shape = { kind = "circle", radius_m = 0.1 }
        boundary = "pec"
        [[incident]]
        kind = "plane"
        from_deg = 0
        [solver]
        method = "METHOD"
        [output]
        plots = false
        vtk = false
        """
    )
    path = tmp_path / "c.toml"
    path.write_text(doc.replace("METHOD", "auto"))
    assert main(["plan", str(path), "--json"]) == 0
    plan = json.loads(capsys.readouterr().out)
    assert [f["chosen"] for f in plan["frequencies"]] == ["dense", "dense"]
    assert set(plan["frequencies"][0]["methods"]) == {"dense", "fast"}
    path.write_text(doc.replace("METHOD", "fast"))
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert {f["solver_method"] for f in summary["frequencies"]} == {"fast multipole + GMRES"}
    from sectionwave.engine.export import read_csv

    table = read_csv(tmp_path / "out" / "farfield.csv")
    rows = table["frequency_hz"] == 1e9
    k = 2 * math.pi * 1e9 / C0
    ff = table["farfield_re_sqrt_m"][rows] + 1j * table["farfield_im_sqrt_m"][rows]
    series = circle_far_field(0.1 * k, k, table["angle_deg"][rows], 0.0, "neumann")
    assert relative_error(ff, series) < 1e-8
