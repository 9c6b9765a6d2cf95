"""Mesh, solve and evaluate 2D time-harmonic scattering.

The small public API, used by the command line too::

    from sectionwave.engine import load_case, solve_scene, write_run
    scene = load_case("mast.toml")
    result = solve_scene(scene)
    result.frequencies[0].farfield      # complex far field, (angles, incident waves)
    write_run(result, "mast-results")
"""

from __future__ import annotations

from pathlib import Path

__version__ = "0.1.0"

from .case import CaseError, Scene, load_case, parse_case  # noqa: E402
from .run import AccuracyWarning, FrequencyResult, IllConditionedWarning, RunResult, solve_scene  # noqa: E402


def write_run(result: RunResult, out_dir: str | Path, *, force: bool = False, convention: str | None = None) -> Path:
    """Write all outputs of ``result`` into ``out_dir`` atomically (staged, then renamed).

    Refuses an existing non-empty folder unless ``force``.
    """
    from .export.atomic import staged_output_dir
    from .export.results import write_run as _write

    with staged_output_dir(Path(out_dir), force=force) as staging:
        _write(result, staging, convention=convention)
    return Path(out_dir)


__all__ = [
    "AccuracyWarning",
    "CaseError",
    "FrequencyResult",
    "IllConditionedWarning",
    "RunResult",
    "Scene",
    "__version__",
    "load_case",
    "parse_case",
    "solve_scene",
    "write_run",
]
