"""Solver benchmarks: accuracy per unknown, time, assembly/LU balance and memory.

Every figure is measured in this run on this machine; ratios compare two
computations made here (ours against a series solution, a reference mesh
or a classic low-order solver). These are measurements, not tests.

Items (see benchmarks/README.md):
  1  PEC circle, k a = 50, TM and TE: unknowns per wavelength and seconds
     to reach far-field errors 1e-6 and 1e-10 against the series solution.
  2  PEC square (side 2, a = 1), k a = 5, TM and TE: unknowns and seconds
     to reach 1e-6 and 1e-10 against a reference on the tightest mesh.
  3  Classic low-order method (flat panels, midpoint collocation) on the
     item-1 circle (TM): M for far-field error 1e-4, its time, and the
     ratio to ours at the same error.
  4  Assembly time / LU time at N = 2000 and 4000 (fresh process each).
  5  Peak memory against 16 N^2 bytes, and refusal of N = 60000 by
     check_memory before anything is allocated.

Usage: .venv/bin/python benchmarks/bench_solver.py [--quick] [--items 1,3]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import math
import os
import pstats
import subprocess
import sys
import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.special as sp

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from low_order import solve_circle_tm  # noqa: E402
from sectionwave.engine.fields import far_field, plane_wave  # noqa: E402
from sectionwave.engine.formulations import Dirichlet, Neumann  # noqa: E402
from sectionwave.engine.mesh import BoundaryContour, build_panels  # noqa: E402
from sectionwave.engine.solve import (  # noqa: E402
    MATRICES_IN_FLIGHT,
    ProblemTooLargeError,
    available_memory_bytes,
    check_memory,
    factorise,
)
from sectionwave.engine.system import BoundarySystem  # noqa: E402
from sectionwave.importers.curves import Contour, circular_arc, polygon_segments  # noqa: E402

INCIDENT_DEG = 30.0


# --------------------------------------------------------------------------- helpers


def boundary_system(mesh, kind: str, k: float) -> BoundarySystem:
    """The engine's boundary system for a PEC body: TM (Dirichlet) or TE (Neumann)."""
    return BoundarySystem(mesh, [Dirichlet() if kind == "tm" else Neumann()] * int(mesh.body_of_contour.size), k)


def circle_contour(n_arcs: int, radius: float = 1.0) -> Contour:
    """A circle drawn as ``n_arcs`` equal arcs (tangent-continuous joints, no corners)."""
    sweep = 2.0 * math.pi / n_arcs
    return Contour(tuple(circular_arc((0.0, 0.0), radius, i * sweep, sweep) for i in range(n_arcs)))


def square_contour(side: float = 2.0) -> Contour:
    h = 0.5 * side
    return Contour(polygon_segments([(-h, -h), (h, -h), (h, h), (-h, h)]))


def series_farfield(ka: float, k: float, kind: str, angles_deg, incident_deg: float):
    """Far field of the PEC circle at the origin (Bessel series), same normalisation as ours."""
    nmax = int(ka + 40 + 3 * ka ** (1 / 3))
    n = np.arange(-nmax, nmax + 1)
    if kind == "tm":
        c = sp.jv(n, ka) / sp.hankel2(n, ka)
    else:
        c = sp.jvp(n, ka) / sp.h2vp(n, ka)
    dphi = np.deg2rad(np.asarray(angles_deg))[:, None] - math.radians(incident_deg)
    terms = ((-1.0) ** n * c)[None, :] * np.exp(1j * n[None, :] * dphi)
    return -np.sqrt(2 / (np.pi * k)) * np.exp(0.25j * np.pi) * terms.sum(axis=1)


def rel_err(f, ref) -> float:
    return float(np.max(np.abs(f - ref)) / np.max(np.abs(ref)))


@dataclass
class Run:
    """One solve from contour to far field, with stage times in seconds."""

    n: int
    farfield: np.ndarray
    times: dict = field(default_factory=dict)
    condition: float = float("nan")

    @property
    def total(self) -> float:
        return sum(self.times.values())


def solve(boundary: BoundaryContour, k: float, kind: str, angles, *, mesh_kw: dict,
          mesh=None) -> Run:
    """Mesh (unless given), assemble, factorise, solve one plane wave, far field."""
    t = {}
    t0 = time.perf_counter()
    if mesh is None:
        mesh = build_panels([boundary], **mesh_kw)
    t1 = time.perf_counter()
    t["mesh"] = t1 - t0
    system = boundary_system(mesh, kind, k)
    a = system.dense_matrix()
    t2 = time.perf_counter()
    t["assemble"] = t2 - t1
    f = factorise(a)
    ui, dni = plane_wave(mesh.nodes, mesh.normals, k, [INCIDENT_DEG])
    x = f.solve(system.right_hand_sides(ui, dni))
    t3 = time.perf_counter()
    t["solve"] = t3 - t2
    u, dudn = system.traces(x)
    ff = far_field(mesh, k, u, dudn, angles)[:, 0]
    t["farfield"] = time.perf_counter() - t3
    return Run(mesh.n_nodes, ff, t, f.condition)


def best_of(fn, repeats: int) -> Run:
    """Run ``fn`` ``repeats`` times; keep the fastest (the far field is the same each time)."""
    runs = [fn() for _ in range(max(1, repeats))]
    return min(runs, key=lambda r: r.total)


def fmt_t(t: float) -> str:
    return f"{t:8.3f}"


def header(title: str) -> None:
    print()
    print("=" * 78)
    print(title)
    print("=" * 78, flush=True)


def warm_up(p: int) -> None:
    """Compile the numba loops once so that no timing below includes compilation."""
    ang = np.linspace(0, 360, 7)
    b = BoundaryContour(circle_contour(4), 0, 2 * math.pi / 5.0)
    for kind in ("tm", "te"):
        solve(b, 5.0, kind, ang, mesh_kw={"p": p, "tolerance": 1e-8})


def pick(rows, target):
    """Row with the fewest unknowns whose error is at most ``target`` (None if none)."""
    ok = [r for r in rows if r["err"] <= target]
    return min(ok, key=lambda r: (r["n"], r["t"])) if ok else None


# --------------------------------------------------------------------------- item 1


def item_circle(args, summary):
    header(f"1. PEC circle, ka = {args.ka:g}: error vs series over {args.n_angles} angles")
    k = args.ka  # radius 1
    wl = 2 * math.pi / k
    n_wl = 2 * math.pi / wl
    ang = np.linspace(0, 360, args.n_angles)
    arcs = [4, 6] if args.quick else [4, 5, 6, 7]
    mpws = [3.0, 2.0, 1.0, 0.7, 0.4] if args.quick else [3.0, 2.0, 1.5, 1.0, 0.7, 0.5, 0.4]
    tols = [1e-6, 1e-10]
    targets = [1e-4, 1e-6, 1e-10]
    print(f"perimeter = {n_wl:g} wavelengths; p = {args.p}; incidence from {INCIDENT_DEG:g} deg")
    print("mesh density is varied through max_panel_wavelengths, tolerance and the number of")
    print("equal arcs the circle is drawn with (4..7: panel counts 4*2^m .. 7*2^m)")
    out = {}
    for kind in ("tm", "te"):
        ref = series_farfield(args.ka, k, kind, ang, INCIDENT_DEG)
        rows, seen = [], {}
        for na in arcs:
            bnd = BoundaryContour(circle_contour(na), 0, wl)
            for mpw in mpws:
                for tol in tols:
                    kw = {"p": args.p, "tolerance": tol, "max_panel_wavelengths": mpw}
                    mesh = build_panels([bnd], **kw)
                    key = (na, mesh.t0.tobytes(), mesh.t1.tobytes())
                    if key in seen:
                        seen[key]["settings"].append((mpw, tol))
                        continue
                    r = solve(bnd, k, kind, ang, mesh_kw=kw)
                    row = {"arcs": na, "mpw": mpw, "tol": tol, "n": r.n, "ppw": r.n / n_wl,
                           "err": rel_err(r.farfield, ref), "t": r.total, "cond": r.condition,
                           "kw": kw, "bnd": bnd, "settings": [(mpw, tol)]}
                    seen[key] = row
                    rows.append(row)
        rows.sort(key=lambda r: r["n"])
        print(f"\n[{kind.upper()}] distinct meshes: {len(rows)} "
              f"(tolerance 1e-6 vs 1e-10 changed the circle mesh "
              f"{sum(1 for r in rows if len(set(t for _, t in r['settings'])) == 1)} times)")
        print(f"{'N':>6} {'N/wl':>6} {'arcs':>4} {'max_pw':>6} {'error':>9} {'cond':>8} {'t (s)':>8}")
        for r in rows:
            print(f"{r['n']:6d} {r['ppw']:6.1f} {r['arcs']:4d} {r['mpw']:6.2g} {r['err']:9.2e} "
                  f"{r['cond']:8.1e} {fmt_t(r['t'])}")
        print(f"\n[{kind.upper()}] smallest mesh reaching each error (re-timed, best of "
              f"{args.repeats}: mesh + assembly + LU + solve + far field)")
        print(f"{'target':>7} {'N':>6} {'N/wl':>6} {'error':>9} {'t (s)':>8}  settings")
        res = {}
        for tgt in targets:
            r = pick(rows, tgt)
            if r is None:
                print(f"{tgt:7.0e}   not reached (finest N = {rows[-1]['n']}, "
                      f"error {min(x['err'] for x in rows):.1e})")
                res[tgt] = None
                continue
            best = best_of(lambda r=r, kind=kind: solve(r["bnd"], k, kind, ang, mesh_kw=r["kw"]),
                           args.repeats)
            res[tgt] = {"n": r["n"], "ppw": r["ppw"], "err": r["err"], "t": best.total,
                        "stages": best.times}
            print(f"{tgt:7.0e} {r['n']:6d} {r['ppw']:6.1f} {r['err']:9.2e} {fmt_t(best.total)}  "
                  f"arcs={r['arcs']} max_panel_wavelengths={r['mpw']:g} tol={r['tol']:g}")
        out[kind] = res
    summary["circle"] = out
    return out


# --------------------------------------------------------------------------- item 2


def item_square(args, summary):
    ka = args.square_ka
    k = ka  # a = half side = 1
    wl = 2 * math.pi / k
    ang = np.linspace(0, 360, args.n_angles)
    header(f"2. PEC square, side 2, ka = {ka:g} (a = half side): error vs reference mesh")
    bnd = BoundaryContour(square_contour(2.0), 0, wl)
    n_wl = 8.0 / wl
    ref_levels = {"tm": args.square_ref_levels_tm, "te": args.square_ref_levels_te}
    print(f"perimeter = {n_wl:.2f} wavelengths. Reference per polarisation: tolerance=1e-12, "
          f"max_panel_wavelengths={args.square_ref_mpw:g}, corner_levels={ref_levels}.")
    print("Convergence is self-convergence toward that reference, not an exact solution.")
    print("TE uses fewer reference levels: its condition number grows about 2x per level, and")
    print("past ~30 levels rounding, not the mesh, limits the reference.")
    if args.quick:
        mpws = (1.0,)
        levels = {"tm": (10, 20, 30), "te": (8, 14, 20)}
    else:
        mpws = (1.0, 0.5)
        levels = {"tm": (10, 18, 26, 30, 34, 38), "te": (6, 10, 14, 18, 22)}
    out = {}
    for kind in ("tm", "te"):
        ref_kw = {"p": args.p, "tolerance": 1e-12, "max_panel_wavelengths": args.square_ref_mpw,
                  "corner_levels": ref_levels[kind]}
        grid = [(mpw, lv) for mpw in mpws for lv in levels[kind]]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ref = solve(bnd, k, kind, ang, mesh_kw=ref_kw)
        print(f"\n[{kind.upper()}] reference N = {ref.n}, cond = {ref.condition:.1e}, "
              f"t = {ref.total:.2f} s")
        print(f"{'N':>6} {'N/wl':>6} {'max_pw':>6} {'levels':>6} {'error':>9} {'cond':>8} "
              f"{'t (s)':>8} {'asm (s)':>8} {'LU (s)':>8}")
        rows = []
        for mpw, lv in grid:
            kw = {"p": args.p, "tolerance": 2.0**-lv, "max_panel_wavelengths": mpw,
                  "corner_levels": lv}
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                r = solve(bnd, k, kind, ang, mesh_kw=kw)
            e = rel_err(r.farfield, ref.farfield)
            rows.append({"n": r.n, "err": e, "t": r.total, "mpw": mpw, "lv": lv, "kw": kw})
            print(f"{r.n:6d} {r.n / n_wl:6.1f} {mpw:6.2g} {lv:6d} {e:9.2e} {r.condition:8.1e} "
                  f"{fmt_t(r.total)} {fmt_t(r.times['assemble'])} {fmt_t(r.times['solve'])}",
                  flush=True)
        res = {}
        for tgt in (1e-6, 1e-10):
            r = pick(rows, tgt)
            if r is None:
                res[tgt] = None
                print(f"  {tgt:.0e}: not reached (best {min(x['err'] for x in rows):.1e})")
            else:
                res[tgt] = r
                print(f"  {tgt:.0e}: N = {r['n']} ({r['n'] / n_wl:.1f}/wl) in {r['t']:.2f} s "
                      f"(max_panel_wavelengths={r['mpw']:g}, corner_levels={r['lv']})")
        out[kind] = res
    summary["square"] = out


# --------------------------------------------------------------------------- item 3


def item_low_order(args, summary, circle):
    header(f"3. Classic low-order method on the ka = {args.ka:g} circle (TM, "
           f"{args.low_order_equation} equation)")
    k = args.ka
    ang = np.linspace(0, 360, args.n_angles)
    ref = series_farfield(args.ka, k, "tm", ang, INCIDENT_DEG)
    tgt = args.low_order_target
    ladder = [500, 1000, 2000] if args.quick else [1000, 2000, 4000, 8000]
    ladder = [m for m in ladder if m <= args.low_order_max_m] or [args.low_order_max_m]
    print("flat panels, midpoint collocation, pulse basis, analytic self term, midpoint far field")
    print(f"{'M':>6} {'M/wl':>6} {'error':>9} {'asm (s)':>8} {'LU (s)':>8} {'ff (s)':>8} "
          f"{'total':>8}")
    rows = []

    def run(m):
        res = min((solve_circle_tm(k, 1.0, m, INCIDENT_DEG, ang,
                                   equation=args.low_order_equation)
                   for _ in range(args.repeats if m <= 4000 else 1)),
                  key=lambda r: r.t_total)
        e = rel_err(res.farfield, ref)
        print(f"{m:6d} {m / args.ka:6.1f} {e:9.2e} {fmt_t(res.t_assemble)} {fmt_t(res.t_solve)} "
              f"{fmt_t(res.t_farfield)} {fmt_t(res.t_total)}", flush=True)
        row = {"m": m, "err": e, "t": res.t_total, "ta": res.t_assemble, "ts": res.t_solve,
               "tf": res.t_farfield}
        rows.append(row)
        return row

    for m in ladder:
        if run(m)["err"] <= tgt:
            break
    hit = pick([dict(r, n=r["m"]) for r in rows], tgt)
    extrapolated = False
    if len(rows) >= 2:
        a, b = rows[-2], rows[-1]
        rate = math.log(a["err"] / b["err"]) / math.log(b["m"] / a["m"])
    else:
        rate = 1.0
    print(f"observed convergence order: error ~ M^-{rate:.2f}")
    if hit is None:
        last = rows[-1]
        m_need = int(math.ceil(last["m"] * (last["err"] / tgt) ** (1.0 / rate) / 100.0) * 100)
        if args.low_order_full or m_need <= args.low_order_max_m:
            for _ in range(4):
                row = run(m_need)
                if row["err"] <= tgt:
                    hit = row
                    break
                m_need = int(math.ceil(m_need * (row["err"] / tgt) ** (1.0 / rate) * 1.02 / 100)
                             * 100)
        if hit is None:
            extrapolated = True
            s = m_need / last["m"]
            t_est = last["ta"] * s**2 + last["ts"] * s**3 + last["tf"] * s
            hit = {"m": m_need, "err": tgt, "t": t_est}
            print(f"M for {tgt:.0e} predicted from the fitted order: {m_need} "
                  f"(not run: above --low-order-max-m {args.low_order_max_m}; pass "
                  f"--low-order-full to run it). Time extrapolated with assembly ~ M^2, "
                  f"LU ~ M^3, far field ~ M: {t_est:.1f} s")
    ours = circle["tm"].get(tgt) if circle else None
    ratio = hit["t"] / ours["t"] if ours else float("nan")
    print(f"\nlow order: M = {hit['m']} ({hit['m'] / args.ka:.0f} per wavelength), "
          f"{hit['t']:.2f} s{' (extrapolated)' if extrapolated else ''}")
    if ours:
        print(f"ours     : N = {ours['n']} ({ours['ppw']:.1f} per wavelength), {ours['t']:.3f} s "
              f"(error {ours['err']:.1e})")
        print(f"time ratio low-order / ours at error {tgt:.0e}: {ratio:.0f}x")
    summary["low_order"] = {"m": hit["m"], "t": hit["t"], "extrapolated": extrapolated,
                            "ratio": ratio, "rate": rate, "ours": ours}


# --------------------------------------------------------------------------- items 4 and 5


def _status_kib(field_name: str) -> int:
    with open("/proc/self/status", encoding="ascii") as fh:
        for line in fh:
            if line.startswith(field_name + ":"):
                return int(line.split()[1])
    return -1


def worker(n: int, kind: str, p: int, repeats: int, profile: bool) -> None:
    """Run in a fresh process: time assembly vs LU at exactly ``n`` unknowns; peak memory."""
    if n % p:
        raise SystemExit(f"N = {n} is not a multiple of p = {p}")
    warm_up(p)
    npan = n // p
    # One panel per arc; panels 1.25 wavelengths long (about 13 unknowns per wavelength).
    k = 0.8 * npan
    bnd = BoundaryContour(circle_contour(npan), 0, 2 * math.pi / k)
    mesh = build_panels([bnd], p=p, tolerance=1e-8, max_panel_wavelengths=2.0)
    if mesh.n_nodes != n:
        raise SystemExit(f"meshed to {mesh.n_nodes} unknowns instead of {n}")
    system = boundary_system(mesh, kind, k)
    rss0 = _status_kib("VmRSS")
    best = None
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        a = system.dense_matrix()  # operators and their combination, in one call
        t1 = t2 = t3 = time.perf_counter()
        factorise(a)
        t4 = time.perf_counter()
        del a
        cur = (t1 - t0, t2 - t1, t4 - t3)
        best = cur if best is None or sum(cur) < sum(best) else best
    hwm = _status_kib("VmHWM")
    prof_text = ""
    if profile:
        pr = cProfile.Profile()
        pr.enable()
        system.dense_matrix()
        pr.disable()
        s = io.StringIO()
        pstats.Stats(pr, stream=s).sort_stats("tottime").print_stats(10)
        prof_text = s.getvalue()
    print(json.dumps({"n": n, "kind": kind, "t_assemble": best[0], "t_system": best[1],
                      "t_lu": best[2], "peak_extra_bytes": (hwm - rss0) * 1024,
                      "profile": prof_text}))


def run_worker(n: int, kind: str, args, profile: bool) -> dict:
    cmd = [sys.executable, os.path.abspath(__file__), "--_worker", str(n), kind,
           "--p", str(args.p), "--repeats", str(args.lu_repeats)]
    if profile:
        cmd.append("--profile")
    proc = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise RuntimeError(f"worker N={n} {kind} failed:\n{proc.stderr[-2000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def item_assembly_memory(args, summary):
    header("4./5. Assembly vs LU time and peak memory (fresh process per size; compile excluded)")
    sizes = args.sizes
    print(f"circle with exactly N unknowns (N/p one-panel arcs), p = {args.p}; "
          f"best of {args.lu_repeats} for the times; peak memory = VmHWM - VmRSS before assembly")
    print(f"{'N':>6} {'pol':>4} {'assemble':>9} {'system':>8} {'LU':>8} {'(a+s)/LU':>9} "
          f"{'peak MiB':>9} {'peak/16N^2':>10} {'estimate':>9}")
    rows = []
    for n in sizes:
        for kind in ("tm", "te"):
            prof = args.profile and n == max(sizes) and kind == "te"
            r = run_worker(n, kind, args, prof)
            ratio = (r["t_assemble"] + r["t_system"]) / r["t_lu"]
            per = r["peak_extra_bytes"] / (16.0 * n * n)
            r.update(ratio=ratio, per=per)
            rows.append(r)
            print(f"{n:6d} {kind:>4} {fmt_t(r['t_assemble'])} {r['t_system']:8.3f} "
                  f"{fmt_t(r['t_lu'])} {ratio:9.2f} {r['peak_extra_bytes'] / 2**20:9.0f} "
                  f"{per:10.2f} {MATRICES_IN_FLIGHT:9d}", flush=True)
            if r["profile"]:
                print(f"\ncProfile of assemble_operators, N = {n}, {kind.upper()} (top by own "
                      "time):")
                lines = [ln for ln in r["profile"].splitlines() if ln.strip()]
                start = next(i for i, ln in enumerate(lines) if "ncalls" in ln)
                for ln in lines[start:start + 11]:
                    print("   " + ln[:120])
                print()
    print("'estimate' = MATRICES_IN_FLIGHT, the 16 N^2 multiple check_memory plans for.")

    # Refusal before allocation.
    n_big = 60000
    rss_before = _status_kib("VmRSS")
    hwm_before = _status_kib("VmHWM")
    t0 = time.perf_counter()
    try:
        check_memory(n_big)
        refused, msg = False, "accepted (this machine has more memory than expected)"
    except ProblemTooLargeError as exc:
        refused, msg = True, str(exc)
    dt = time.perf_counter() - t0
    grew = (_status_kib("VmHWM") - hwm_before) * 1024
    print(f"\ncheck_memory({n_big}) on {available_memory_bytes() / 2**30:.1f} GiB available: "
          f"{'refused' if refused else 'ACCEPTED'} in {dt * 1e3:.2f} ms; "
          f"peak RSS grew by {grew / 2**20:.1f} MiB (RSS {rss_before / 2**20:.2f} GiB)")
    print(f"  message: {msg}")
    summary["asm_lu"] = rows
    summary["refusal"] = {"refused": refused, "msg": msg, "grew": grew}


# --------------------------------------------------------------------------- summary


def print_summary(args, s):
    header("SUMMARY (all figures measured in this run)")
    c = s.get("circle")
    if c:
        for kind in ("tm", "te"):
            for tgt in (1e-6, 1e-10):
                r = c[kind].get(tgt)
                txt = (f"{r['ppw']:5.1f} unknowns/wl (N={r['n']}), {r['t']:.3f} s"
                       if r else "not reached")
                goal = ""
                if tgt == 1e-10:
                    goal = ("  goal <= 16/wl: " + ("met" if r and r["ppw"] <= 16 else "NOT met")
                            + (f" ({r['ppw'] / 16:.2f}x the goal)" if r and r["ppw"] > 16 else ""))
                print(f"1 circle ka={args.ka:g} {kind.upper()} {tgt:.0e}: {txt}{goal}")
    q = s.get("square")
    if q:
        for kind in ("tm", "te"):
            for tgt in (1e-6, 1e-10):
                r = q[kind].get(tgt)
                txt = (f"N={r['n']}, {r['t']:.2f} s (corner_levels={r['lv']}, "
                       f"max_panel_wavelengths={r['mpw']:g})" if r else "not reached in the sweep")
                print(f"2 square ka={args.square_ka:g} {kind.upper()} {tgt:.0e}: {txt}")
        print(f"  (reference corner_levels TM {args.square_ref_levels_tm}, TE "
              f"{args.square_ref_levels_te}, "
              f"max_panel_wavelengths={args.square_ref_mpw:g})")
    lo = s.get("low_order")
    if lo:
        tag = " (extrapolated)" if lo["extrapolated"] else ""
        ours = lo["ours"]
        print(f"3 low-order {args.low_order_target:.0e}: M={lo['m']}, {lo['t']:.2f} s{tag}; "
              f"ours N={ours['n'] if ours else '-'} {ours['t'] if ours else float('nan'):.3f} s; "
              f"ratio {lo['ratio']:.0f}x  goal >= 10x: "
              f"{'met' if lo['ratio'] >= 10 else 'NOT met'} (low order converges as M^-"
              f"{lo['rate']:.2f})")
    rows = s.get("asm_lu")
    if rows:
        for r in rows:
            ok = "met" if r["ratio"] <= 0.5 else f"NOT met ({r['ratio'] / 0.5:.1f}x over)"
            print(f"4 assembly/LU N={r['n']} {r['kind'].upper()}: {r['ratio']:.2f}  goal <= 0.5: "
                  f"{ok}")
        for r in rows:
            print(f"5 peak memory N={r['n']} {r['kind'].upper()}: {r['per']:.2f} x 16N^2 "
                  f"(check_memory plans {MATRICES_IN_FLIGHT} x): "
                  f"{'within' if r['per'] <= MATRICES_IN_FLIGHT else 'ABOVE'} estimate")
        ref = s["refusal"]
        print(f"5 N=60000 refused before allocating: {'yes' if ref['refused'] else 'NO'} "
              f"(peak RSS grew {ref['grew'] / 2**20:.1f} MiB)")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="smaller sweeps (about a minute)")
    ap.add_argument("--items", default="1,2,3,4,5", help="comma-separated subset of 1..5")
    ap.add_argument("--p", type=int, default=16, help="Gauss-Legendre nodes per panel")
    ap.add_argument("--ka", type=float, default=50.0, help="circle ka (items 1, 3)")
    ap.add_argument("--square-ka", type=float, default=5.0, help="square ka, a = half side")
    ap.add_argument("--square-ref-levels-tm", type=int, default=40,
                    help="corner_levels of the square's TM reference mesh")
    ap.add_argument("--square-ref-levels-te", type=int, default=26,
                    help="corner_levels of the square's TE reference mesh")
    ap.add_argument("--square-ref-mpw", type=float, default=0.35,
                    help="max_panel_wavelengths of the square's reference mesh")
    ap.add_argument("--n-angles", type=int, default=721)
    ap.add_argument("--repeats", type=int, default=3, help="best-of for timed solves")
    ap.add_argument("--lu-repeats", type=int, default=2, help="best-of in items 4/5")
    ap.add_argument("--sizes", type=lambda s: [int(x) for x in s.split(",")],
                    default=[2000, 4000], help="N for items 4/5, e.g. 2000,4000")
    ap.add_argument("--low-order-target", type=float, default=1e-4)
    ap.add_argument("--low-order-max-m", type=int, default=8000,
                    help="largest M the low-order method is run at (else extrapolated)")
    ap.add_argument("--low-order-full", action="store_true",
                    help="run the low-order method at the predicted M whatever its size")
    ap.add_argument("--low-order-equation", choices=["single", "combined"], default="single")
    ap.add_argument("--profile", action="store_true",
                    help="cProfile assemble_operators at the largest size (TE)")
    ap.add_argument("--_worker", nargs=2, metavar=("N", "KIND"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args._worker:
        worker(int(args._worker[0]), args._worker[1], args.p, args.repeats, args.profile)
        return
    if args.quick:
        args.repeats = min(args.repeats, 2)
        args.lu_repeats = 1
        args.sizes = [s for s in args.sizes if s <= 2000] or [2000]
        args.square_ref_levels_tm = min(args.square_ref_levels_tm, 36)
        args.square_ref_levels_te = min(args.square_ref_levels_te, 24)
        args.square_ref_mpw = max(args.square_ref_mpw, 0.5)
    items = {int(x) for x in args.items.split(",") if x.strip()}
    t_start = time.perf_counter()
    print(f"sectionwave solver benchmarks; {os.cpu_count()} cores, "
          f"{available_memory_bytes() / 2**30:.1f} GiB available; numpy {np.__version__}; "
          f"load average {os.getloadavg()[0]:.2f} (times are wall clock: other load skews them)")
    warm_up(args.p)
    summary: dict = {}
    circle = item_circle(args, summary) if (1 in items or 3 in items) else None
    if 2 in items:
        item_square(args, summary)
    if 3 in items:
        item_low_order(args, summary, circle)
    if 4 in items or 5 in items:
        item_assembly_memory(args, summary)
    print_summary(args, summary)
    print(f"\nwall time {time.perf_counter() - t_start:.0f} s; load average now "
          f"{os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
