"""What to write, and the case's own record for the summary.

The face (case loader, command line) fills an ``OutputOptions``; the engine
never sees it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

from ..conventions import TimeConvention
from ..products import ImageRequest, RangeProfileRequest

__all__ = ["OutputOptions"]


@dataclass(frozen=True)
class OutputOptions:
    """Output switches and the case's record.

    Attributes
    ----------
    time_convention
        ``engineering`` (exp(+j w t), the engine's own) or ``physics``
        (exp(-i w t): complex values are written as conjugates).
    plots, vtk
        Write PNG plots and VTK files for ParaView.
    title, case
        The case's title and where it was read from.
    drawing_audit
        The drawing's cleaning audit (None without a drawing).
    notes
        The case's own notes (for example ignored cavities).
    surface_csv, vtk_per_incidence
        Write ``surface.csv`` (one row per boundary node, incident wave and
        frequency: the bulkiest table) and one boundary ``.vtu`` per
        incident wave (off: one per frequency, holding every incident wave).
    warnings
        Guardrail findings (``code``, ``message``, ``frequency_hz``) for
        ``summary.json``; see ``engine.guardrails``.
    plot_frequencies_hz, plot_from_deg
        Which frequencies and plane-wave directions the plots draw (None:
        an even spread of at most ``results.MAX_CURVES`` curves, with a
        note naming what was left out).
    field_map
        Near-field maps show ``abs`` (magnitude), ``db`` (20 log10 of it)
        or ``real`` (the field at time zero).
    image
        ``[image]``: back-projected image of the monostatic far field
        (``products.back_projection``).
    range_profile
        ``[range_profile]``: write down-range profiles of the monostatic
        far field (``products.range_profile``).
    length_m
        Length of the real, straight body: the monostatic table gains the
        three-dimensional broadside estimate (``fields.finite_length``).
    accept_warnings
        The case accepts a run that ends with guardrail findings (the
        command line then exits 0 instead of 3).
    """

    time_convention: TimeConvention = "engineering"
    plots: bool = True
    vtk: bool = True
    title: str = "untitled"
    case: str = "<case>"
    drawing_audit: dict[str, Any] | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)
    surface_csv: bool = True
    vtk_per_incidence: bool = True
    warnings: tuple[dict[str, Any], ...] = field(default_factory=tuple)
    accept_warnings: bool = False
    plot_frequencies_hz: tuple[float, ...] | None = None
    plot_from_deg: tuple[float, ...] | None = None
    field_map: Literal["abs", "db", "real"] = "abs"
    length_m: float | None = None
    range_profile: RangeProfileRequest | None = None
    image: ImageRequest | None = None
