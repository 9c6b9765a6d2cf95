"""Case files (TOML): the face that turns a case into a problem and output options.

Glossary
--------
case
    One TOML document; every key is checked, unknown keys are errors. It
    becomes a ``Case``: the physics ``Problem`` the engine solves (bodies
    with their boundary conditions, the wave, incident waves, far-field
    angles, near-field requests and solver settings, all in SI units) and
    the ``OutputOptions`` (what to write, the title, the drawing audit),
    which the engine never sees.
number, list or range
    Frequencies and angles accept ``9.4e9``, ``[1e9, 2e9]`` or
    ``{ start = 0, stop = 360, count = 73 }`` (both ends included).
number with units
    Any key ending in a unit (``_hz``, ``_m``, ``_deg``, ``_m_s``,
    ``_kg_m3``, ``_s_m``) also takes text with units, read by pint:
    ``"9.4 GHz"``, ``"25 mm"``; ``frequency`` is ``frequency_hz`` written so.
unknown key
    Refused, naming the key, its near match and every key the table allows.

The schema (keys may be added, never renamed)::

    title = "..."
    [wave]        field = "tm" | "te" | "acoustic" (or ["tm", "te"]: both, same body), frequency_hz = ...
                  (or frequency = "9.4 GHz", or an adaptive band: { start =, stop =, adaptive_db =,
                  fit_points = 1000 }),
                  sound_speed_m_s = 343.0, density_kg_m3 = 1.204 (acoustic)
    [geometry]    file = "part.dxf", units = "mm", gap_tol_m = ...
    [materials.NAME]  eps_r, mu_r (number or [re, im]), loss_tangent, conductivity_s_m;
                  sound_speed_m_s (number or [re, im]), density_kg_m3,
                  attenuation_db_per_wavelength (built-in names: engine.materials)
    [[body]]      name, shape = {kind = ...} | layer = "NAME" | point_m = [x, y],
                  boundary = "pec" | "soft" | "hard" | "impedance" | "penetrable",
                  impedance = number or [re, im] (normalised to the medium),
                  material = "NAME" or the material keys inline (penetrable)
    [[incident]]  kind = "plane", from_deg = ...  |  kind = "line", position_m = [x, y]
    [far_field]   angles_deg = ...
    [near_field]  x_m = [min, max], y_m = [min, max], spacing_m = ... | count = [nx, ny],
                  probes_csv = "probes.csv", from_deg = ... (plane waves to map;
                  default all incident waves)
    [solver]      tolerance = 1e-8, nodes_per_panel = 16, max_panel_wavelengths = auto,
                  max_refinements = 10, corners = "compressed" | "graded",
                  method = "auto" | "dense" | "fast"
    [output]      time_convention = "engineering" | "physics", plots = true, vtk = true,
                  surface_csv = true, vtk_per_incidence = true, plot_frequencies_hz = ...,
                  plot_from_deg = ..., field_map = "abs" | "db" | "real"
    [run]         accept_warnings = false (exit 0, not 3, after numerical warnings)
"""

from __future__ import annotations

import difflib
import fnmatch
import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import tomllib
from numpy.typing import NDArray
from sectionwave.importers.curves import (
    CONTAINS_SAMPLES,
    Body,
    Contour,
    EllipticalArc,
    Line,
    circular_arc,
    polygon_segments,
)
from sectionwave.importers.errors import SectionwaveError

from .adaptive_frequency import AdaptiveBand
from .conventions import TIME_CONVENTIONS, TimeConvention
from .export.options import OutputOptions
from .problem import (
    BOUNDARIES,
    DENSITY_AIR_KG_M3,
    FIELDS,
    SOUND_SPEED_AIR_M_S,
    SPEED_OF_LIGHT_M_S,
    BoundaryKind,
    FieldKind,
    IncidentWave,
    Material,
    Medium,
    NearFieldRequest,
    Problem,
    ProblemError,
    Scatterer,
    SolverOptions,
)
from .products import WINDOWS, ImageRequest, RangeProfileRequest, Window, uniform_step

__all__ = ["Case", "CaseError", "load_case", "parse_case", "refuse_absurd", "to_si"]


class CaseError(SectionwaveError, ValueError):
    """A case file is malformed; the message names the file, the key and what is allowed."""


@dataclass(frozen=True)
class Case:
    """A validated case: the physics problem for the engine and what to write.

    ``adaptive`` is the band of ``frequency_hz = { start, stop, adaptive_db }``
    (None for listed frequencies); the problem's frequencies are then the
    band's first, equally spaced ones. ``fields`` lists the fields of
    ``field = ["tm", "te"]`` (empty for one field); the problem is set up for
    the first, and the others are the same problem with another field.
    """

    problem: Problem
    output: OutputOptions
    adaptive: AdaptiveBand | None = None
    fields: tuple[FieldKind, ...] = ()


#: Largest fitted_sweep.csv an adaptive band may ask for (rows).
MAX_FITTED_ROWS = 2_000_000

MATERIAL_KEYS = (
    "eps_r", "mu_r", "loss_tangent", "conductivity_s_m",
    "sound_speed_m_s", "density_kg_m3", "attenuation_db_per_wavelength",
)
#: Most values a {start, stop, count} range may ask for.
MAX_RANGE_COUNT = 1_000_000
#: Every key each table allows (for the "known keys" list of an error).
KNOWN_KEYS: dict[str, tuple[str, ...]] = {
    "": ("title", "wave", "geometry", "materials", "body", "incident", "far_field", "near_field", "solver",
         "output", "run", "range_profile", "image"),
    "range_profile": ("window", "sidelobe_db", "padding"),
    "image": ("x_m", "y_m", "spacing_m", "count", "window", "sidelobe_db", "dynamic_range_db"),
    "wave": ("field", "frequency_hz", "frequency", "sound_speed_m_s", "density_kg_m3"),
    "geometry": ("file", "units", "gap_tol_m"),
    "body": ("name", "shape", "layer", "point_m", "boundary", "impedance", "material", *MATERIAL_KEYS),
    "far_field": ("angles_deg", "length_m"),
    "near_field": ("x_m", "y_m", "spacing_m", "count", "probes_csv", "from_deg"),
    "solver": ("tolerance", "nodes_per_panel", "max_panel_wavelengths", "max_refinements", "corners", "method"),
    "output": ("time_convention", "plots", "vtk", "surface_csv", "vtk_per_incidence", "plot_frequencies_hz",
               "plot_from_deg", "field_map"),
    "run": ("accept_warnings",),
    "incident": ("kind", "name", "from_deg", "position_m"),
    "materials": MATERIAL_KEYS,
}
SHAPE_KEYS: dict[str, tuple[str, ...]] = {
    "circle": ("kind", "radius_m", "center_m"),
    "ellipse": ("kind", "semi_axes_m", "center_m", "rotation_deg"),
    "rectangle": ("kind", "width_m", "height_m", "center_m", "rotation_deg", "corner_radius_m"),
    "polygon": ("kind", "points_m", "center_m", "rotation_deg"),
}


#: SI unit of a key, from the end of its name (longest first); ``frequency`` is ``frequency_hz`` with units.
_KEY_UNITS: tuple[tuple[str, str, str], ...] = (
    ("_kg_m3", "kg/m**3", "a density"),
    ("_m_s", "m/s", "a speed"),
    ("_s_m", "S/m", "a conductivity"),
    ("_hz", "Hz", "a frequency"),
    ("_deg", "degree", "an angle"),
    ("_m", "m", "a length"),
    ("frequency", "Hz", "a frequency"),
)
_UNIT_REGISTRY: Any = None


def _registry() -> Any:
    global _UNIT_REGISTRY
    if _UNIT_REGISTRY is None:
        import pint

        _UNIT_REGISTRY = pint.UnitRegistry(cache_folder=None)
    return _UNIT_REGISTRY


def to_si(text: str, key: str) -> float:
    """A number with units written as text (``"9.4 GHz"``, ``"25 mm"``) in the SI unit of ``key``.

    The unit follows from the end of the key's name (``_hz``, ``_m``,
    ``_deg``, ``_m_s``, ``_kg_m3``, ``_s_m``); the text is read by pint.

    Raises
    ------
    ValueError
        If the key takes no units, the text is not a quantity, its units
        do not fit the key, or its value is not finite.

    Examples
    --------
    >>> to_si("9.4 GHz", "frequency_hz")
    9400000000.0
    >>> to_si("25 mm", "radius_m")
    0.025
    """
    spec = next((u for u in _KEY_UNITS if key.endswith(u[0])), None)
    if spec is None:
        raise ValueError(f"must be a finite number, got {text!r}")
    _, unit, what = spec
    if len(text) > 100:
        raise ValueError(f"must be a number or {what} with units such as \"{_EXAMPLE[unit]}\", got a text of {len(text)} characters")
    ureg = _registry()
    try:
        quantity = ureg.Quantity(text.strip())
        if not isinstance(quantity, ureg.Quantity) or quantity.unitless:
            raise ValueError("no units")
        value = float(quantity.to(unit).magnitude)
    except Exception:  # noqa: BLE001 - pint raises many kinds for text it cannot read; all mean the same here
        raise ValueError(
            f"must be a finite number (in {unit.replace('**', '^')}) or {what} with units such as \"{_EXAMPLE[unit]}\", got {text!r}"
        ) from None
    if not math.isfinite(value):
        raise ValueError(f"must be finite, got {text!r}")
    return value


_EXAMPLE = {"Hz": "9.4 GHz", "m": "25 mm", "degree": "30 deg", "m/s": "1480 m/s",
            "kg/m**3": "1000 kg/m^3", "S/m": "5.8e7 S/m"}
_ALL_SHAPE_KEYS = tuple(sorted({k for keys in SHAPE_KEYS.values() for k in keys}))


class _Reader:
    """Typed access to one TOML table, with errors that name file and key."""

    def __init__(self, source: str, table: Mapping[str, Any], where: str, known: tuple[str, ...] = ()) -> None:
        self.source, self.table, self.where = source, table, where
        self.used: set[str] = set()
        if known:
            # unknown keys first: a misspelt key is named, not reported as a missing one
            self.finish(known)

    def fail(self, key: str, message: str) -> CaseError:
        place = f"{self.where}.{key}" if self.where else key
        return CaseError(f"{self.source}: [{place}] {message}")

    def get(self, key: str, default: Any = None) -> Any:
        self.used.add(key)
        return self.table.get(key, default)

    def has(self, key: str) -> bool:
        return key in self.table

    def number(self, key: str, default: float | None = None, *, positive: bool = False) -> float:
        value = self.get(key, default)
        if value is None:
            raise self.fail(key, "is required (a number)")
        value = self._with_units(key, value)
        if not _is_finite_number(value):
            raise self.fail(key, f"must be a finite number, got {value!r}")
        if positive and value <= 0:
            raise self.fail(key, f"must be positive, got {value!r}")
        return float(value)

    def text(self, key: str, default: str | None = None, choices: tuple[str, ...] = ()) -> str:
        value = self.get(key, default)
        if value is None:
            raise self.fail(key, "is required (a string)" + (f": one of {', '.join(choices)}" if choices else ""))
        if not isinstance(value, str):
            raise self.fail(key, f"must be a string, got {value!r}")
        if choices and value not in choices:
            raise self.fail(key, f"is {value!r}; allowed: {', '.join(choices)}")
        return value

    def point(self, key: str, default: Any = None) -> tuple[float, float]:
        value = self.get(key, default)
        if isinstance(value, list | tuple):
            value = [self._with_units(key, v) for v in value]
        if (
            not isinstance(value, list | tuple)
            or len(value) != 2
            or not all(_is_finite_number(v) for v in value)
        ):
            raise self.fail(key, f"must be a pair of finite numbers [x, y] in metres, got {value!r}")
        return float(value[0]), float(value[1])

    def values(self, key: str, *, positive: bool = False) -> tuple[float, ...]:
        """A number, a list of numbers, or {start, stop, count}."""
        value = self.get(key)
        if value is None:
            raise self.fail(key, "is required: a number, a list, or {start =, stop =, count =}")
        if isinstance(value, Mapping):
            if set(value) != {"start", "stop", "count"}:
                raise self.fail(key, f"a range needs exactly start, stop and count, got {sorted(value)}")
            count = value["count"]
            if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= MAX_RANGE_COUNT:
                raise self.fail(key, f"count must be an integer from 1 to {MAX_RANGE_COUNT}, got {count!r}")
            start, stop = self._with_units(key, value["start"]), self._with_units(key, value["stop"])
            for v in (start, stop):
                if not _is_finite_number(v):
                    raise self.fail(key, f"start and stop must be finite numbers, got {v!r}")
            out = tuple(float(v) for v in np.linspace(float(start), float(stop), count))
        elif isinstance(value, list):
            if not value:
                raise self.fail(key, "is an empty list")
            out = tuple(self._scalar(key, v) for v in value)
        else:
            out = (self._scalar(key, value),)
        if positive and any(v <= 0 for v in out):
            raise self.fail(key, f"values must be positive, got {value!r}")
        return out

    def _with_units(self, key: str, value: Any, lead: str = "") -> Any:
        """A number given as text with units (``"9.4 GHz"``) in the key's SI unit; other values unchanged."""
        if not isinstance(value, str):
            return value
        try:
            return to_si(value, key)
        except ValueError as exc:
            raise self.fail(key, lead + str(exc)) from None

    def _scalar(self, key: str, v: Any) -> float:
        v = self._with_units(key, v, "must hold finite numbers: each ")
        if not _is_finite_number(v):
            raise self.fail(key, f"must hold finite numbers, got {v!r}")
        return float(v)

    def finish(self, known: tuple[str, ...] = ()) -> None:
        """Refuse any key that is neither read nor listed in ``known`` (every key the table allows)."""
        allowed = set(known) | self.used
        unknown = sorted(set(self.table) - allowed, key=str)
        if unknown:
            near = difflib.get_close_matches(str(unknown[0]), sorted(allowed), n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise self.fail(
                str(unknown[0]), f"is not a known key here; {hint}known keys: {', '.join(sorted(allowed))}"
            )


def _is_finite_number(v: Any) -> bool:
    if not isinstance(v, int | float) or isinstance(v, bool):
        return False
    try:
        return math.isfinite(float(v))
    except OverflowError:  # an integer beyond the float range
        return False


def _tables(r: _Reader, key: str, value: Any) -> list[Mapping[str, Any]]:
    """An array of tables ([[key]]), each checked to be a table."""
    if not isinstance(value, list) or not all(isinstance(v, Mapping) for v in value):
        raise r.fail(key, f"must be an array of tables [[{key}]], got {value!r}")
    return value


def _rotation(deg: float) -> np.ndarray:
    a = math.radians(deg)
    return np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])


def _inline_shape(r: _Reader) -> Body:
    kind = r.text("kind", choices=("circle", "ellipse", "rectangle", "polygon"))
    center = np.array(r.point("center_m", [0.0, 0.0]))
    rot = _rotation(r.number("rotation_deg", 0.0)) if kind != "circle" else np.eye(2)
    if kind == "circle":
        contour = Contour((circular_arc(center, r.number("radius_m", positive=True), 0.0, 2 * math.pi),))
    elif kind == "ellipse":
        axes = r.get("semi_axes_m")
        if (
            not isinstance(axes, list)
            or len(axes) != 2
            or not all(_is_finite_number(a) and a > 0 for a in axes)
        ):
            raise r.fail("semi_axes_m", f"must be two positive numbers [a, b] in metres, got {axes!r}")
        contour = Contour((EllipticalArc(center, rot @ np.diag(axes), 0.0, 2 * math.pi),))
    elif kind == "rectangle":
        w = r.number("width_m", positive=True)
        h = r.number("height_m", positive=True)
        rc = r.number("corner_radius_m", 0.0)
        if rc < 0 or rc > 0.5 * min(w, h):
            raise r.fail("corner_radius_m", f"must be between 0 and half the shorter side ({0.5 * min(w, h)!r}), got {rc!r}")
        contour = _rounded_rectangle(w, h, rc).transformed(rot, center)
    else:
        pts = r.get("points_m")
        if (
            not isinstance(pts, list)
            or len(pts) < 3
            or not all(isinstance(p, list) and len(p) == 2 and all(_is_finite_number(c) for c in p) for p in pts)
        ):
            raise r.fail("points_m", "must be a list of at least 3 points [[x, y], ...] of finite numbers in metres")
        arr = np.array(pts, dtype=float) @ rot.T + center
        contour = Contour(polygon_segments(arr))
        _check_simple_polygon(r, arr)
    r.finish(SHAPE_KEYS[kind])
    return Body(contour)


def _check_simple_polygon(r: _Reader, pts: np.ndarray) -> None:
    from shapely.geometry import Polygon

    poly = Polygon(pts)
    if not poly.is_valid or poly.area <= 0:
        from shapely.validation import explain_validity

        raise r.fail("points_m", f"does not form a simple polygon ({explain_validity(poly)})")


def _rounded_rectangle(w: float, h: float, rc: float) -> Contour:
    """Counter-clockwise rectangle centred at the origin with optional round corners."""
    hx, hy = 0.5 * w, 0.5 * h
    if rc == 0:
        pts = np.array([[-hx, -hy], [hx, -hy], [hx, hy], [-hx, hy]])
        return Contour(polygon_segments(pts))
    segs: list[Any] = []
    corners = [(hx - rc, -hy + rc, -0.5 * math.pi), (hx - rc, hy - rc, 0.0),
               (-hx + rc, hy - rc, 0.5 * math.pi), (-hx + rc, -hy + rc, math.pi)]
    for i, (cx, cy, a0) in enumerate(corners):
        arc = circular_arc((cx, cy), rc, a0, 0.5 * math.pi)
        segs.append(arc)
        nxt = corners[(i + 1) % 4]
        start = arc.end
        a1 = nxt[2]
        end = np.array([nxt[0] + rc * math.cos(a1), nxt[1] + rc * math.sin(a1)])
        if np.hypot(*(end - start)) > 1e-15 * max(w, h):
            segs.append(Line(start, end))
    return Contour(tuple(segs))


def _impedance(r: _Reader) -> complex:
    value = r.get("impedance")
    if _is_finite_number(value):
        z = complex(value)
    elif isinstance(value, list) and len(value) == 2 and all(_is_finite_number(v) for v in value):
        z = complex(value[0], value[1])
    else:
        raise r.fail("impedance", f"must be a number or [re, im] (normalised to the medium's wave impedance), got {value!r}")
    if z.real < 0:
        raise r.fail("impedance", f"has a negative real part {z.real!r}: the surface would create energy")
    return z


def parse_case(doc: Mapping[str, Any], *, source: str = "<case>", base_dir: Path | None = None) -> Case:
    """Validate a parsed TOML document into a ``Case``.

    Raises
    ------
    CaseError
        For any missing, malformed or unknown key.
    """
    top = _Reader(source, doc, "", KNOWN_KEYS[""])
    title = top.text("title", "untitled")
    for name in ("wave", "far_field", "solver", "output", "geometry", "near_field", "materials"):
        if top.has(name) and not isinstance(doc[name], Mapping):
            raise top.fail(name, "must be a table")
    if not top.has("wave"):
        raise top.fail("wave", "is required: [wave] with field and frequency_hz")
    wave_table, adaptive = _adaptive_band(_Reader(source, top.get("wave") or {}, "wave"))
    wave_table, fields = _field_list(_Reader(source, wave_table, "wave"))
    field_kind, freqs, medium = _wave(_Reader(source, wave_table, "wave"))

    geometry = top.get("geometry")
    drawing = None
    audit = None
    if geometry is not None:
        drawing, audit = _load_geometry(_Reader(source, geometry, "geometry", KNOWN_KEYS["geometry"]), base_dir)
    materials = _materials(top, source)
    scatterers = _bodies(top, source, field_kind, drawing, materials)
    notes = tuple(
        f"body {s.name!r} has {len(s.body.holes)} hole(s): closed cavities of an impenetrable "
        "body do not affect the exterior field and are not meshed"
        for s in scatterers if s.body.holes and not s.is_penetrable
    )
    incidents = _incidents(top, source, scatterers)

    ffr = _Reader(source, top.get("far_field") or {}, "far_field", KNOWN_KEYS["far_field"])
    if ffr.has("angles_deg"):
        angles = np.array(ffr.values("angles_deg"))
    else:
        ffr.used.add("angles_deg")
        angles = np.linspace(0.0, 360.0, 721)
    length = ffr.number("length_m", positive=True) if ffr.has("length_m") else None
    ffr.used.add("length_m")
    ffr.finish(KNOWN_KEYS["far_field"])
    solver = _solver(_Reader(source, top.get("solver") or {}, "solver", KNOWN_KEYS["solver"]))
    if top.has("run") and not isinstance(doc["run"], Mapping):
        raise top.fail("run", "must be a table: [run] accept_warnings = true")
    rr = _Reader(source, top.get("run") or {}, "run", KNOWN_KEYS["run"])
    accept = rr.get("accept_warnings", False)
    if not isinstance(accept, bool):
        raise rr.fail("accept_warnings", f"must be true or false, got {accept!r}")
    if audit is not None:
        notes += tuple(audit.get("unit_notes", ()))
    output = _output(_Reader(source, top.get("output") or {}, "output", KNOWN_KEYS["output"]),
                     title, source, audit, notes)
    output = replace(output, accept_warnings=accept, length_m=length,
                     range_profile=_range_profile(top, source, freqs, incidents, adaptive is not None),
                     image=_image(top, source, freqs, incidents))
    near = None
    if top.has("near_field"):
        near = _near_field(_Reader(source, top.get("near_field"), "near_field", KNOWN_KEYS["near_field"]),
                           base_dir, incidents)
    top.used.update({"body", "incident"})
    top.finish(KNOWN_KEYS[""])
    problem = Problem(
        field=field_kind,
        medium=medium,
        scatterers=tuple(scatterers),
        incidents=tuple(incidents),
        frequencies_hz=freqs,
        far_field_deg=angles,
        near_field=near,
        solver=solver,
    )
    if adaptive is not None:
        rows = adaptive.fit_points * np.size(angles) * len(incidents)
        if rows > MAX_FITTED_ROWS:
            raise CaseError(
                f"{source}: [wave] frequency_hz: fitted_sweep.csv would hold {rows} rows (fit_points x far-field "
                f"angles x incident waves); at most {MAX_FITTED_ROWS}: give fewer [far_field] angles_deg, "
                "incident waves or fit_points"
            )
    for other in fields[1:]:
        try:
            replace(problem, field=other)
        except ProblemError as exc:
            raise CaseError(f"{source}: [wave] field = {list(fields)}: {exc}") from None
    return Case(problem, output, adaptive, fields)


def _field_list(wave: _Reader) -> tuple[Mapping[str, Any], tuple[FieldKind, ...]]:
    """``field = ["tm", "te"]``: the fields, and the table with the first one."""
    value = wave.table.get("field")
    if not isinstance(value, list):
        return wave.table, ()
    names = [v for v in value if isinstance(v, str)]
    if not value or len(names) != len(value) or len(set(names)) != len(names) or not set(names) <= {"tm", "te"}:
        raise wave.fail("field", f"a list of fields holds \"tm\" and \"te\", each once, got {value!r}")
    return {**wave.table, "field": value[0]}, tuple(cast(FieldKind, v) for v in value)


def _adaptive_band(wave: _Reader) -> tuple[Mapping[str, Any], AdaptiveBand | None]:
    """``frequency_hz = { start, stop, adaptive_db, fit_points }``: the band, and the table with its first frequencies."""
    value = wave.table.get("frequency_hz")
    if not isinstance(value, Mapping) or "adaptive_db" not in value:
        return wave.table, None
    allowed = {"start", "stop", "adaptive_db", "fit_points"}
    if not {"start", "stop"} <= set(value) <= allowed:
        raise wave.fail("frequency_hz", f"an adaptive band takes start, stop, adaptive_db and fit_points, got {sorted(value)}")
    for key in ("start", "stop", "adaptive_db"):
        if not _is_finite_number(value[key]) or value[key] <= 0:
            raise wave.fail("frequency_hz", f"{key} must be a positive number, got {value[key]!r}")
    points = value.get("fit_points", 1000)
    if isinstance(points, bool) or not isinstance(points, int) or points < 2:
        raise wave.fail("frequency_hz", f"fit_points must be an integer of at least 2, got {points!r}")
    if not value["start"] < value["stop"]:
        raise wave.fail("frequency_hz", f"start must be below stop, got {value['start']} and {value['stop']}")
    band = AdaptiveBand(float(value["start"]), float(value["stop"]), float(value["adaptive_db"]), points)
    return {**wave.table, "frequency_hz": list(band.initial_hz())}, band


def refuse_absurd(case: Case) -> None:
    """Refuse at once a case whose mesh would need more than ``mesh.MAX_PANELS`` panels.

    A one-line estimate (perimeter over wavelength, ``guardrails.estimate_panels``)
    made before any meshing; the message names the quantity that is absurd
    (the frequency, the bodies' size, or the panel setting).

    Raises
    ------
    CaseError
        If the estimate is above the limit.
    """
    source, problem = case.output.case, case.problem
    has_drawing = case.output.drawing_audit is not None
    from .guardrails import estimate_panels
    from .mesh import MAX_PANELS

    est = estimate_panels(problem)
    if not est.is_absurd:
        return
    tail = (f"the mesh would need at least {est.panels:.2g} panels (at most {MAX_PANELS})")
    if not 1e-4 <= est.size_m <= 1e5:
        key = "[geometry] units" if has_drawing else "[[body]] shape"
        raise CaseError(
            f"{source}: {key}: the bodies span {est.size_m:.3g} m, an absurd size for a cross-section; "
            f"{tail}; check the drawing's units (units = \"mm\", ...)"
        )
    if est.wavelength_m * 1e4 < est.size_m and problem.solver.max_panel_wavelengths is None:
        raise CaseError(
            f"{source}: [wave] frequency_hz: {est.frequency_hz:.4g} Hz is absurd for bodies {est.size_m:.3g} m "
            f"across: the wavelength is {est.wavelength_m:.3g} m and {tail}; give the frequency in Hz "
            "(9.4e9 or \"9.4 GHz\" for 9.4 GHz)"
        )
    raise CaseError(
        f"{source}: [solver] max_panel_wavelengths: panels of at most {problem.solver.max_panel_wavelengths or 1:g} "
        f"wavelengths ({est.wavelength_m:.3g} m) at {est.frequency_hz:.4g} Hz on {est.perimeter_m:.3g} m of boundary: "
        f"{tail}; raise max_panel_wavelengths or lower the frequency"
    )


def _wave(wave: _Reader) -> tuple[Any, tuple[float, ...], Medium]:
    if not wave.has("field"):
        wave.finish(KNOWN_KEYS["wave"])  # a misspelt "field" is named, not reported missing
    field_kind = wave.text("field", choices=FIELDS)
    allowed = KNOWN_KEYS["wave"] if field_kind == "acoustic" else ("field", "frequency_hz", "frequency")
    wave.finish(allowed)  # a misspelt key is named before a required one is missed
    key = "frequency" if wave.has("frequency") else "frequency_hz"
    if wave.has("frequency") and wave.has("frequency_hz"):
        raise wave.fail("frequency", "give frequency_hz (a number in Hz) or frequency (\"9.4 GHz\"), not both")
    freqs = wave.values(key, positive=True)
    if len(set(freqs)) != len(freqs):
        raise wave.fail(key, f"repeats a frequency: {list(freqs)}")
    if field_kind == "acoustic":
        speed = wave.number("sound_speed_m_s", SOUND_SPEED_AIR_M_S, positive=True)
        density = wave.number("density_kg_m3", DENSITY_AIR_KG_M3, positive=True)
    else:
        speed, density = SPEED_OF_LIGHT_M_S, 0.0
    wave.finish(allowed)
    return field_kind, freqs, Medium(speed, density)


def _complex_value(r: _Reader, key: str, default: complex) -> complex:
    value = r.get(key, default)
    if _is_finite_number(value):
        return complex(value)
    if isinstance(value, list) and len(value) == 2 and all(_is_finite_number(v) for v in value):
        return complex(value[0], value[1])
    raise r.fail(key, f"must be a number or [re, im], got {value!r}")


def _material(r: _Reader, name: str) -> Material:
    """A material from the keys of ``r`` (a [materials.NAME] table or a [[body]] table)."""
    eps = _complex_value(r, "eps_r", 1.0)
    mu = _complex_value(r, "mu_r", 1.0)
    for key, value in (("eps_r", eps), ("mu_r", mu)):
        if value.imag > 0:
            raise r.fail(key, f"has a positive imaginary part {value.imag!r}: with exp(+j w t) losses are "
                              "negative imaginary parts (or give loss_tangent)")
    tan_d = r.number("loss_tangent", 0.0)
    sigma = r.number("conductivity_s_m", 0.0)
    atten = r.number("attenuation_db_per_wavelength", 0.0)
    for key, value in (("loss_tangent", tan_d), ("conductivity_s_m", sigma), ("attenuation_db_per_wavelength", atten)):
        if value < 0:
            raise r.fail(key, f"must not be negative (a passive material), got {value!r}")
    speed = _complex_value(r, "sound_speed_m_s", 0.0) if r.has("sound_speed_m_s") else None
    if speed is not None and (speed.real <= 0 or speed.imag < 0):
        raise r.fail("sound_speed_m_s", f"must have a positive real part and no negative imaginary part, got {speed!r}")
    density = r.number("density_kg_m3", positive=True) if r.has("density_kg_m3") else None
    return Material(name, eps, mu, tan_d, sigma, speed, density, atten)


def _materials(top: _Reader, source: str) -> dict[str, Material]:
    from .materials import BUILT_IN_MATERIALS

    table = dict(BUILT_IN_MATERIALS)
    raw = top.get("materials")
    if raw is None:
        return table
    for name, spec in raw.items():
        if not isinstance(spec, Mapping):
            raise CaseError(f"{source}: [materials.{name}] must be a table of material keys ({', '.join(MATERIAL_KEYS)})")
        mr = _Reader(source, spec, f"materials.{name}", MATERIAL_KEYS)
        table[name] = _material(mr, name)
        mr.finish(MATERIAL_KEYS)
    return table


def _body_material(br: _Reader, field_kind: str, materials: dict[str, Material], name: str) -> Material:
    inline = [k for k in MATERIAL_KEYS if br.has(k)]
    if br.has("material") and inline:
        raise br.fail("material", f"give a material name or the keys {inline} inline, not both")
    if br.has("material"):
        key = br.text("material")
        if key not in materials:
            raise br.fail("material", f"{key!r} is not defined; add [materials.{key}] or use one of "
                                      f"{', '.join(sorted(materials))}")
        material = materials[key]
    else:
        material = _material(br, name)
    if field_kind == "acoustic" and not material.has_sound:
        raise br.fail("material", f"material {material.name!r} needs sound_speed_m_s and density_kg_m3 for sound")
    if field_kind != "acoustic" and not material.has_em:
        raise br.fail("material", f"material {material.name!r} has no electromagnetic values (eps_r, mu_r)")
    return material


def _bodies(
    top: _Reader, source: str, field_kind: str, drawing: Any, materials: dict[str, Material]
) -> list[Scatterer]:
    raw_bodies = top.get("body")
    if not isinstance(raw_bodies, list) or not raw_bodies:
        raise top.fail("body", "is required: at least one [[body]] table")
    raw_bodies = _tables(top, "body", raw_bodies)
    bodies: list[Scatterer] = []
    allowed = BOUNDARIES[field_kind]
    for i, raw in enumerate(raw_bodies):
        br = _Reader(source, raw, f"body.{i}", KNOWN_KEYS["body"])
        name = br.text("name", f"body{i + 1}")
        picks = [k for k in ("shape", "layer", "point_m") if br.has(k)]
        if len(picks) != 1:
            raise br.fail("shape", "give exactly one of shape = {...}, layer = \"NAME\" or point_m = [x, y]")
        boundary = br.text("boundary", choices=allowed)
        imp = _impedance(br) if boundary == "impedance" else None
        if boundary != "impedance" and br.has("impedance"):
            raise br.fail("impedance", "is only allowed with boundary = \"impedance\"")
        material = _body_material(br, field_kind, materials, name) if boundary == "penetrable" else None
        if material is None and (br.has("material") or any(br.has(k) for k in MATERIAL_KEYS)):
            raise br.fail("material", "material keys are only allowed with boundary = \"penetrable\"")
        if imp is not None and imp == 0 and field_kind != "te":
            raise br.fail("impedance", "is zero: use boundary = \"pec\" (or \"soft\" for sound)")
        if picks[0] == "shape":
            shape = br.get("shape")
            if not isinstance(shape, Mapping):
                raise br.fail("shape", "must be a table such as { kind = \"circle\", radius_m = 0.05 }")
            found = [_inline_shape(_Reader(source, shape, f"body.{i}.shape", _ALL_SHAPE_KEYS))]
            where = "inline shape"
        else:
            if drawing is None:
                raise br.fail(picks[0], "needs a [geometry] file to pick bodies from")
            found, where = _pick_from_drawing(br, picks[0], drawing)
        br.finish(KNOWN_KEYS["body"])
        for n, body in enumerate(found):
            label = name if len(found) == 1 else f"{name}.{n + 1}"
            kind = cast(BoundaryKind, boundary)  # one of BOUNDARIES[field_kind], checked above
            bodies.append(Scatterer(label, Body(body.outer, body.holes, label), kind, imp, where, material))
    body_names = [b.name for b in bodies]
    if len(set(body_names)) != len(body_names):
        raise top.fail("body", f"names must differ, got {body_names}")
    _check_disjoint(source, bodies)
    return bodies


def _incidents(top: _Reader, source: str, bodies: list[Scatterer]) -> list[IncidentWave]:
    raw_inc = top.get("incident")
    if raw_inc is None:
        raw_inc = [{"kind": "plane", "from_deg": 0.0}]
    raw_inc = _tables(top, "incident", raw_inc)
    if not raw_inc:
        raise top.fail("incident", "is empty: give at least one [[incident]] wave")
    incidents: list[IncidentWave] = []
    names = []
    for i, raw in enumerate(raw_inc):
        ir = _Reader(source, raw, f"incident.{i}", KNOWN_KEYS["incident"])
        kind = ir.text("kind", "plane", choices=("plane", "line"))
        name = ir.text("name", f"incident{i + 1}")
        names.append(name)
        if kind == "plane":
            angles_in = ir.values("from_deg")
            if len(set(angles_in)) != len(angles_in):
                raise ir.fail("from_deg", f"repeats an angle: {list(angles_in)}")
            incidents.extend(IncidentWave(name, "plane", from_deg=a) for a in angles_in)
        else:
            pos = ir.point("position_m")
            for b in bodies:
                # the outline decides: a closed cavity is not meshed, so it counts as inside
                if bool(Body(b.body.outer).contains([pos])[0]):
                    raise ir.fail("position_m", f"{list(pos)} m is inside body {b.name!r}; a line source must be outside every body")
            incidents.append(IncidentWave(name, "line", position_m=pos))
        ir.finish(("kind", "name", "from_deg") if kind == "plane" else ("kind", "name", "position_m"))
    if len(set(names)) != len(names):
        raise top.fail("incident", f"names must differ, got {names}")
    return incidents


def _solver(sr: _Reader) -> SolverOptions:
    tol = sr.number("tolerance", 1e-8, positive=True)
    if not 1e-14 <= tol <= 1e-2:
        raise sr.fail("tolerance", f"must be between 1e-14 and 1e-2, got {tol!r}")
    p = sr.get("nodes_per_panel", 16)
    if isinstance(p, bool) or not isinstance(p, int) or not 4 <= p <= 32:
        raise sr.fail("nodes_per_panel", f"must be an integer from 4 to 32, got {p!r}")
    mpw = sr.number("max_panel_wavelengths", positive=True) if sr.has("max_panel_wavelengths") else None
    sr.used.add("max_panel_wavelengths")
    refinements = sr.get("max_refinements", 10)
    if isinstance(refinements, bool) or not isinstance(refinements, int) or not 0 <= refinements <= 20:
        raise sr.fail("max_refinements", f"must be an integer from 0 to 20, got {refinements!r}")
    corners = sr.text("corners", "compressed", choices=("compressed", "graded"))
    method = sr.text("method", "auto", choices=("auto", "dense", "fast"))
    sr.finish(KNOWN_KEYS["solver"])
    return SolverOptions(tol, int(p), mpw, int(refinements), cast(Literal["compressed", "graded"], corners),
                         cast(Literal["auto", "dense", "fast"], method))


def _section(top: _Reader, source: str, name: str, example: str) -> _Reader | None:
    """The reader of an optional ``[name]`` table (None when absent); refused when it is not a table."""
    if not top.has(name):
        return None
    doc = top.table[name]
    if not isinstance(doc, Mapping):
        raise top.fail(name, f"must be a table: [{name}] {example}")
    return _Reader(source, doc, name, KNOWN_KEYS[name])


def _range_profile(
    top: _Reader, source: str, freqs: tuple[float, ...], incidents: list[IncidentWave], adaptive: bool,
) -> RangeProfileRequest | None:
    """``[range_profile]``: refused unless the case sweeps frequency uniformly with plane waves."""
    r = _section(top, source, "range_profile", 'window = "hann"')
    if r is None:
        return None
    window = r.text("window", "hann", choices=WINDOWS)
    sidelobe = r.number("sidelobe_db", 35.0, positive=True)
    padding = r.get("padding", 8)
    if isinstance(padding, bool) or not isinstance(padding, int) or not 1 <= padding <= 64:
        raise r.fail("padding", f"must be an integer from 1 to 64, got {padding!r}")
    r.finish(KNOWN_KEYS["range_profile"])
    if adaptive or uniform_step(np.array(sorted(freqs))) is None:
        raise top.fail(
            "range_profile",
            "needs a frequency sweep: [wave] frequency_hz = { start = ..., stop = ..., count = ... } with at "
            f"least 4 equally spaced frequencies (the case has {len(freqs)})",
        )
    if not any(w.is_plane for w in incidents):
        raise top.fail("range_profile", "needs plane waves ([[incident]] kind = \"plane\")")
    return RangeProfileRequest(cast(Window, window), sidelobe, int(padding))


def _output(
    orr: _Reader, title: str, source: str, audit: dict[str, Any] | None, notes: tuple[str, ...]
) -> OutputOptions:
    convention = orr.text("time_convention", "engineering", choices=TIME_CONVENTIONS)
    switches = {key: orr.get(key, True) for key in ("plots", "vtk", "surface_csv", "vtk_per_incidence")}
    for key, val in switches.items():
        if not isinstance(val, bool):
            raise orr.fail(key, f"must be true or false, got {val!r}")
    plot_f = orr.values("plot_frequencies_hz", positive=True) if orr.has("plot_frequencies_hz") else None
    plot_a = orr.values("plot_from_deg") if orr.has("plot_from_deg") else None
    field_map = orr.text("field_map", "abs", choices=("abs", "db", "real"))
    orr.finish(KNOWN_KEYS["output"])
    return OutputOptions(
        time_convention=cast(TimeConvention, convention),  # checked against TIME_CONVENTIONS above
        plots=switches["plots"],
        vtk=switches["vtk"],
        surface_csv=switches["surface_csv"],
        vtk_per_incidence=switches["vtk_per_incidence"],
        plot_frequencies_hz=plot_f,
        plot_from_deg=plot_a,
        field_map=cast(Literal["abs", "db", "real"], field_map),
        title=title,
        case=source,
        drawing_audit=audit,
        notes=notes,
    )


def _grid(r: _Reader) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """``x_m = [min, max]``, ``y_m = [min, max]`` and ``spacing_m`` or ``count = [nx, ny]``: the axes."""
    xr, yr = r.point("x_m"), r.point("y_m")
    for key, (lo, hi) in (("x_m", xr), ("y_m", yr)):
        if hi <= lo:
            raise r.fail(key, f"must be [min, max] with min < max, got {[lo, hi]}")
    if r.has("spacing_m") == r.has("count"):
        raise r.fail("spacing_m", "give exactly one of spacing_m = number or count = [nx, ny]")
    if r.has("spacing_m"):
        h = r.number("spacing_m", positive=True)
        sx, sy = (xr[1] - xr[0]) / h, (yr[1] - yr[0]) / h
        if not (math.isfinite(sx) and math.isfinite(sy)) or sx * sy > 1e15:  # before int() overflows
            raise r.fail("spacing_m", f"asks for {sx + 1:.3g} x {sy + 1:.3g} points; at most 25 million")
        nx = int(math.floor(sx + 1e-9)) + 1
        ny = int(math.floor(sy + 1e-9)) + 1
    else:
        cnt = r.get("count")
        if not (isinstance(cnt, list) and len(cnt) == 2
                and all(isinstance(c, int) and not isinstance(c, bool) and c >= 1 for c in cnt)):
            raise r.fail("count", f"must be [nx, ny] positive integers, got {cnt!r}")
        nx, ny = cnt
    if nx * ny > 25_000_000:
        raise r.fail("spacing_m" if r.has("spacing_m") else "count",
                     f"asks for {nx} x {ny} points; at most 25 million")
    return np.linspace(xr[0], xr[1], nx), np.linspace(yr[0], yr[1], ny)


def _image(
    top: _Reader, source: str, freqs: tuple[float, ...], incidents: list[IncidentWave]
) -> ImageRequest | None:
    """``[image]``: a grid like ``[near_field]``'s, window and dynamic range; the case's sweep is the aperture."""
    r = _section(top, source, "image", "x_m = [x0, x1], y_m = [y0, y1], spacing_m = ...")
    if r is None:
        return None
    x, y = _grid(r)
    if x.size * y.size > 4_000_000:
        raise r.fail("spacing_m" if r.has("spacing_m") else "count",
                     f"asks for {x.size} x {y.size} image points; at most 4 million")
    window = r.text("window", "hann", choices=WINDOWS)
    sidelobe = r.number("sidelobe_db", 35.0, positive=True)
    dynamic = r.number("dynamic_range_db", 40.0, positive=True)
    r.finish(KNOWN_KEYS["image"])
    plane = [w for w in incidents if w.is_plane]
    if len(freqs) < 2 or len(plane) < 2:
        raise top.fail(
            "image",
            f"needs a sweep over frequency and incidence angle (the case has {len(freqs)} frequencies and "
            f"{len(plane)} plane waves): give frequency_hz = {{ start, stop, count }} and "
            "from_deg = { start, stop, count }",
        )
    return ImageRequest(x, y, cast(Window, window), sidelobe, dynamic)


def _near_field(r: _Reader, base_dir: Path | None, incidents: list[IncidentWave]) -> NearFieldRequest:
    x = y = probes = None
    if r.has("x_m") or r.has("y_m"):
        x, y = _grid(r)
    if r.has("probes_csv"):
        text = r.text("probes_csv")
        if "\x00" in text or not text.strip():
            raise r.fail("probes_csv", f"is not a usable file name: {text!r}; give the CSV file's path")
        path = Path(text)
        if not path.is_absolute() and base_dir is not None:
            path = base_dir / path
        probes = _read_probes(r, path)
    if x is None and probes is None:
        raise r.fail("x_m", "give a grid (x_m, y_m, spacing_m or count) or probes_csv")
    if r.has("from_deg"):
        angles = r.values("from_deg")
        plane = {w.from_deg for w in incidents if w.is_plane}
        missing = [a for a in angles if not any(abs(a - b) < 1e-9 for b in plane)]
        if missing:
            raise CaseError(
                f"{r.source}: [near_field.from_deg] {missing} matches no plane-wave incidence; "
                "use angles listed in [[incident]] from_deg"
            )
        chosen = tuple(
            i for i, w in enumerate(incidents)
            if w.is_plane and any(abs(w.from_deg - a) < 1e-9 for a in angles)
        )
    else:
        chosen = tuple(range(len(incidents)))
    r.finish(KNOWN_KEYS["near_field"])
    return NearFieldRequest(chosen, x, y, probes)


def _read_probes(r: _Reader, path: Path) -> np.ndarray:
    import csv

    try:
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(line for line in fh if not line.startswith("#")))
    except OSError as exc:
        raise r.fail("probes_csv", f"cannot be read: {path}: {exc.strerror}") from None
    if not rows or [c.strip() for c in rows[0][:2]] != ["x_m", "y_m"]:
        raise r.fail("probes_csv", f"{path}: the first line must be the header x_m,y_m")
    pts = []
    for n, row in enumerate(rows[1:], start=2):
        try:
            pts.append((float(row[0]), float(row[1])))
        except (ValueError, IndexError):
            raise r.fail("probes_csv", f"{path}, line {n}: expected two numbers, got {row!r}") from None
    if not pts:
        raise r.fail("probes_csv", f"{path} holds no points")
    return np.array(pts)


def _check_disjoint(source: str, bodies: list[Scatterer]) -> None:
    """Bodies may not overlap or touch, except one lying strictly inside a penetrable one."""
    from shapely.geometry import Polygon

    polys = [Polygon(b.body.outer.sample(CONTAINS_SAMPLES)) for b in bodies]
    for i in range(len(polys)):
        for j in range(i + 1, len(polys)):
            if not polys[i].intersects(polys[j]):
                continue
            for outer, inner in ((i, j), (j, i)):
                nested = polys[outer].contains(polys[inner]) and not polys[outer].boundary.intersects(
                    polys[inner].boundary
                )
                if nested and bodies[outer].is_penetrable:
                    break
            else:
                c = polys[i].boundary.intersection(polys[j].boundary)
                c = c.representative_point() if not c.is_empty else polys[i].intersection(polys[j]).representative_point()
                near = f"near ({c.x:.6g}, {c.y:.6g}) m" if not c.is_empty else "(no finite point found)"
                raise CaseError(
                    f"{source}: bodies {bodies[i].name!r} and {bodies[j].name!r} overlap or touch "
                    f"{near}; move them apart or merge them into one body "
                    "(a body may lie inside a penetrable one without touching it)"
                )


def _load_geometry(r: _Reader, base_dir: Path | None) -> tuple[Any, dict[str, Any]]:
    """Read and clean the case's drawing: ``[(layer, Body), ...]`` and the audit."""
    from sectionwave.importers import clean_drawing, read_drawing

    text = r.text("file")
    if "\x00" in text or not text.strip():
        raise r.fail("file", f"is not a usable file name: {text!r}; give the drawing's path")
    path = Path(text)
    if not path.is_absolute() and base_dir is not None:
        path = base_dir / path
    units = r.text("units") if r.has("units") else None
    gap = r.number("gap_tol_m", positive=True) if r.has("gap_tol_m") else None
    r.finish(KNOWN_KEYS["geometry"])
    if not path.exists():
        where = f" (relative to the case file's folder {base_dir})" if base_dir is not None else ""
        raise r.fail("file", f"the drawing {path} does not exist{where}; correct the path in [geometry] file")
    try:
        drawing = read_drawing(path, units=units)
        cleaned = clean_drawing(drawing, gap_tol_m=gap)
        cleaned.raise_for_errors()
    except SectionwaveError as exc:
        # the drawing's own message (file, place, fix), prefixed with the case file and key
        raise type(exc)(f"{r.source}: [geometry.file] {exc}") from None
    audit = {"file": str(path), "units": drawing.units, **cleaned.audit.to_dict()}
    audit["unit_notes"] = [n for n in drawing.notes if "overridden by units" in n or "user units taken as" in n]
    return list(zip(cleaned.layers, cleaned.bodies, strict=True)), audit


def _pick_from_drawing(br: _Reader, how: str, drawing: Any) -> tuple[list[Body], str]:
    named: list[tuple[str, Body]] = drawing
    if how == "layer":
        layer = br.text("layer")
        # the same rule as ``inspect --layer``: case-insensitive, glob patterns allowed
        found = [b for lay, b in named if fnmatch.fnmatchcase(lay.casefold(), layer.casefold())]
        if not found:
            raise br.fail("layer", f"{layer!r} holds no closed body; layers with bodies: {sorted({lay for lay, _ in named})}")
        return found, f"layer {layer}"
    x, y = br.point("point_m")
    found = [b for _, b in named if bool(b.contains([[x, y]])[0])]
    if not found:
        raise br.fail("point_m", f"({x}, {y}) m is not inside any body of the drawing")
    return found[:1], f"body at ({x}, {y}) m"


def load_case(path: str | Path) -> Case:
    """Read and validate a case file (``-`` reads standard input).

    Raises
    ------
    CaseError
        If the file cannot be read, is not valid TOML, fails validation, or
        asks for an absurdly large mesh (see ``refuse_absurd``).
    """
    import sys

    if str(path) == "-":
        data = sys.stdin.buffer.read()
        source, base = "<stdin>", Path.cwd()
    else:
        p = Path(path)
        source, base = str(p), p.resolve().parent
        try:
            data = p.read_bytes()
        except OSError as exc:
            raise CaseError(f"{p}: cannot read the case file ({exc.strerror})") from None
    try:
        doc = tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise CaseError(f"{source}: not UTF-8 text (byte {exc.start}); save the case file as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"{source}: invalid TOML: {exc}; correct the syntax there") from None
    case = parse_case(doc, source=source, base_dir=base)
    refuse_absurd(case)
    return case
