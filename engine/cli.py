"""Command line: ``sectionwave run CASE.toml``, ``sectionwave inspect DRAWING``, ``sectionwave new CASE.toml``.

Exit codes: 0 success, 2 bad input (one line naming file, key and allowed
values), 3 finished with numerical warnings (see ``engine.guardrails``;
accepted with ``--accept-warnings`` or ``[run] accept_warnings = true``),
1 internal failure, 130 interrupted (Ctrl-C or SIGTERM). Progress goes to
stderr (a bar when it is a terminal, plain lines otherwise); ``--quiet``
silences everything but errors and the numerical warnings; ``--verbose``
shows the engine's log (timings).
"""

from __future__ import annotations

import argparse
import contextlib
import json
import logging
import os
import re
import signal
import sys
import time
import warnings
from collections.abc import Callable, Iterator, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

__all__ = ["EXIT_BAD_INPUT", "EXIT_FAILURE", "EXIT_INTERRUPTED", "EXIT_OK", "EXIT_WARNINGS", "main"]

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT, EXIT_WARNINGS, EXIT_INTERRUPTED = 0, 1, 2, 3, 130

_EPILOG = (
    "exit codes: 0 done; 2 bad input (nothing written); 3 done, but with numerical warnings "
    "(listed on stderr and in summary.json; accept them with --accept-warnings or "
    "[run] accept_warnings = true in the case); 1 internal error; 130 interrupted (Ctrl-C, SIGTERM)"
)


def _parser() -> argparse.ArgumentParser:
    from . import __version__
    from .conventions import TIME_CONVENTIONS

    parser = argparse.ArgumentParser(
        prog="sectionwave",
        description="2D wave scattering from CAD cross-sections (echo width, far field, surface fields).",
        epilog=_EPILOG,
    )
    parser.add_argument("--version", action="version", version=f"sectionwave {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="show the engine's log on stderr")
    sub = parser.add_subparsers(dest="command", required=True)
    run = sub.add_parser("run", help="solve a case file and write its results", epilog=_EPILOG)
    run.add_argument("case", help="case file (TOML), or - to read it from standard input")
    run.add_argument("--out", type=Path, help="results folder (default: CASE-results beside the case)")
    run.add_argument("--force", action="store_true", help="replace an existing results folder")
    run.add_argument("--quiet", action="store_true",
                     help="print nothing but errors and numerical warnings (these are never hidden)")
    run.add_argument("--accept-warnings", action="store_true",
                     help="exit 0, not 3, when the run finishes with numerical warnings")
    run.add_argument(
        "--time-convention", choices=TIME_CONVENTIONS, default=None,
        help="engineering: exp(+j w t) (default); physics: exp(-i w t), complex conjugates",
    )
    _sweep_arguments(run)
    ins = sub.add_parser("inspect", help="show what a drawing holds and how it cleans into bodies")
    ins.add_argument("drawing")
    ins.add_argument("--units", help="drawing units when the file has none (mm, cm, m, in, ft); "
                                     "overrides the file's own, with a note")
    ins.add_argument("--layer", action="append",
                     help="only this layer (repeatable, glob allowed, case-insensitive as in a case)")
    ins.add_argument("--json", action="store_true", help="machine-readable report on stdout")
    ins.add_argument("--preview", type=Path, help="write a PNG of the cleaned bodies (folders are created)")
    plan = sub.add_parser(
        "plan", help="estimate, per frequency, the unknowns, memory and time of each solver and the one chosen",
    )
    plan.add_argument("case", help="case file (TOML)")
    plan.add_argument("--json", action="store_true", help="machine-readable plan on stdout")
    new = sub.add_parser("new", help="write a commented starter case that runs as written")
    new.add_argument("case", type=Path, help="case file to create (TOML)")
    new.add_argument("--force", action="store_true", help="replace an existing file")
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


class _Progress:
    """Progress on stderr: a tqdm bar on a terminal, plain lines otherwise, nothing when quiet."""

    _FREQ = re.compile(r"^frequency (\d+)/(\d+)")

    def __init__(self, quiet: bool) -> None:
        self.quiet = quiet
        self.bar: Any = None
        self.is_tty = sys.stderr.isatty()

    def __call__(self, message: str) -> None:
        if self.quiet:
            return
        m = self._FREQ.match(message)
        if self.is_tty and m:
            from tqdm import tqdm

            n, total = int(m.group(1)), int(m.group(2))
            if self.bar is None:
                import shutil

                # a terminal that reports no size (0 x 0) would hide the bar
                size = shutil.get_terminal_size((80, 24))
                self.bar = tqdm(total=total, file=sys.stderr, unit="freq", leave=False,
                                ncols=min(size.columns or 80, 100), nrows=size.lines or 24)
            self.bar.update(n - 1 - self.bar.n)
            self.bar.set_description_str(message.split(":", 1)[1].split("(")[0].strip())
            return
        if self.bar is not None:
            self.bar.write(message, file=sys.stderr)
        else:
            print(message, file=sys.stderr, flush=True)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def _output_folder(args: argparse.Namespace) -> Path:
    if args.out is not None:
        return Path(args.out)
    if args.case == "-":
        return Path("sectionwave-results")
    return Path(args.case).with_name(Path(args.case).stem + "-results")


@contextlib.contextmanager
def _locked(out: Path) -> Iterator[None]:
    """Hold a lock beside the output folder so that two runs cannot write into one folder."""
    from filelock import FileLock, Timeout

    parent = out.absolute().parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _BadInput(f"{out}: cannot create the folder {parent} ({exc.strerror}); choose another --out") from None
    if not os.access(parent, os.W_OK | os.X_OK):
        raise _BadInput(f"{out}: the folder {parent} is not writable; choose another --out")
    lock = FileLock(str(parent / f".{out.absolute().name}.lock"), timeout=0)
    try:
        lock.acquire()
    except Timeout:
        raise _BadInput(
            f"{out}: another sectionwave run is writing into this folder; wait for it or choose another --out"
        ) from None
    except OSError as exc:
        raise _BadInput(f"{out}: cannot lock the results folder ({exc.strerror}); choose another --out") from None
    try:
        yield
    finally:
        lock.release()
        with contextlib.suppress(OSError):
            os.unlink(lock.lock_file)


def _check_out(out: Path, force: bool) -> None:
    """Refuse before solving, not after: results are never silently replaced."""
    from .export.atomic import OUTPUT_MARKER

    if out.exists() and not out.is_dir():
        raise _BadInput(f"{out}: exists and is not a folder; choose another --out")
    if out.exists() and any(out.iterdir()):
        if not force:
            raise _BadInput(f"{out}: results folder exists and is not empty; pass --force to replace it or choose --out")
        if not (out / OUTPUT_MARKER).exists():
            raise _BadInput(f"{out}: not a sectionwave results folder; --force only replaces earlier results")


def _run(args: argparse.Namespace) -> int:
    from sectionwave.importers.errors import SectionwaveError, SectionwaveWarning

    from . import load_case
    from .guardrails import check_problem, check_result, from_warnings
    from .solve import ProblemTooLargeError

    case = load_case(args.case)
    out = _output_folder(args)
    for note in case.output.notes:
        if "overridden by units" in note or "user units taken as" in note:
            _say(args.quiet, f"note: {note}")
    with contextlib.ExitStack() as stack:
        try:
            stack.enter_context(_locked(out))
            _check_out(out, args.force)
        except _BadInput as exc:
            raise _BadInput(f"{case.output.case}: {exc}") from None
        findings = check_problem(case.problem)
        progress = _Progress(args.quiet)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")

            def output_for(result: Any) -> Any:
                # the guardrails' findings go into summary.json of each field's results
                findings.extend(f for f in from_warnings(caught) + check_result(result) if f not in findings)
                return replace(case.output, warnings=tuple(f.to_dict() for f in findings))

            try:
                outcome = _streamed_run(args, case, out, progress, output_for)
            except ProblemTooLargeError as exc:
                raise _BadInput(
                    f"{case.output.case}: {exc} (case keys: [wave] frequency_hz, [solver] tolerance)"
                ) from None
            except SectionwaveError as exc:
                raise _BadInput(f"{case.output.case}: {exc}") from None
            finally:
                progress.close()
    said = {f.message for f in findings}
    for text in dict.fromkeys([str(w.message) for w in caught if not issubclass(w.category, SectionwaveWarning)]
                              + outcome.notes):
        if text not in said:
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
    for f in findings:
        # never hidden, not even by --quiet: these say the numbers may be wrong
        print(f"sectionwave: warning [{f.code}]: {f.message}", file=sys.stderr)
    worst = max(fr.estimated_error for fr in result.frequencies)
    _say(args.quiet, f"wrote {out} ({len(result.frequencies)} frequencies, estimated error {worst:.1e})")
    if findings and not (args.accept_warnings or case.output.accept_warnings):
        print(
            f"sectionwave: finished with {len(findings)} numerical warning(s) (exit code 3); results are in "
            f"{out}; accept them with --accept-warnings or [run] accept_warnings = true",
            file=sys.stderr,
        )
        return EXIT_WARNINGS
    return EXIT_OK


def _inspect_case_file(path: Path) -> str:
    """What to say when ``inspect`` is given a case file instead of a drawing."""
    hint = ""
    with contextlib.suppress(Exception):
        import tomllib

        geometry = tomllib.loads(path.read_text(encoding="utf-8")).get("geometry", {})
        if isinstance(geometry, dict) and isinstance(geometry.get("file"), str):
            drawing = path.parent / geometry["file"]
            hint = f", or inspect its drawing: sectionwave inspect {drawing}"
    return f"{path}: is a case file, not a drawing; run it with: sectionwave run {path}{hint}"


def _streamed_run(args: argparse.Namespace, case: Any, out: Path, progress: Any, output_for: Any) -> Any:
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
        outcome = run_case(case, digest, out, options, say=lambda m: _say(args.quiet, m), progress=progress,
                           output_for=output_for)
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

    path = Path(args.drawing)
    if path.suffix.lower() == ".toml":
        raise _BadInput(_inspect_case_file(path))
    drawing = read_drawing(path, units=args.units, layers=args.layer)
    if args.units is not None:
        for note in drawing.notes:
            if "overridden by units" in note or "user units taken as" in note:
                print(f"note: {path}: {note}", file=sys.stderr)
    cleaned = clean_drawing(drawing)
    report = insp.inspection_report(drawing, cleaned)
    if args.preview is not None:
        try:
            args.preview.absolute().parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise _BadInput(f"{args.preview}: cannot create its folder ({exc.strerror}); choose another --preview") from None
        insp.write_preview_png(cleaned, args.preview)
    if args.json:
        print(json.dumps(report, indent=2, default=str))
    else:
        print(insp.format_inspection(report))
    sys.stdout.flush()
    errors = report.get("audit", {}).get("errors") or []
    if errors or not cleaned.bodies:
        first = errors[0]["message"] if errors else "no closed body found"
        print(f"sectionwave: error: {args.drawing}: {first}", file=sys.stderr)
        return EXIT_BAD_INPUT
    return EXIT_OK


def _plan(args: argparse.Namespace) -> int:
    """``sectionwave plan``: the cost plan of the first mesh of every frequency; nothing is solved."""
    from sectionwave.importers.errors import SectionwaveError

    from . import load_case
    from .run import plan_problem
    from .solve import available_memory_bytes

    case = load_case(args.case)
    try:
        plans = plan_problem(case.problem)
    except SectionwaveError as exc:
        raise _BadInput(f"{case.output.case}: {exc}") from None
    rows: list[dict[str, Any]] = []
    for freq, plan in plans:
        rows.append({
            "frequency_hz": freq,
            "unknowns": plan.unknowns,
            "methods": {c.method: {"memory_bytes": c.memory_bytes, "time_s": round(c.time_s, 3), "fits": c.fits}
                        for c in plan.costs},
            "chosen": plan.chosen,
            "reason": plan.reason,
        })
    avail = available_memory_bytes()
    if args.json:
        doc = {"schema": "sectionwave.plan/1", "case": case.output.case, "method": case.problem.solver.method,
               "available_memory_bytes": avail, "incident_waves": len(case.problem.incidents),
               "frequencies": rows}
        print(json.dumps(doc, indent=2))
    else:
        print(f"{case.output.case}: method = {case.problem.solver.method}, {len(case.problem.incidents)} incident "
              f"wave(s), {avail / 2**30:.1f} GiB available (estimates for the first mesh; refinement may add)")
        print(f"{'frequency_hz':>14} {'unknowns':>9} {'dense GiB':>10} {'dense s':>9} {'fast GiB':>9} "
              f"{'fast s':>9}  chosen")
        for r in rows:
            d, f = r["methods"]["dense"], r["methods"]["fast"]
            print(f"{r['frequency_hz']:>14.6g} {r['unknowns']:>9d} {d['memory_bytes'] / 2**30:>10.2f} "
                  f"{d['time_s']:>9.3g} {f['memory_bytes'] / 2**30:>9.2f} {f['time_s']:>9.3g}  "
                  f"{r['chosen'] or 'refused'} ({r['reason']})")
    return EXIT_BAD_INPUT if any(r["chosen"] is None for r in rows) else EXIT_OK


def _new(args: argparse.Namespace) -> int:
    from .starter import STARTER_CASE

    path: Path = args.case
    if path.suffix.lower() != ".toml":
        raise _BadInput(f"{path}: a case file ends in .toml; choose a name such as {path.with_suffix('.toml')}")
    if path.exists() and not args.force:
        raise _BadInput(f"{path}: exists; pass --force to replace it or choose another name")
    from .export.atomic import atomic_write_text

    try:
        path.absolute().parent.mkdir(parents=True, exist_ok=True)
        atomic_write_text(path, STARTER_CASE)
    except OSError as exc:
        raise _BadInput(f"{path}: cannot write ({exc.strerror}); choose another name") from None
    print(f"wrote {path}; run it with: sectionwave run {path}", file=sys.stderr)
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


def _interrupt(signum: int, frame: Any) -> None:
    raise KeyboardInterrupt


@contextlib.contextmanager
def _sigterm_as_interrupt() -> Iterator[None]:
    """SIGTERM raises KeyboardInterrupt, as Ctrl-C does (staging removed, exit 130)."""
    try:
        old: Callable[..., Any] | int | None = signal.signal(signal.SIGTERM, _interrupt)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old)


def _dispatch(args: argparse.Namespace) -> int:
    if args.command == "run":
        return _run(args)
    if args.command == "new":
        return _new(args)
    if args.command == "plan":
        return _plan(args)
    return _inspect(args)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``sectionwave`` command; returns the exit code."""
    from sectionwave.importers.errors import SectionwaveError

    args = _parser().parse_args(argv)
    level = logging.ERROR if getattr(args, "quiet", False) else logging.WARNING
    if args.verbose and not getattr(args, "quiet", False):
        level = logging.INFO
    _configure_log(level)
    started = time.perf_counter()
    try:
        with _sigterm_as_interrupt():
            return _dispatch(args)
    except (_BadInput, SectionwaveError) as exc:
        print(f"sectionwave: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print(f"sectionwave: interrupted after {time.perf_counter() - started:.0f} s; nothing was written",
              file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        # the reader of standard output went away (``sectionwave inspect ... | head``): stop quietly
        with contextlib.suppress(OSError):
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        return EXIT_OK
    except Exception as exc:  # noqa: BLE001 - the one place that maps failures to an exit code
        print(f"sectionwave: internal error: {type(exc).__name__}: {exc}", file=sys.stderr)
        return EXIT_FAILURE


if __name__ == "__main__":
    sys.exit(main())
