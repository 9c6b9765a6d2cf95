"""Sweeps on dask.distributed: the same files as in-process, a dead worker's task moves, no process left.

The reference is an in-process run with one BLAS, OpenMP and numba thread,
the setting of every worker (``cluster.THREAD_VARIABLES``): a frequency's
solution then does not depend on where it was solved (exact identity,
checked byte for byte on the CSV tables).
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import psutil
import pytest
from sectionwave.engine.cluster import THREAD_VARIABLES
from sectionwave.engine.export.partial import sweep_folder_for

from .test_sweeps import _case, _same_tables

ENV = {**os.environ, **THREAD_VARIABLES}


def _start(case: Path, out: Path, *extra: str, session: bool = False) -> subprocess.Popen[str]:
    cmd = [sys.executable, "-m", "sectionwave.engine.cli", "run", str(case), "--out", str(out), *extra]
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=ENV,
                            start_new_session=session)


def _descendants(pid: int) -> set[int]:
    try:
        return {c.pid for c in psutil.Process(pid).children(recursive=True)}
    except psutil.NoSuchProcess:
        return set()


def _alive(pids: set[int]) -> list[int]:
    out = []
    for pid in pids:
        try:
            if psutil.Process(pid).status() != psutil.STATUS_ZOMBIE:
                out.append(pid)
        except psutil.NoSuchProcess:
            continue
    return out


def _watch(proc: subprocess.Popen[str], out: Path | None = None, solved: int = 0,
           timeout_s: float = 240) -> set[int]:
    """Every descendant seen until ``solved`` frequencies are stored (or the run ends)."""
    seen: set[int] = set()
    folder = sweep_folder_for(out) if out is not None else None
    end = time.monotonic() + timeout_s
    while proc.poll() is None and time.monotonic() < end:
        seen |= _descendants(proc.pid)
        if folder is not None and solved and len(list(folder.glob("*Hz.pickle"))) >= solved:
            break
        time.sleep(0.02)
    return seen


def _gone(pids: set[int], timeout_s: float = 20) -> list[int]:
    end = time.monotonic() + timeout_s
    while _alive(pids) and time.monotonic() < end:
        time.sleep(0.1)
    return _alive(pids)


@pytest.fixture(scope="module")
def reference(tmp_path_factory) -> Path:
    tmp = tmp_path_factory.mktemp("reference")
    proc = _start(_case(tmp), tmp / "ref", "--quiet")
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    return tmp / "ref"


def test_two_local_workers_give_identical_files_and_leave_nothing(tmp_path, reference):
    out = tmp_path / "out"
    proc = _start(_case(tmp_path), out, "--workers", "2", "--quiet")
    seen = _watch(proc)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert len(seen) >= 2  # the two workers ran as processes of their own
    _same_tables(reference, out)
    assert not _gone(seen)


def test_a_killed_worker_has_its_task_moved(tmp_path, reference):
    out = tmp_path / "out"
    proc = _start(_case(tmp_path), out, "--workers", "2")
    seen = _watch(proc, out, solved=1)
    workers = [p for p in psutil.Process(proc.pid).children() if "spawn_main" in " ".join(p.cmdline())]
    assert len(workers) == 2
    workers[0].kill()
    seen |= _watch(proc)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    _same_tables(reference, out)
    assert not _gone(seen)


def test_ctrl_c_on_a_cluster_run_keeps_what_was_solved_and_leaves_nothing(tmp_path, reference):
    case = _case(tmp_path)
    out = tmp_path / "out"
    proc = _start(case, out, "--workers", "2", session=True)
    seen = _watch(proc, out, solved=2)
    os.killpg(proc.pid, signal.SIGINT)  # what the terminal does: the whole process group
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "finish with --resume" in err
    assert not _gone(seen)
    proc = _start(case, out, "--workers", "2", "--resume", "--quiet")
    seen = _watch(proc)
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    _same_tables(reference, out)
    assert not _gone(seen)


def test_an_existing_cluster_from_a_scheduler_file(tmp_path, reference):
    dask = shutil.which("dask", path=str(Path(sys.executable).parent))
    if dask is None:
        pytest.skip("the dask command is not installed beside this Python")
    sched_file = tmp_path / "scheduler.json"
    started = [subprocess.Popen([dask, "scheduler", "--host", "127.0.0.1", "--port", "0",
                                 "--dashboard-address", "127.0.0.1:0", "--scheduler-file", str(sched_file)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=ENV)]
    try:
        end = time.monotonic() + 60
        while not sched_file.exists() and time.monotonic() < end:
            time.sleep(0.1)
        started.append(subprocess.Popen([dask, "worker", "--scheduler-file", str(sched_file), "--nthreads", "1",
                                         "--host", "127.0.0.1", "--dashboard-address", "127.0.0.1:0"],
                                        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=ENV))
        out = tmp_path / "out"
        proc = _start(_case(tmp_path), out, "--scheduler-file", str(sched_file), "--quiet")
        _, err = proc.communicate(timeout=300)
        assert proc.returncode == 0, err
        _same_tables(reference, out)
        # the cluster is not ours: it is still running
        assert all(p.poll() is None for p in started)
    finally:
        for p in reversed(started):
            p.terminate()
            try:
                p.wait(timeout=30)
            except subprocess.TimeoutExpired:
                p.kill()
