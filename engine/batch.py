"""Run a case into a results folder: streamed to disk, resumable, stoppable, on a cluster.

Glossary
--------
streamed run
    Every frequency's solution is stored in the sweep folder (see
    ``export.partial``) as soon as it is solved; the results folder is
    written from the stored solutions at the end, by the usual writer, and
    appears at once (staged, then renamed). The sweep folder is then removed.
resume
    ``--resume`` keeps the solutions in the sweep folder of the same case
    (same case hash, same program version), solves only the missing
    frequencies, and writes the same files an uninterrupted run writes (the
    CSV tables byte for byte). A changed case is refused in one line.
stop
    SIGINT (Ctrl-C) or SIGTERM finish the frequency under way, keep it, and
    stop: the sweep folder holds what was solved and ``--resume`` continues.
    A second Ctrl-C stops at once (the frequency under way is lost).
"""

from __future__ import annotations

import contextlib
import json
import signal
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import tomllib
from sectionwave.importers.errors import SectionwaveError

from .adaptive_frequency import AdaptiveResult, adaptive_sweep
from .case import Case
from .export.options import OutputOptions
from .export.partial import SweepFolder, SweepMismatchError, case_hash, sweep_folder_for
from .results import FrequencySolution, RunResult
from .sweep import Executor, InProcess, StopRequest, SweepOutcome, solve_sweep

__all__ = ["BatchError", "BatchOptions", "BatchOutcome", "case_digest", "run_case", "stop_on_signals"]


class BatchError(SectionwaveError):
    """A run cannot start as asked (a sweep folder in the way, a changed case on resume)."""


@dataclass(frozen=True)
class BatchOptions:
    """How to run: resume, replace, convention, and where to solve.

    ``workers`` starts a local cluster; ``scheduler`` / ``scheduler_file``
    use an existing one; none of them solves in this process.
    """

    resume: bool = False
    force: bool = False
    convention: Any = None
    workers: int | None = None
    scheduler: str | None = None
    scheduler_file: str | None = None

    @property
    def distributed(self) -> bool:
        """True when frequencies are solved on a dask cluster."""
        return self.workers is not None or self.scheduler is not None or self.scheduler_file is not None


@dataclass
class BatchOutcome:
    """What a run did: the results (None when stopped), the sweep, the folders."""

    result: RunResult | None
    sweep: SweepOutcome
    out: Path
    sweep_folder: Path
    executor: str
    notes: list[str] = field(default_factory=list)
    fit: AdaptiveResult | None = None
    fields: dict[str, _FieldRun] = field(default_factory=dict)

    @property
    def stopped(self) -> bool:
        """True when the run stopped before every frequency was solved."""
        return self.result is None


def case_digest(case_path: str | Path) -> str:
    """The case hash: the case file and every file it reads (drawing, probe list)."""
    path = Path(case_path)
    data = path.read_bytes()
    base = path.resolve().parent
    files: list[Path] = []
    with contextlib.suppress(ValueError, UnicodeDecodeError):
        doc = tomllib.loads(data.decode("utf-8"))
        for table, key in (("geometry", "file"), ("near_field", "probes_csv")):
            value = doc.get(table, {}).get(key) if isinstance(doc.get(table), dict) else None
            if isinstance(value, str):
                p = Path(value)
                files.append(p if p.is_absolute() else base / p)
    return case_hash(data, files)


@contextlib.contextmanager
def stop_on_signals(stop: StopRequest, say: Callable[[str], None]) -> Iterator[None]:
    """Within the block, SIGINT and SIGTERM set ``stop``; a second SIGINT raises KeyboardInterrupt."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def handler(signum: int, frame: Any) -> None:
        name = signal.Signals(signum).name
        if stop.requested and signum == signal.SIGINT:
            raise KeyboardInterrupt
        stop.set(name)
        say(f"{name}: stopping after the frequency under way (Ctrl-C again to stop at once)")

    previous = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM)}
    for s in previous:
        signal.signal(s, handler)
    try:
        yield
    finally:
        for s, h in previous.items():
            signal.signal(s, h)


def _prepare_folders(root: SweepFolder, folders: dict[str, SweepFolder], digest: str, version: str,
                     options: BatchOptions, frequencies: list[float]) -> dict[str, dict[float, FrequencySolution]]:
    """Check or start the sweep folder of each field; the solutions a resume keeps."""
    if root.folder.exists() and not options.resume:
        if not options.force:
            kept = sum(len(f.frequencies()) for f in folders.values() if f.exists)
            raise BatchError(
                f"{root.folder}: an interrupted run left {kept} solved frequencies here; "
                "pass --resume to finish it, or --force to start over"
            )
        root.remove()
    if options.resume and root.folder.exists() and not any(f.exists for f in folders.values()):
        raise BatchError(
            f"{root.folder}: not the sweep folder of this case (its fields changed?); "
            "run without --resume (with --force) to start over"
        )
    done: dict[str, dict[float, FrequencySolution]] = {}
    for name, folder in folders.items():
        if options.resume and folder.exists:
            try:
                folder.check(digest, version)
            except SweepMismatchError as exc:
                raise BatchError(str(exc)) from None
            done[name] = folder.load()
        else:
            folder.start(digest, version, frequencies, field=name)
            done[name] = {}
    return done


@contextlib.contextmanager
def _executor(options: BatchOptions) -> Iterator[Executor | None]:
    if not options.distributed:
        yield None
        return
    from .cluster import open_executor

    with open_executor(workers=options.workers, scheduler=options.scheduler,
                       scheduler_file=options.scheduler_file) as ex:
        yield ex


def run_case(
    case: Case,
    digest: str,
    out: str | Path,
    options: BatchOptions,
    *,
    say: Callable[[str], None] = lambda _msg: None,
    progress: Callable[[str], None] | None = None,
    output_for: Callable[[RunResult], OutputOptions] | None = None,
) -> BatchOutcome:
    """Solve ``case`` frequency by frequency, storing each, and write the results folder.

    Parameters
    ----------
    case
        The loaded case.
    digest
        Its hash (:func:`case_digest`), checked on resume.
    out
        The results folder.
    options
        Resume, force, convention and where to solve.
    say
        Receives one-line notes for the user (stop requests).
    progress
        Receives a line per solved frequency.
    output_for
        The output options for one field's assembled result (default the
        case's own): how the face adds the numerical warnings it found.

    Returns
    -------
    BatchOutcome
        ``result`` is None when a stop request ended the run early.
    """
    from . import __version__

    start = time.perf_counter()
    fields = case.fields or (case.problem.field,)
    root = SweepFolder(sweep_folder_for(out))
    folders: dict[str, SweepFolder] = {f: SweepFolder(root.folder / f) if len(fields) > 1 else root for f in fields}
    done = _prepare_folders(root, folders, digest, __version__, options,
                            [float(f) for f in case.problem.frequencies_hz])
    stop = StopRequest()
    runs: dict[str, _FieldRun] = {}
    with stop_on_signals(stop, say), _executor(options) as ex:
        description = ex.description if ex is not None else "in-process"
        for name in fields:
            one = case if name == case.problem.field else replace(case, problem=replace(case.problem, field=name))
            label = f"{name}: " if len(fields) > 1 else ""
            runs[name] = _solve_field(one, done[name], folders[name], ex, stop, progress, label)
            if runs[name].result is None:
                break
    first = runs[fields[0]]
    outcome = BatchOutcome(None, first.sweep, Path(out), root.folder, description)
    outcome.fields = runs
    if any(r.result is None for r in runs.values()) or len(runs) < len(fields):
        return outcome
    for r in runs.values():
        assert r.result is not None
        r.result.elapsed_s = time.perf_counter() - start
    outcome.result, outcome.fit = first.result, first.fit
    _write(outcome, case, options, output_for)
    root.remove()
    return outcome


@dataclass
class _FieldRun:
    """One field's sweep: its solutions, its fit (adaptive bands) and its assembled result."""

    sweep: SweepOutcome
    fit: AdaptiveResult | None
    result: RunResult | None


def _solve_field(
    case: Case, done: dict[float, FrequencySolution], folder: SweepFolder, ex: Executor | None,
    stop: StopRequest, progress: Callable[[str], None] | None, label: str,
) -> _FieldRun:
    """Sweep one field of ``case``, storing each solution in ``folder``; result None when stopped."""
    from .run import assemble_result

    problem = case.problem
    frequencies = [float(f) for f in problem.frequencies_hz]
    count = [0]

    in_process = ex is None
    if in_process:  # lines as each frequency starts, and the engine's refinement lines
        ex = InProcess(None if progress is None else (lambda m: progress(label + m)))

    def solved(solution: FrequencySolution) -> None:
        folder.save(solution)
        count[0] += 1
        if progress is not None and not in_process:
            total = "" if case.adaptive is not None else f" ({count[0]}/{len(frequencies)})"
            progress(f"{label}solved {solution.frequency_hz:.6g} Hz{total}")

    fit = None
    if case.adaptive is None:
        sweep = solve_sweep(problem, frequencies, done=done, executor=ex, stop=stop, on_solved=solved)
    else:
        sweep, fit = _adaptive(case, done, ex, stop, solved)
    if sweep.stopped:
        return _FieldRun(sweep, fit, None)
    if fit is not None:
        problem = replace(problem, frequencies_hz=tuple(s.frequency_hz for s in fit.solutions))
        frequencies = list(problem.frequencies_hz)
    return _FieldRun(sweep, fit, assemble_result(problem, sweep.ordered(frequencies), sweep.elapsed_s))


def _adaptive(
    case: Case, done: dict[float, FrequencySolution], ex: Executor | None, stop: StopRequest,
    solved: Callable[[FrequencySolution], None],
) -> tuple[SweepOutcome, AdaptiveResult | None]:
    """Adaptive sampling of the case's band; each round's frequencies solved by ``solve_sweep``."""
    assert case.adaptive is not None
    problem = case.problem
    have = dict(done)
    total = SweepOutcome({})

    def solve(freqs: Sequence[float]) -> dict[float, FrequencySolution] | None:
        part = solve_sweep(problem, freqs, done=have, executor=ex, stop=stop, on_solved=solved)
        have.update(part.solutions)
        total.solved_now += part.solved_now
        total.kept += part.kept
        if part.stopped:
            return None
        return {f: part.solutions[f] for f in freqs}

    batch = int(getattr(ex, "workers", 1) or 1)
    fit = adaptive_sweep(case.adaptive, solve, rtol=max(10 * problem.solver.tolerance, 1e-12), batch=batch)
    if fit is None:
        total.solutions = have
        total.stopped = True
        return total, None
    total.solutions = {s.frequency_hz: s for s in fit.solutions}
    return total, fit


def _write(
    outcome: BatchOutcome, case: Case, options: BatchOptions,
    output_for: Callable[[RunResult], OutputOptions] | None = None,
) -> None:
    """The results folder from the assembled results, staged and renamed into place.

    With several fields, each field's files go to a subfolder named after
    it, and the tables of all fields are also written side by side at the top
    with a leading ``field`` column (see :func:`_merge_tables`).
    """
    from .export.atomic import atomic_write_text, staged_output_dir
    from .export.results import write_run

    convention = options.convention or case.output.time_convention
    multi = len(outcome.fields) > 1
    with staged_output_dir(outcome.out, force=options.force) as staging:
        for name, run in outcome.fields.items():
            assert run.result is not None
            folder = staging / name if multi else staging
            folder.mkdir(exist_ok=True)
            output = case.output if output_for is None else output_for(run.result)
            write_run(run.result, folder, output, convention=options.convention)
            if run.fit is not None:
                _write_fit(run.fit, run.result, folder, convention)
            _add_sweep_summary(folder / "summary.json", run, outcome.executor, atomic_write_text)
        if multi:
            _merge_tables(staging, list(outcome.fields), atomic_write_text)


def _merge_tables(staging: Path, fields: list[str], write_text: Callable[[Path, str], Any]) -> None:
    """Every CSV table of the field subfolders, once more at the top with a leading ``field`` column.

    Columns that only some fields have (the surface current of TM and TE)
    are empty in the rows of the others. The top summary.json lists the
    fields and their subfolders.
    """
    import csv
    import io

    names = sorted({p.name for f in fields for p in (staging / f).glob("*.csv") if not p.name.endswith("_steps.csv")})
    for name in names:
        comments: list[str] = []
        header: list[str] = ["field"]
        rows: list[dict[str, str]] = []
        for f in fields:
            path = staging / f / name
            if not path.exists():
                continue
            lines = path.read_text(encoding="utf-8").splitlines()
            body = [line for line in lines if not line.startswith("#")]
            comments = comments or [line for line in lines if line.startswith("#")]
            reader = csv.DictReader(body)
            header += [c for c in reader.fieldnames or [] if c not in header]
            rows += [{"field": f, **row} for row in reader]
        buf = io.StringIO()
        buf.write("".join(c + "\n" for c in comments))
        writer = csv.DictWriter(buf, header, restval="", lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
        write_text(staging / name, buf.getvalue())
    top = {"schema": "sectionwave.fields/1", "fields": fields,
           "summaries": {f: f"{f}/summary.json" for f in fields}, "files": names}
    write_text(staging / "summary.json", json.dumps(top, indent=2) + "\n")


def _write_fit(fit: AdaptiveResult, result: RunResult, staging: Path, convention: Any) -> None:
    from .export.fitted import write_fitted_sweep

    problem = result.problem
    write_fitted_sweep(
        staging / "fitted_sweep.csv", fit.fit_hz, [w.from_deg for w in problem.incidents],
        problem.far_field_deg, fit.fitted, convention=convention,
        header_comment=f"sectionwave adaptive sweep: rational (AAA) fit of the far field; time convention {convention}",
    )


def _add_sweep_summary(path: Path, run: _FieldRun, executor: str, write_text: Callable[[Path, str], Any]) -> None:
    """Add the ``sweep`` entry to summary.json: what was solved now, what was kept, where."""
    summary = json.loads(path.read_text(encoding="utf-8"))
    sweep = run.sweep
    summary["sweep"] = {
        "executor": executor,
        "solved_now": len(sweep.solved_now),
        "kept_from_earlier_run": len(sweep.kept),
        "solved_now_hz": sorted(sweep.solved_now),
    }
    fit = run.fit
    if fit is not None:
        summary["files"] = [*summary.get("files", []), "fitted_sweep.csv"]
        summary["sweep"]["adaptive"] = {
            "solves": len(fit.solutions),
            "converged": fit.converged,
            "leave_one_out_db_max": fit.leave_one_out_db,
            "fit_points": int(fit.fit_hz.size),
            "prediction_db": [{"frequency_hz": f, "error_db": e} for f, e in fit.history],
            "resonances": [{"frequency_hz": r.frequency_hz, "width_hz": r.width_hz} for r in fit.resonances],
        }
    write_text(path, json.dumps(summary, indent=2, allow_nan=False) + "\n")
