"""Write results as CSV tables, VTK files for ParaView and PNG plots.

Every writer takes numpy arrays, writes atomically (a reader never sees a
half-written file) and raises :class:`ExportError` on bad input. Complex
phasors are in the exp(+j w t) convention; writers that take them offer
``convention="physics"`` to export their complex conjugate instead.
"""

from __future__ import annotations

from .atomic import (
    atomic_path,
    atomic_write,
    atomic_write_bytes,
    atomic_write_text,
    prepare_output_dir,
    staged_output_dir,
)
from .errors import ExportError, OutputExistsError
from .plots import (
    plot_echo_width_cartesian,
    plot_echo_width_polar,
    plot_echo_width_vs_frequency,
    plot_field_map,
    plot_mesh_preview,
)
from .tables import conjugate_for_convention, read_csv, split_complex, write_csv
from .vtk import (
    PvdEntry,
    read_pvd,
    read_vtu,
    write_boundary_vtu,
    write_grid_vtu,
    write_pvd,
    write_sweep_pvd,
)

__all__ = [
    "ExportError",
    "OutputExistsError",
    "PvdEntry",
    "atomic_path",
    "atomic_write",
    "atomic_write_bytes",
    "atomic_write_text",
    "conjugate_for_convention",
    "plot_echo_width_cartesian",
    "plot_echo_width_polar",
    "plot_echo_width_vs_frequency",
    "plot_field_map",
    "plot_mesh_preview",
    "prepare_output_dir",
    "read_csv",
    "read_pvd",
    "read_vtu",
    "split_complex",
    "staged_output_dir",
    "write_boundary_vtu",
    "write_csv",
    "write_grid_vtu",
    "write_pvd",
    "write_sweep_pvd",
]
