"""fitted_sweep.csv: the far field of an adaptive sweep's rational fit at many frequencies.

Columns ``frequency_hz, from_deg, angle_deg, farfield_re, farfield_im,
echo_width_db_m``: one row per fit frequency, incident wave and angle
(``from_deg`` is nan for line sources). Complex values follow the run's
time convention, like farfield.csv.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike

from ..conventions import TimeConvention
from ..fields import echo_width
from .tables import conjugate_for_convention, write_csv

__all__ = ["FITTED_COLUMNS", "write_fitted_sweep"]

FITTED_COLUMNS = ("frequency_hz", "from_deg", "angle_deg", "farfield_re", "farfield_im", "echo_width_db_m")


def write_fitted_sweep(
    path: str | os.PathLike[str],
    frequencies_hz: ArrayLike,
    from_deg: Sequence[float],
    angles_deg: ArrayLike,
    farfield: ArrayLike,
    *,
    convention: TimeConvention = "engineering",
    header_comment: str | None = None,
) -> Path:
    """Write the fitted far field ``(n_freq, n_angles, n_incidents)`` as a CSV table, atomically."""
    f = np.asarray(frequencies_hz, dtype=float)
    ang = np.asarray(angles_deg, dtype=float)
    ff = np.asarray(farfield, dtype=complex)
    n_f, n_a, n_i = ff.shape
    # rows: frequency, then incident wave, then angle (the order of farfield.csv)
    values = conjugate_for_convention(ff.transpose(0, 2, 1).reshape(-1), convention)
    db = echo_width(ff.transpose(0, 2, 1).reshape(-1), 1.0)["db_m"]
    columns = {
        "frequency_hz": np.repeat(f, n_i * n_a),
        "from_deg": np.tile(np.repeat(np.asarray(from_deg, dtype=float), n_a), n_f),
        "angle_deg": np.tile(ang, n_f * n_i),
        "farfield_re": values.real,
        "farfield_im": values.imag,
        "echo_width_db_m": db,
    }
    return write_csv(path, columns, header_comment=header_comment)
