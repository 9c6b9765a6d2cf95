"""Compiled J0, Y0, J1, Y1 (engine.bessel) against tables, identities, mpmath and scipy."""

from __future__ import annotations

import math
import os
import subprocess
import sys
import textwrap

import mpmath as mp
import numpy as np
import pytest
import scipy.special as sp
from sectionwave.engine import bessel

FUNCS = {"j0": bessel.j0, "y0": bessel.y0, "j1": bessel.j1, "y1": bessel.y1}
SCIPY = {"j0": sp.j0, "y0": sp.y0, "j1": sp.j1, "y1": sp.y1}
MPMATH = {
    "j0": lambda x: mp.besselj(0, x),
    "y0": lambda x: mp.bessely(0, x),
    "j1": lambda x: mp.besselj(1, x),
    "y1": lambda x: mp.bessely(1, x),
}


def _scale(x: np.ndarray, ref: np.ndarray) -> np.ndarray:
    """Relative error where |f| is large, absolute (against the envelope) near zeros.

    The envelope is 1 below x = 10 and sqrt(2 / (pi x)) above (DLMF 10.17.3).
    """
    env = np.where(x < 10.0, 1.0, np.sqrt(2.0 / (np.pi * x)))
    return np.maximum(np.abs(ref), env)


def _grid() -> np.ndarray:
    eps = np.finfo(float).eps
    parts = [
        np.geomspace(1e-300, 1e-5, 200),  # near 0 (and the J0 short cut at 1e-5)
        np.geomspace(1e-5, 1e4, 20001),
        np.linspace(4.99, 5.01, 401),  # switch from the rational forms to Hankel's form
        np.linspace(9.99, 10.01, 401),  # switch to sine and cosine of x itself
        np.linspace(5.99, 6.01, 101),  # kernels.HANKEL_SPLIT
        np.array([1e-5, 5.0, 10.0]) * (1 + eps * np.array([-2, -1, 0, 1, 2])[:, None]),
        np.linspace(9990.0, 1e4, 101),
    ]
    return np.unique(np.concatenate([p.ravel() for p in parts]))


@pytest.mark.parametrize("name", ["j0", "y0", "j1", "y1"])
def test_against_scipy_over_the_whole_range(name):
    # scipy.special runs the same Cephes algorithms (Moshier): below x = 10
    # the two agree to rounding. Above, scipy (1.17) forms x - pi/4 in
    # floating point, which costs it up to about eps * x in the phase, so the
    # allowance grows with x there; mpmath checks the large arguments below.
    x = _grid()
    ours = np.array([FUNCS[name](v) for v in x])
    ref = SCIPY[name](x)
    err = np.abs(ours - ref) / _scale(x, ref)
    tol = 2e-15 + np.where(x < 10.0, 0.0, 2.5e-16 * x)
    assert np.all(err <= tol), (name, x[np.argmax(err / tol)], err.max())
    small = x < 10.0
    assert err[small].max() < 2e-15


@pytest.mark.parametrize("name", ["j0", "y0", "j1", "y1"])
def test_against_mpmath_to_rounding(name):
    # 30-digit mpmath values; Cephes states peak errors 4.2e-16 (J0),
    # 1.3e-15 (Y0), 2.6e-16 (J1), 1.0e-15 (Y1) absolute on [0, 30].
    mp.mp.dps = 30
    rng = np.random.default_rng(7)
    x = np.concatenate([
        np.exp(rng.uniform(np.log(1e-8), np.log(1e4), 300)),
        [4.999999, 5.0, 5.000001, 9.999999, 10.0, 10.000001, 1e4],
    ])
    ours = np.array([FUNCS[name](v) for v in x])
    ref = np.array([float(MPMATH[name](mp.mpf(float(v)))) for v in x])
    err = np.abs(ours - ref) / _scale(x, ref)
    assert err.max() < 2e-15, (name, x[np.argmax(err)], err.max())


def test_table_values():
    # Abramowitz & Stegun table 9.1 (10 digits, from memory; they agree
    # with mpmath).
    table = {
        1.0: (0.7651976866, 0.0882569642, 0.4400505857, -0.7812128213),
        2.0: (0.2238907791, 0.5103756726, 0.5767248078, -0.1070324315),
        5.0: (-0.1775967713, -0.3085176252, -0.3275791376, 0.1478631434),
        10.0: (-0.2459357645, 0.0556711673, 0.0434727462, 0.2490154242),
    }
    for x, (a0, b0, a1, b1) in table.items():
        assert bessel.j0(x) == pytest.approx(a0, abs=6e-11)
        assert bessel.y0(x) == pytest.approx(b0, abs=6e-11)
        assert bessel.j1(x) == pytest.approx(a1, abs=6e-11)
        assert bessel.y1(x) == pytest.approx(b1, abs=6e-11)
        assert bessel.jy01(x) == pytest.approx((a0, b0, a1, b1), abs=6e-11)


def test_zeros():
    # DLMF table 10.21.1 (zeros j_{0,1}, j_{0,2}, j_{1,1}, y_{0,1}, y_{0,2},
    # y_{1,1}; 15 digits, from memory, agreeing with mpmath's besseljzero).
    for f, z in [
        (bessel.j0, 2.404825557695773), (bessel.j0, 5.520078110286311),
        (bessel.j1, 3.831705970207512), (bessel.y0, 0.8935769662791675),
        (bessel.y0, 3.957678419314858), (bessel.y1, 2.197141326031017),
    ]:
        assert abs(f(z)) < 2e-15


def test_wronskian_identity():
    # J1(x) Y0(x) - J0(x) Y1(x) = 2 / (pi x)   (DLMF 10.5.2, exact).
    x = np.geomspace(1e-3, 1e4, 2001)
    w = np.array([bessel.j1(v) * bessel.y0(v) - bessel.j0(v) * bessel.y1(v) for v in x])
    exact = 2.0 / (np.pi * x)
    # Each product is of size |J| |Y| ~ 2 / (pi x) far out and at most
    # |Y1| ~ 2 / (pi x) near 0, so the check is relative.
    assert np.max(np.abs(w - exact) / exact) < 4e-15


def test_small_argument_limits():
    # DLMF 10.7.1-10.7.4 (leading terms, exact as x -> 0).
    for x in (1e-12, 1e-9):
        assert bessel.j0(x) == 1.0
        assert bessel.j1(x) == pytest.approx(0.5 * x, rel=1e-15)
        assert bessel.y0(x) == pytest.approx(2 / math.pi * (math.log(x / 2) + 0.5772156649015329), rel=1e-15)
        assert bessel.y1(x) == pytest.approx(-2 / (math.pi * x), rel=1e-15)


def test_symmetry_and_special_points():
    # J0 even, J1 odd (DLMF 10.4.1); Y singular at 0 and not real for x < 0.
    for x in (0.3, 4.0, 7.5, 123.0):
        assert bessel.j0(-x) == bessel.j0(x)
        assert bessel.j1(-x) == -bessel.j1(x)
    assert bessel.j0(0.0) == 1.0 and bessel.j1(0.0) == 0.0
    assert bessel.y0(0.0) == -math.inf and bessel.y1(0.0) == -math.inf
    assert math.isnan(bessel.y0(-1.0)) and math.isnan(bessel.y1(-1.0))


def test_combined_and_array_forms_agree_with_the_scalar_ones():
    x = _grid()
    x = x[x > 1e-200]
    four = bessel.jy01_array(x)
    scalar = np.array([[f(v) for v in x] for f in FUNCS.values()])
    err = np.abs(four - scalar) / _scale(x, scalar)
    assert err.max() < 1e-15
    a, b = bessel.j0j1_array(x.reshape(-1, 1)[:100])
    assert a.shape == (100, 1) and np.array_equal(a.ravel(), scalar[0, :100])
    assert np.array_equal(b.ravel(), scalar[2, :100])
    # the parallel branch
    big = np.linspace(0.0, 50.0, bessel.PARALLEL_MIN + 1)
    a, b = bessel.j0j1_array(big)
    assert np.array_equal(a, [bessel.j0(v) for v in big])
    assert np.array_equal(b, [bessel.j1(v) for v in big])


def test_a_new_process_loads_the_compiled_loops_from_the_cache():
    # Nothing compiled for real wavenumbers holds a process-specific address,
    # so a second process finds every loop in numba's disk cache.
    code = textwrap.dedent("""
        import numpy as np
        from sectionwave.engine import parse_case, solve_problem
        from sectionwave.engine import _kernel_loops, _nearfield_loops, bessel, operators, system
        case = parse_case({
            "wave": {"field": "te", "frequency_hz": 3e8},
            "body": [{"name": "c", "shape": {"kind": "circle", "radius_m": 0.2}, "boundary": "pec"}],
            "incident": [{"kind": "plane", "from_deg": [0]}],
            "solver": {"tolerance": 1e-6},
            "near_field": {"x_m": [-0.25, 0.25], "y_m": [-0.25, 0.25], "count": [41, 41]},
        })
        solve_problem(case.problem)
        loops = [_kernel_loops.matrices, _nearfield_loops.far_sum, _nearfield_loops.panel_kernels,
                 bessel._j0j1_loop, operators._normal_term(), system._combine()]
        print(sum(len(d.stats.cache_misses) for d in loops), min(len(d.stats.cache_hits) for d in loops))
    """)
    env = dict(os.environ)
    for _ in range(2):  # the first run may compile and fill the cache
        proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=300)
        assert proc.returncode == 0, proc.stderr
    misses, hits = map(int, proc.stdout.split())
    assert misses == 0 and hits >= 1  # every loop was loaded, none compiled
