"""CSV tables and the conversions every writer shares for complex values.

Glossary
--------
engineering convention
    Time factor exp(+j w t), the one used everywhere inside sectionwave.
physics convention
    Time factor exp(-i w t). A phasor in this convention is the complex
    conjugate of the same physical field in the engineering convention; it
    is offered only as an export option.
complex parts
    A complex array ``NAME`` is written as real arrays ``NAME_re``,
    ``NAME_im``, ``NAME_abs``, ``NAME_phase_deg`` (in (-180, 180]) and
    ``NAME_db`` (20 log10 of the magnitude, floored at :data:`DB_FLOOR`).

CSV layout
----------
Optional comment lines starting with ``#``, then one header line of column
names (units belong in the names: ``angle_deg``, ``echo_width_db_m``), then
one row per point, comma-separated, line-feed endings, UTF-8. Floats are
written with Python's ``repr`` (shortest text that reads back to the same
double), so a round trip is exact; NaN is ``nan``, infinities ``inf`` and
``-inf``; booleans are ``0``/``1``.
"""

from __future__ import annotations

import csv
import io
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..conventions import DB_FLOOR, TIME_CONVENTIONS, TimeConvention
from .atomic import atomic_write
from .errors import ExportError

__all__ = [
    "CONVENTIONS",
    "DB_FLOOR",
    "conjugate_for_convention",
    "read_csv",
    "split_complex",
    "write_csv",
]

#: Accepted names of the time convention of exported phasors (defined in ``conventions``).
CONVENTIONS = TIME_CONVENTIONS

Convention = TimeConvention


def conjugate_for_convention(
    values: ArrayLike, convention: Convention = "engineering"
) -> NDArray[np.complex128]:
    """Express phasors computed with exp(+j w t) in the requested convention.

    Parameters
    ----------
    values : array_like
        Complex phasors in the engineering convention exp(+j w t).
    convention : {"engineering", "physics"}
        ``"engineering"`` returns the values unchanged; ``"physics"``
        (exp(-i w t)) returns their complex conjugate.

    Returns
    -------
    numpy.ndarray of complex128
        A new array; the input is never modified.

    Raises
    ------
    ExportError
        If ``convention`` is not one of :data:`CONVENTIONS`.

    Examples
    --------
    >>> conjugate_for_convention([1 + 2j], "physics")
    array([1.-2.j])
    >>> conjugate_for_convention([1 + 2j])
    array([1.+2.j])
    """
    array = np.array(values, dtype=np.complex128, copy=True)
    if convention == "engineering":
        return array
    if convention == "physics":
        return np.conjugate(array)
    raise ExportError(
        f"unknown time convention {convention!r}; expected one of {', '.join(CONVENTIONS)}"
    )


def split_complex(name: str, values: ArrayLike) -> dict[str, NDArray[np.float64]]:
    """Split a complex array into the real arrays that files can hold.

    Parameters
    ----------
    name : str
        Base name, e.g. ``"u_total"``.
    values : array_like
        Complex values of any shape. NaN entries give NaN in every part.

    Returns
    -------
    dict of str to numpy.ndarray of float64
        ``NAME_re``, ``NAME_im``, ``NAME_abs``, ``NAME_phase_deg`` and
        ``NAME_db``, in that order, each of the input's shape.

    Examples
    --------
    >>> parts = split_complex("u", [1j, 0.0])
    >>> parts["u_phase_deg"].tolist(), parts["u_db"].tolist()
    ([90.0, 0.0], [0.0, -400.0])
    """
    array = np.asarray(values, dtype=np.complex128)
    magnitude = np.abs(array)
    with np.errstate(divide="ignore", invalid="ignore"):
        level = 20.0 * np.log10(magnitude)
    level = np.where(np.isnan(magnitude), np.nan, np.maximum(level, DB_FLOOR))
    return {
        f"{name}_re": np.ascontiguousarray(array.real, dtype=np.float64),
        f"{name}_im": np.ascontiguousarray(array.imag, dtype=np.float64),
        f"{name}_abs": magnitude.astype(np.float64),
        f"{name}_phase_deg": np.degrees(np.angle(array)).astype(np.float64),
        f"{name}_db": level.astype(np.float64),
    }


def _format_column(name: str, values: ArrayLike) -> dict[str, list[str]]:
    array = np.asarray(values)
    if array.ndim != 1:
        raise ExportError(f"CSV column {name!r} must be one-dimensional, got shape {array.shape}")
    kind = array.dtype.kind
    if kind == "b":
        return {name: ["1" if v else "0" for v in array.tolist()]}
    if kind in "iu":
        return {name: [str(v) for v in array.tolist()]}
    if kind == "f":
        return {name: [repr(v) for v in array.astype(np.float64).tolist()]}
    if kind == "c":
        # Lossless and spreadsheet-friendly: two real columns.
        complex_array = array.astype(np.complex128)
        return {
            f"{name}_re": [repr(v) for v in complex_array.real.tolist()],
            f"{name}_im": [repr(v) for v in complex_array.imag.tolist()],
        }
    if kind in "US":
        return {name: [str(v) for v in array.astype(str).tolist()]}
    raise ExportError(
        f"CSV column {name!r} has unsupported type {array.dtype}; "
        "expected numbers, booleans or strings"
    )


def write_csv(
    path: str | os.PathLike[str],
    columns: Mapping[str, ArrayLike],
    *,
    header_comment: str | None = None,
) -> Path:
    """Write columns of equal length as a CSV table, atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file; its folder must exist.
    columns : mapping of str to array_like
        Column name (with its unit, e.g. ``"frequency_hz"``) to 1D values.
        Booleans become 0/1; a complex column ``NAME`` becomes the two
        columns ``NAME_re`` and ``NAME_im``.
    header_comment : str, optional
        Text written before the header, each of its lines prefixed by
        ``"# "`` (read it back with ``comment="#"`` in pandas).

    Returns
    -------
    pathlib.Path
        The destination.

    Raises
    ------
    ExportError
        If there are no columns, a column is not 1D, lengths differ, a name
        is empty, repeated or holds a line break.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "t.csv"
    >>> _ = write_csv(out, {"angle_deg": [0.0, 0.1], "is_lit": [True, False]})
    >>> print(out.read_text(), end="")
    angle_deg,is_lit
    0.0,1
    0.1,0
    """
    if not columns:
        raise ExportError(f"no columns given for CSV file {str(path)!r}")
    text_columns: dict[str, list[str]] = {}
    for name, values in columns.items():
        if not name or any(c in name for c in "\r\n"):
            raise ExportError(f"bad CSV column name {name!r} for {str(path)!r}")
        for key, texts in _format_column(name, values).items():
            if key in text_columns:
                raise ExportError(f"CSV column {key!r} appears twice in {str(path)!r}")
            text_columns[key] = texts
    lengths = {key: len(texts) for key, texts in text_columns.items()}
    if len(set(lengths.values())) > 1:
        raise ExportError(
            f"CSV columns for {str(path)!r} differ in length: "
            + ", ".join(f"{k}={n}" for k, n in lengths.items())
        )
    buffer = io.StringIO()
    if header_comment is not None:
        for line in header_comment.splitlines() or [""]:
            buffer.write(f"# {line}".rstrip() + "\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(list(text_columns))
    writer.writerows(zip(*text_columns.values(), strict=True))
    with atomic_write(path, "w") as handle:
        handle.write(buffer.getvalue())
    return Path(path)


def _parse_column(texts: list[str]) -> NDArray[np.generic]:
    try:
        return np.array([int(t) for t in texts], dtype=np.int64)
    except ValueError:
        pass
    try:
        return np.array([float(t) for t in texts], dtype=np.float64)
    except ValueError:
        return np.array(texts, dtype=str)


def read_csv(path: str | os.PathLike[str]) -> dict[str, NDArray[np.generic]]:
    """Read a table written by :func:`write_csv`.

    Parameters
    ----------
    path : str or os.PathLike
        CSV file: ``#`` comment lines, a header line, then rows.

    Returns
    -------
    dict of str to numpy.ndarray
        Columns in file order: int64 when every entry is an integer
        (booleans come back as 0/1), float64 when every entry is a number,
        str otherwise.

    Raises
    ------
    ExportError
        If the file has no header or a row has the wrong number of fields.
    """
    with open(path, encoding="utf-8", newline="") as handle:
        lines = [line for line in handle if not line.startswith("#")]
    rows = list(csv.reader(lines))
    if not rows:
        raise ExportError(f"CSV file {str(path)!r} has no header line")
    header, body = rows[0], rows[1:]
    for number, row in enumerate(body, start=2):
        if len(row) != len(header):
            raise ExportError(
                f"CSV file {str(path)!r}: data row {number} has {len(row)} fields, "
                f"the header has {len(header)}"
            )
    return {name: _parse_column([row[i] for row in body]) for i, name in enumerate(header)}
