"""Where worker processes come from: the number asked for, and the server they are forked from.

This module imports no numerical library, so that a command can start the server first thing,
before it loads the physics: the server's own start (an interpreter loading
``auditor.judging``, about half a second) then runs on another core while the command loads
and reads the schedule, and the pool forks its workers from a server that is ready.
"""

from __future__ import annotations

import multiprocessing
import os
import sys

__all__ = ["resolved_jobs", "start_worker_server", "worker_context"]


def resolved_jobs(jobs: int | None) -> int:
    """The number of worker processes for ``jobs``: None → every core (``os.cpu_count()``).

    Raises
    ------
    ValueError
        For a number below 1.
    """
    if jobs is None:
        return max(1, os.cpu_count() or 1)
    if isinstance(jobs, bool) or int(jobs) != jobs or jobs < 1:
        raise ValueError(f"jobs must be a whole number ≥ 1 or None (every core), got {jobs!r}")
    return int(jobs)


def worker_context():
    """Where workers start: a clean server process (``forkserver``) where the system has one,
    else fresh interpreters (``spawn``).

    The server loads ``auditor.judging`` once, so that no worker imports it again. A worker
    still runs the caller's main script again, as every worker of :mod:`multiprocessing`
    does (``"__main__"`` in the preload list asks the server to load it, but Python 3.11 to
    3.13 pass the server no path to it, so that does nothing there); for the ``auditor``
    command that script only imports ``auditor.cli``, which the server then loads as well
    (0.08 s saved in each worker, measured on the demo)."""
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        preload = ["__main__", "auditor.judging"]
        if "auditor.cli" in sys.modules:
            preload.append("auditor.cli")
        context.set_forkserver_preload(preload)
        return context
    return multiprocessing.get_context("spawn")


def start_worker_server(jobs: int | None) -> None:
    """Start the server that worker processes are forked from, without waiting for it, when
    ``jobs`` allows more than one process and the system has one (``forkserver``).

    Its start then overlaps with what the caller does next (loading the physics, reading the
    schedule); the pool, if one is started, forks its workers from it. Once running, the
    server serves every later pool of the process; a second call does nothing.

    Raises
    ------
    ValueError
        For ``jobs`` below 1 (see :func:`resolved_jobs`), before anything is started.
    """
    if resolved_jobs(jobs) > 1 and worker_context().get_start_method() == "forkserver":
        from multiprocessing import forkserver

        forkserver.ensure_running()
