"""Command line: ``sectionwave run CASE.toml`` and ``sectionwave inspect DRAWING``.

Exit codes: 0 success, 2 bad input (one line naming file, key and allowed
values), 1 internal failure, 130 interrupted. Progress goes to stderr only
when it is a terminal; ``--quiet`` silences everything but errors;
``--verbose`` shows the engine's log (refinements, timings).
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

__all__ = ["main"]

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


def _parser() -> argparse.ArgumentParser:
    from . import __version__
    from .conventions import TIME_CONVENTIONS

    parser = argparse.ArgumentParser(
        prog="sectionwave",
        description="2D wave scattering from CAD cross-sections (echo width, far field, surface fields).",
    )
    parser.add_argument("--version", action="version", version=f"sectionwave {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="show the engine's log on stderr")
    sub = parser.add_subparsers(dest="command", required=True)
    run = sub.add_parser("run", help="solve a case file and write its results")
    run.add_argument("case", help="case file (TOML), or - to read it from standard input")
    run.add_argument("--out", type=Path, help="results folder (default: CASE-results beside the case)")
    run.add_argument("--force", action="store_true", help="replace an existing results folder")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors")
    run.add_argument(
        "--time-convention", choices=TIME_CONVENTIONS, default=None,
        help="engineering: exp(+j w t) (default); physics: exp(-i w t), complex conjugates",
    )
    _sweep_arguments(run)
    ins = sub.add_parser("inspect", help="show what a drawing holds and how it cleans into bodies")
    ins.add_argument("drawing")
    ins.add_argument("--units", help="drawing units when the file has none (mm, cm, m, in, ft)")
    ins.add_argument("--layer", action="append", help="only this layer (repeatable, glob allowed)")
    ins.add_argument("--json", action="store_true", help="machine-readable report on stdout")
    ins.add_argument("--preview", type=Path, help="write a PNG of the cleaned bodies")
    return parser


def _sweep_arguments(run: argparse.ArgumentParser) -> None:
    run.add_argument("--resume", action="store_true",
                     help="finish an interrupted run of the same case: keep solved frequencies, solve the rest")
    where = run.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help="solve frequencies on a local dask cluster of N worker processes (127.0.0.1 only)")
    where.add_argument("--scheduler", metavar="ADDRESS", help="solve on an existing dask cluster (tcp://host:port)")
    where.add_argument("--scheduler-file", metavar="PATH", help="solve on the dask cluster of this scheduler file")


def _say(quiet: bool, message: str) -> None:
    if not quiet:
        print(message, file=sys.stderr)


def _run(args: argparse.Namespace) -> int:
    from . import load_case
    from .solve import ProblemTooLargeError

    case = load_case(args.case)
    if args.out is not None:
        out = args.out
    elif args.case == "-":
        out = Path("sectionwave-results")
    else:
        out = Path(args.case).with_name(Path(args.case).stem + "-results")
    # Refuse before solving, not after: results are never silently replaced.
    from .export.atomic import OUTPUT_MARKER

    if out.exists() and not out.is_dir():
        raise _BadInput(f"{out}: exists and is not a folder; choose another --out")
    if out.exists() and any(out.iterdir()):
        if not args.force:
            raise _BadInput(f"{out}: results folder exists and is not empty; pass --force to replace it or choose --out")
        if not (out / OUTPUT_MARKER).exists():
            raise _BadInput(f"{out}: not a sectionwave results folder; --force only replaces earlier results")
    show = not args.quiet and sys.stderr.isatty()
    progress = (lambda msg: print(msg, file=sys.stderr)) if show else None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            outcome = _streamed_run(args, case, out, progress)
        except ProblemTooLargeError as exc:
            raise _BadInput(
                f"{case.output.case}: {exc} (case keys: [wave] frequency_hz, [solver] tolerance)"
            ) from None
    for text in dict.fromkeys([str(w.message) for w in caught] + outcome.notes):
        _say(args.quiet, f"warning: {text}")
    if outcome.result is None:
        runs = [run.sweep for run in outcome.fields.values()] or [outcome.sweep]
        total = len(case.problem.frequencies_hz) * max(1, len(case.fields))
        kept = f"{sum(len(r.solutions) for r in runs)}" + ("" if case.adaptive else f" of {total}")
        _say(args.quiet, f"stopped: {kept} frequencies solved and kept in {outcome.sweep_folder}; finish with --resume")
        return EXIT_INTERRUPTED
    result = outcome.result
    if outcome.sweep.kept:
        _say(args.quiet, f"resumed: kept {len(outcome.sweep.kept)} frequencies, solved {len(outcome.sweep.solved_now)}")
    worst = max(fr.estimated_error for fr in result.frequencies)
    _say(args.quiet, f"wrote {out} ({len(result.frequencies)} frequencies, estimated error {worst:.1e})")
    return EXIT_OK


def _streamed_run(args: argparse.Namespace, case: Any, out: Path, progress: Any) -> Any:
    """Solve frequency by frequency into the sweep folder, then write ``out`` (see ``batch``)."""
    from .batch import BatchError, BatchOptions, case_digest, run_case

    if args.workers is not None and args.workers < 1:
        raise _BadInput(f"--workers must be at least 1, got {args.workers}")
    if args.resume and args.case == "-":
        raise _BadInput("--resume needs a case file, not standard input")
    digest = case_digest(args.case) if args.case != "-" else "stdin"
    options = BatchOptions(
        resume=args.resume, force=args.force, convention=args.time_convention, workers=args.workers,
        scheduler=args.scheduler, scheduler_file=args.scheduler_file,
    )
    try:
        outcome = run_case(case, digest, out, options, say=lambda m: _say(args.quiet, m), progress=progress)
    except BatchError as exc:
        raise _BadInput(str(exc)) from None
    runs = [run.sweep for run in outcome.fields.values()] or [outcome.sweep]
    if options.distributed or any(sweep.kept for sweep in runs):
        # warnings raised in other processes or earlier runs travel with the solutions
        outcome.notes = [w for sweep in runs for fr in sweep.solutions.values() for w in fr.warnings]
    return outcome


def _inspect(args: argparse.Namespace) -> int:
    from sectionwave.importers import clean_drawing, read_drawing
    from sectionwave.importers import inspect as insp

    drawing = read_drawing(Path(args.drawing), units=args.units, layers=args.layer)
    cleaned = clean_drawing(drawing)
    report = insp.inspection_report(drawing, cleaned)
    if args.preview is not None:
        insp.write_preview_png(cleaned, args.preview)
    if args.json:
        print(json.dumps(report, indent=2, default=str))
    else:
        print(insp.format_inspection(report))
    errors = report.get("audit", {}).get("errors") or []
    if errors or not cleaned.bodies:
        first = errors[0]["message"] if errors else "no closed body found"
        print(f"sectionwave: error: {args.drawing}: {first}", file=sys.stderr)
        return EXIT_BAD_INPUT
    return EXIT_OK


def _configure_log(level: int) -> None:
    """Send sectionwave's own log records to stderr at ``level`` (one handler, however often called)."""
    logger = logging.getLogger("sectionwave")
    logger.setLevel(level)
    if not any(getattr(h, "_sectionwave", False) for h in logger.handlers):
        handler = logging.StreamHandler(sys.stderr)
        handler.setFormatter(logging.Formatter("%(levelname)s: %(message)s"))
        handler._sectionwave = True  # type: ignore[attr-defined]  # marks our own handler
        logger.addHandler(handler)


class _BadInput(Exception):
    pass


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``sectionwave`` command; returns the exit code."""
    from sectionwave.importers.errors import SectionwaveError

    args = _parser().parse_args(argv)
    level = logging.ERROR if getattr(args, "quiet", False) else logging.WARNING
    if args.verbose and not getattr(args, "quiet", False):
        level = logging.INFO
    _configure_log(level)
    try:
        if args.command == "run":
            return _run(args)
        return _inspect(args)
    except (_BadInput, SectionwaveError) as exc:
        print(f"sectionwave: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("sectionwave: interrupted; the results folder was not written", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - the one place that maps failures to an exit code
        print(f"sectionwave: internal error: {type(exc).__name__}: {exc}", file=sys.stderr)
        return EXIT_FAILURE


if __name__ == "__main__":
    sys.exit(main())
