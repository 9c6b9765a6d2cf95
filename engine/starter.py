"""The commented starter case that ``sectionwave new CASE.toml`` writes.

It runs as written (a 10 cm PEC square at 9.4 GHz, TM, four incidences, in
a few seconds) and shows every table a first case needs, with the other
keys in comments; ``tests/test_cli.py`` runs it.
"""

from __future__ import annotations

__all__ = ["STARTER_CASE"]

STARTER_CASE = '''\
# A sectionwave case: 2D scattering by a long uniform body whose cross-section is
# drawn below (or read from a DXF/SVG drawing). Run it with
#     sectionwave run THIS_FILE.toml
# Numbers are SI (Hz, m, deg); text with units works too: "9.4 GHz", "25 mm", "30 deg".

title = "10 cm square at 9.4 GHz"

[wave]
field = "tm"                  # "tm" (E along the body), "te" (H along the body) or "acoustic"
frequency = "9.4 GHz"         # or frequency_hz = 9.4e9, a list [8e9, 9.4e9], or
                              # { start = 8e9, stop = 12e9, count = 5 }
# sound_speed_m_s = 343.0     # acoustic only (and density_kg_m3 = 1.204)

# [geometry]                  # bodies from a drawing instead of inline shapes:
# file = "part.dxf"           # relative to this file's folder
# units = "mm"                # when the drawing does not say (check with: sectionwave inspect part.dxf)

[[body]]
name = "square"
shape = { kind = "rectangle", width_m = "10 cm", height_m = "10 cm" }
# shape kinds: circle (radius_m), ellipse (semi_axes_m), rectangle (width_m, height_m,
# corner_radius_m), polygon (points_m); or layer = "HULL" / point_m = [x, y] from the drawing
boundary = "pec"              # "pec", "impedance" (impedance = ...), "penetrable" (material = ...);
                              # sound: "soft", "hard", "impedance", "penetrable"

[[incident]]
kind = "plane"
name = "plane"
from_deg = [0, 15, 30, 45]    # directions the plane waves come from (deg, from +x, counter-clockwise)

[far_field]
angles_deg = { start = 0, stop = 360, count = 361 }

# [near_field]                # field maps and probes (optional)
# x_m = [-0.2, 0.2]
# y_m = [-0.2, 0.2]
# spacing_m = "5 mm"

[solver]
tolerance = 1e-6              # relative accuracy target of the far field (1e-14 .. 1e-2)

[output]
plots = true                  # PNG plots
vtk = true                    # ParaView files
surface_csv = true            # surface.csv: one row per boundary node and incidence (the bulkiest file)
vtk_per_incidence = true      # one boundary .vtu per incidence (false: one per frequency)

# [run]
# accept_warnings = true      # exit 0 instead of 3 when the run ends with numerical warnings
'''
