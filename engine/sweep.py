"""Frequency sweeps solved one frequency at a time, in this process or elsewhere.

Glossary
--------
sweep
    The frequencies of a problem, each solved on its own by
    :func:`run.solve_frequency`; frequencies share nothing, so they may be
    solved in any order and by any process.
executor
    Where frequencies are solved: :class:`InProcess` (this process, one
    after the other) or a cluster executor (``cluster.DaskExecutor``). An
    executor yields ``(frequency_hz, FrequencySolution)`` pairs as they are
    solved, not in order.
stop request
    A :class:`StopRequest` set (by a signal handler of the caller) while a
    sweep runs; the sweep finishes the frequency under way, hands it to the
    caller and returns the frequencies solved so far.
solved callback
    ``on_solved(solution)``: called in the calling process as soon as each
    frequency is solved (the command line stores it on disk there, so an
    interrupted run loses at most the frequencies under way).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Protocol

from .problem import Problem
from .results import FrequencySolution
from .run import solve_frequency

__all__ = ["Executor", "InProcess", "StopRequest", "SweepOutcome", "solve_sweep"]


class StopRequest:
    """A flag a signal handler sets to stop a sweep after the frequency under way."""

    def __init__(self) -> None:
        self.requested = False
        self.reason = ""

    def set(self, reason: str = "stop requested") -> None:
        """Ask the sweep to stop after the frequency under way."""
        self.requested = True
        self.reason = reason


class Executor(Protocol):
    """Solves frequencies of a problem and yields each solution as soon as it is ready."""

    #: Short description for reports ("in-process", "dask, 2 workers").
    description: str

    def solve(
        self, problem: Problem, frequencies_hz: Sequence[float], stop: StopRequest
    ) -> Iterator[FrequencySolution]:
        """Yield the solutions of ``frequencies_hz`` in any order.

        Once ``stop`` is set, yield only the frequencies already under way, then return.
        """
        ...


class InProcess:
    """Solve frequencies here, one after the other (the default)."""

    description = "in-process"

    def __init__(self, progress: Callable[[str], None] | None = None) -> None:
        self.progress = progress

    def solve(
        self, problem: Problem, frequencies_hz: Sequence[float], stop: StopRequest
    ) -> Iterator[FrequencySolution]:
        """Yield the solution of each frequency in turn until ``stop`` is set.

        With ``progress``, a line as each frequency starts (with the time
        left, from the frequencies so far) and the engine's refinement lines.
        """
        start = time.perf_counter()
        total = len(frequencies_hz)
        for n, freq in enumerate(frequencies_hz):
            if stop.requested:
                return
            if self.progress is not None:
                spent = time.perf_counter() - start
                left = f" (about {spent / n * (total - n):.0f} s left)" if n else ""
                self.progress(f"frequency {n + 1}/{total}: {freq:.6g} Hz{left}")
            yield solve_frequency(problem, freq, progress=self.progress)


@dataclass
class SweepOutcome:
    """What a sweep did.

    Attributes
    ----------
    solutions
        Every solution known at the end (kept ones and new ones), keyed by frequency.
    solved_now
        Frequencies solved by this call, in the order they arrived.
    kept
        Frequencies that were handed in already solved.
    stopped
        True when a stop request ended the sweep before every frequency was solved.
    elapsed_s
        Wall time of this call.
    """

    solutions: dict[float, FrequencySolution]
    solved_now: list[float] = field(default_factory=list)
    kept: list[float] = field(default_factory=list)
    stopped: bool = False
    elapsed_s: float = 0.0

    def complete(self, frequencies_hz: Sequence[float]) -> bool:
        """True when every one of ``frequencies_hz`` is solved."""
        return all(f in self.solutions for f in frequencies_hz)

    def ordered(self, frequencies_hz: Sequence[float]) -> list[FrequencySolution]:
        """The solutions of ``frequencies_hz`` in that order."""
        return [self.solutions[f] for f in frequencies_hz]


def solve_sweep(
    problem: Problem,
    frequencies_hz: Sequence[float] | None = None,
    *,
    done: Mapping[float, FrequencySolution] | None = None,
    executor: Executor | None = None,
    stop: StopRequest | None = None,
    on_solved: Callable[[FrequencySolution], None] | None = None,
) -> SweepOutcome:
    """Solve the frequencies not in ``done``; hand each to ``on_solved`` as it arrives.

    Parameters
    ----------
    problem
        The physics problem.
    frequencies_hz
        Frequencies to have solved (default: the problem's own).
    done
        Solutions already at hand, keyed by frequency; they are not solved again.
    executor
        Where to solve (default: this process).
    stop
        Checked after every frequency; when set the sweep returns what it has.
    on_solved
        Called with every new solution in the calling process, before the next one is awaited.

    Returns
    -------
    SweepOutcome
    """
    start = time.perf_counter()
    wanted = [float(f) for f in (problem.frequencies_hz if frequencies_hz is None else frequencies_hz)]
    have = dict(done or {})
    outcome = SweepOutcome({f: have[f] for f in wanted if f in have})
    outcome.kept = [f for f in wanted if f in have]
    missing = [f for f in wanted if f not in have]
    flag = stop if stop is not None else StopRequest()
    if missing and not flag.requested:
        active: Executor = executor if executor is not None else InProcess()
        for solution in active.solve(problem, missing, flag):
            outcome.solutions[solution.frequency_hz] = solution
            outcome.solved_now.append(solution.frequency_hz)
            if on_solved is not None:
                on_solved(solution)
    outcome.stopped = not outcome.complete(wanted)
    outcome.elapsed_s = time.perf_counter() - start
    return outcome
