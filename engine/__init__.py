"""Mesh, solve and evaluate 2D time-harmonic scattering.

The small public API, used by the command line too::

    from sectionwave.engine import load_case, solve_problem, write_run
    case = load_case("mast.toml")        # case.problem (physics), case.output (what to write)
    result = solve_problem(case.problem)
    result.frequencies[0].farfield       # complex far field, (angles, incident waves)
    write_run(result, "mast-results", case.output)

Layers: the face (``case``, ``cli``) turns case files into a ``Problem``;
the core (every other module but ``export``) solves it and returns typed
results (``results``); ``export`` writes them.
"""

from __future__ import annotations

from pathlib import Path

__version__ = "0.1.0"

from .adapt import AccuracyWarning  # noqa: E402
from .case import Case, CaseError, load_case, parse_case  # noqa: E402
from .conventions import TimeConvention  # noqa: E402
from .export.options import OutputOptions  # noqa: E402
from .problem import (  # noqa: E402
    IncidentWave,
    Material,
    Medium,
    NearFieldRequest,
    Problem,
    ProblemError,
    Scatterer,
    SolverOptions,
)
from .results import FrequencySolution, RunResult  # noqa: E402
from .run import solve_frequency, solve_problem  # noqa: E402
from .solve import IllConditionedWarning, ProblemTooLargeError  # noqa: E402


def write_run(
    result: RunResult,
    out_dir: str | Path,
    output: OutputOptions | None = None,
    *,
    force: bool = False,
    convention: TimeConvention | None = None,
) -> Path:
    """Write all outputs of ``result`` into ``out_dir`` atomically (staged, then renamed).

    Refuses an existing non-empty folder unless ``force``; ``convention``
    overrides ``output.time_convention``.
    """
    from .export.atomic import staged_output_dir
    from .export.results import write_run as _write

    with staged_output_dir(Path(out_dir), force=force) as staging:
        _write(result, staging, output, convention=convention)
    return Path(out_dir)


__all__ = [
    "AccuracyWarning",
    "Case",
    "CaseError",
    "FrequencySolution",
    "IllConditionedWarning",
    "IncidentWave",
    "Material",
    "Medium",
    "NearFieldRequest",
    "OutputOptions",
    "Problem",
    "ProblemError",
    "ProblemTooLargeError",
    "RunResult",
    "Scatterer",
    "SolverOptions",
    "__version__",
    "load_case",
    "parse_case",
    "solve_frequency",
    "solve_problem",
    "write_run",
]
