"""Radar and sonar products: finite-length estimates, where the echo comes from, the field in words.

Sources: sigma_3D = 2 L^2 sigma_2D / lambda for a long straight body seen
broadside (Knott, Shaeffer and Tuley, Radar Cross Section, 2nd ed.); the
broadside target strength of a rigid finite cylinder TS = 10 log10(a L^2 /
(2 lambda)) dB re 1 m (Urick, Principles of Underwater Sound), the
geometric-optics limit reached at large ka.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from sectionwave.engine.cli import main
from sectionwave.engine.export import read_csv

CASE = """
title = "finite length"
[wave]
field = "FIELD"
frequency_hz = FREQ
[[body]]
name = "pipe"
shape = { kind = "circle", radius_m = RADIUS }
boundary = "BOUNDARY"
[[incident]]
kind = "plane"
from_deg = [0, 90]
[far_field]
angles_deg = [0, 180]
length_m = LENGTH
[output]
plots = false
vtk = false
surface_csv = false
"""


def _run_case(tmp_path, text, name="c"):
    """Write the case ``text``, run it (exit 0 expected) and return its results folder."""
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    out = tmp_path / f"{name}-out"
    assert main(["run", str(path), "--out", str(out), "--quiet"]) == 0
    return out


def _run(tmp_path, **values):
    text = CASE
    for key, val in values.items():
        text = text.replace(key, str(val))
    out = _run_case(tmp_path, text)
    return read_csv(out / "monostatic.csv"), json.loads((out / "summary.json").read_text()), out


def test_rigid_cylinder_target_strength_matches_urick(tmp_path):
    a, length, c = 0.5, 20.0, 1500.0
    ka = 60.0
    freq = ka * c / (2 * math.pi * a)
    doc = CASE.replace('field = "FIELD"', 'field = "acoustic"\nsound_speed_m_s = 1500.0\ndensity_kg_m3 = 1000.0')
    text = doc.replace("FREQ", repr(freq)).replace("RADIUS", str(a))
    out = _run_case(tmp_path, text.replace("BOUNDARY", "hard").replace("LENGTH", str(length)))
    table = read_csv(out / "monostatic.csv")
    lam = c / freq
    urick = 10 * math.log10(a * length**2 / (2 * lam))
    # measured 0.0009 dB at ka = 60 (the exact backscatter of a rigid cylinder tends to pi a)
    assert np.all(np.abs(table["target_strength_db"] - urick) < 0.01), (table["target_strength_db"], urick)
    assert "rcs_dbsm" not in table


def test_rcs_columns_are_the_broadside_formula(tmp_path):
    table, summary, out = _run(tmp_path, FIELD="tm", FREQ=3e9, RADIUS=0.05, BOUNDARY="pec", LENGTH=4.0)
    lam = 299_792_458.0 / 3e9
    assert np.allclose(table["rcs_m2"], 2 * 4.0**2 * table["echo_width_m"] / lam, rtol=1e-12)
    assert np.allclose(table["rcs_dbsm"], 10 * np.log10(table["rcs_m2"]), atol=1e-9)
    assert summary["finite_length"]["length_m"] == 4.0
    assert summary["inputs"]["field_description"].startswith("TM: electric field along the body's axis")
    readme = (out / "README.txt").read_text()
    assert "electric field along the body's axis" in readme and "rcs_dbsm" in readme


HOT = """
title = "hot spots"
[wave]
field = "tm"
frequency_hz = 3e9
[[body]]
name = "front"
shape = { kind = "circle", radius_m = 0.2, center_m = [0.5, 0.0] }
boundary = "pec"
[[body]]
name = "back"
shape = { kind = "rectangle", width_m = 0.05, height_m = 0.05, center_m = [-0.5, 0.0] }
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 90]
[output]
plots = false
vtk = false
"""


def test_backscatter_contributions_sum_to_the_monostatic_far_field(tmp_path):
    """Exact identity: the far-field representation summed over the boundary is the far field."""
    out = _run_case(tmp_path, HOT, "hot")
    surface = read_csv(out / "surface.csv")
    mono = read_csv(out / "monostatic.csv")
    summary = json.loads((out / "summary.json").read_text())
    shares = summary["frequencies"][0]["backscatter_shares"]
    for row, name in enumerate(mono["incident"]):
        pick = (surface["incident"] == name) & (surface["from_deg"] == mono["from_deg"][row])
        dens = surface["backscatter_re_sqrt_m_per_m"][pick] + 1j * surface["backscatter_im_sqrt_m_per_m"][pick]
        total = np.sum(dens * surface["arc_weight_m"][pick])
        f = mono["farfield_re_sqrt_m"][row] + 1j * mono["farfield_im_sqrt_m"][row]
        # the surface files hold the density rebuilt next to the square's corners: a finer
        # quadrature of the same integral
        assert abs(total - f) < 1e-8 * abs(f)
        entry = next(e for e in shares if e["from_deg"] == mono["from_deg"][row])
        assert abs(sum(entry["shares"].values()) - 1.0) < 1e-9
    # seen from 0 deg (+x) the large circle in front returns most of the echo
    front = next(e for e in shares if e["from_deg"] == 0.0)["shares"]["front"]
    assert front > 0.8


RODS = """
title = "two rods"
[wave]
field = "tm"
frequency_hz = { start = 8e9, stop = 12e9, count = 41 }
[[body]]
name = "near_rod"
shape = { kind = "circle", radius_m = 0.002, center_m = [0.15, 0.0] }
boundary = "pec"
[[body]]
name = "far_rod"
shape = { kind = "circle", radius_m = 0.002, center_m = [-0.15, 0.0] }
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 30]
[far_field]
angles_deg = [0]
[range_profile]
window = "WINDOW"
[output]
plots = false
vtk = false
surface_csv = false
"""


def _peaks(ranges, mag, count):
    """The ``count`` largest local maxima, farther apart than three samples."""
    inner = np.flatnonzero((mag[1:-1] > mag[:-2]) & (mag[1:-1] >= mag[2:])) + 1
    best = []
    for i in inner[np.argsort(mag[inner])[::-1]]:
        if all(abs(i - j) > 3 for j in best):
            best.append(i)
        if len(best) == count:
            break
    return sorted(ranges[best])


def test_two_rods_sit_at_their_ranges(tmp_path):
    """Peaks at R = -p . (cos phi, sin phi) within one range bin; resolution c / (2 B) (standard radar practice)."""
    for window in ("hann", "taylor"):
        out = _run_case(tmp_path, RODS.replace("WINDOW", window), f"rods_{window}")
        table = read_csv(out / "range_profile.csv")
        summary = json.loads((out / "summary.json").read_text())["range_profile"]
        c = 299_792_458.0
        assert summary["resolution_m"] == pytest.approx(c / (2 * 4e9))
        assert summary["unambiguous_m"] == pytest.approx(c / (2 * 1e8))
        for phi in (0.0, 30.0):
            pick = table["from_deg"] == phi
            look = np.array([math.cos(math.radians(phi)), math.sin(math.radians(phi))])
            expected = sorted(-np.array([[0.15, 0.0], [-0.15, 0.0]]) @ look)
            got = _peaks(table["range_m"][pick], table["magnitude"][pick], 2)
            assert np.allclose(got, expected, atol=summary["resolution_m"]), (window, phi, got, expected)


def test_range_profile_needs_a_sweep(tmp_path):
    path = tmp_path / "one.toml"
    path.write_text(RODS.replace("WINDOW", "hann").replace(
        "frequency_hz = { start = 8e9, stop = 12e9, count = 41 }", "frequency_hz = 9e9"))
    code = main(["run", str(path), "--out", str(tmp_path / "o")])
    assert code == 2


THREE = """
title = "three rods"
[wave]
field = "tm"
frequency_hz = { start = 8e9, stop = 12e9, count = 21 }
[[body]]
name = "a"
shape = { kind = "circle", radius_m = 0.002, center_m = [0.10, 0.05] }
boundary = "pec"
[[body]]
name = "b"
shape = { kind = "circle", radius_m = 0.002, center_m = [-0.08, -0.10] }
boundary = "pec"
[[body]]
name = "c"
shape = { kind = "circle", radius_m = 0.002, center_m = [0.0, 0.12] }
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = { start = -20, stop = 20, count = 21 }
[far_field]
angles_deg = [0]
[image]
x_m = [-0.2, 0.2]
y_m = [-0.2, 0.2]
spacing_m = 0.004
[output]
plots = false
vtk = true
surface_csv = false
"""


def test_image_of_three_rods(tmp_path):
    """The three brightest separated peaks lie on the rods within half a resolution cell (back-projection)."""
    out = _run_case(tmp_path, THREE, "three")
    table = read_csv(out / "image.csv")
    summary = json.loads((out / "summary.json").read_text())["image"]
    c = 299_792_458.0
    assert summary["down_range_resolution_m"] == pytest.approx(c / (2 * 4e9))
    cell = max(summary["down_range_resolution_m"], summary["cross_range_resolution_m"])
    mag, x, y = table["magnitude"], table["x_m"], table["y_m"]
    rods = np.array([[0.10, 0.05], [-0.08, -0.10], [0.0, 0.12]])
    found: list[np.ndarray] = []
    for i in np.argsort(mag)[::-1]:
        p = np.array([x[i], y[i]])
        if all(np.hypot(*(p - q)) > cell for q in found):
            found.append(p)
        if len(found) == 3:
            break
    for p in found:
        assert np.min(np.hypot(*(rods - p).T)) < 0.5 * cell, (p, cell)
    assert (out / "image.vtu").exists()


def test_plots_of_the_products(tmp_path):
    text = HOT.replace("plots = false", "plots = true").replace(
        "[output]", "[far_field]\nangles_deg = [0, 90]\nlength_m = 3.0\n[output]").replace(
        "from_deg = [0, 90]", "from_deg = { start = 0, stop = 90, count = 4 }")
    out = _run_case(tmp_path, text, "hot")
    for name in ("rcs.png", "backscatter_map.png", "monostatic.png"):
        assert (out / name).stat().st_size > 1000, name
