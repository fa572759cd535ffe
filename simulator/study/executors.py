"""Running a study: :func:`run_study` solves the chunks of a plan in this
process, on a pool of local processes or on a Dask cluster, and stops cleanly
on Ctrl-C or SIGTERM (the command line turns SIGTERM into KeyboardInterrupt).
"""

from __future__ import annotations

import multiprocessing
import os
import sys
import time
from collections.abc import Callable

import numpy as np

from ..errors import InputError, SolveError
from ..store.layout import ResultLayout, result_layout
from .plan import Chunk, StudyPlan
from .progress import Progress, StudySummary
from .run import ChunkResult, SolveSpec, init_worker, keep_model, solve_chunk, solve_chunk_task

__all__ = ["run_study"]


def _default_context():
    """Fork on Linux (workers inherit the loaded model: no start-up cost), spawn
    elsewhere (workers build the model from its text once)."""
    if sys.platform.startswith("linux"):
        return multiprocessing.get_context("fork")
    return multiprocessing.get_context("spawn")


def run_study(plan: StudyPlan, on_result: Callable[[ChunkResult], None], *,
              workers: int = 1, scheduler: str | None = None,
              skip: frozenset[int] | set[int] = frozenset(),
              layout: ResultLayout | None = None,
              progress: Progress | None = None,
              check_limits: bool = True) -> StudySummary:
    """Solve every chunk of ``plan`` not in ``skip``; hand each to ``on_result``.

    Parameters
    ----------
    plan : the study
    on_result : called in this process with each finished chunk, in the order
        chunks finish (writes to the result file)
    workers : local worker processes; 1 solves in this process [-]
    scheduler : address of a Dask scheduler (``"tcp://host:8786"``); when
        given, ``workers`` is ignored and the cluster's workers are used
    skip : chunk indices already done (a resumed study)
    layout : result layout (default: :func:`result_layout` of the model)
    progress : progress display (default: none)
    check_limits : ``False`` solves what-ifs beyond valves wide open too (the
        operating-limit checks then mark them ``valves_wide_open``) instead of
        recording them as failed

    Returns
    -------
    StudySummary
        With ``interrupted`` set when Ctrl-C or SIGTERM stopped the run;
        every chunk finished before the stop has been handed to ``on_result``.
    """
    model = plan.case.model
    layout = layout or result_layout(model)
    spec = SolveSpec(model.text, model.file, model.sha256, plan.backend, layout, check_limits)
    keep_model(model)  # inherited by forked workers
    todo = [c for c in plan.chunks if c.index not in skip]
    summary = StudySummary(plan.n_points, n_skipped=sum(c.size for c in plan.chunks
                                                          if c.index in skip))
    t0 = time.perf_counter()

    def handle(res: ChunkResult) -> None:
        on_result(res)
        summary.add(res, plan.labels)
        if progress is not None:
            progress.update(res.stop - res.start, int(np.sum(res.status > 0)))

    try:
        if scheduler:
            summary.where = f"Dask scheduler {scheduler}"
            summary.workers = _run_dask(plan, spec, todo, scheduler, handle)
        elif workers <= 1 or len(todo) <= 1:
            summary.workers = 1
            for c in todo:
                handle(solve_chunk(spec, c, plan.conditions[c.start:c.stop]))
        else:
            n = min(workers, len(todo))
            summary.workers = n
            summary.where = f"{n} local processes"
            _run_pool(plan, spec, todo, n, handle)
    except KeyboardInterrupt:
        summary.interrupted = True
    summary.seconds = time.perf_counter() - t0
    return summary


def _chunk_of(fut) -> ChunkResult:
    """The result of a chunk's future; a worker that died becomes a clear error."""
    try:
        return fut.result()
    except (KeyboardInterrupt, SolveError):
        raise
    except Exception as exc:  # noqa: BLE001 - a crashed or lost worker process
        raise SolveError(f"a worker stopped without finishing its chunk ({type(exc).__name__}: "
                         f"{exc}); the points finished so far are stored, continue with "
                         f"--resume") from exc


def _run_pool(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], n: int, handle) -> None:
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    ex = ProcessPoolExecutor(max_workers=n, mp_context=_default_context(),
                             initializer=init_worker, initargs=(spec,))
    pending = set()
    handled = set()
    try:
        for c in todo:
            pending.add(ex.submit(solve_chunk_task, spec, c, plan.conditions[c.start:c.stop]))
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                handled.add(fut)
                handle(_chunk_of(fut))
    except KeyboardInterrupt:
        # keep what is finished: let running chunks end, drop the queued ones
        ex.shutdown(wait=True, cancel_futures=True)
        for fut in pending:
            if fut not in handled and fut.done() and not fut.cancelled() \
                    and fut.exception() is None:
                handle(fut.result())
        raise
    finally:
        ex.shutdown(wait=True, cancel_futures=True)


def _software_version() -> str:
    from ..version import __version__

    return __version__


def _run_dask(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], address: str,
              handle) -> int:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise InputError("a Dask scheduler needs the 'distributed' package; install it with "
                         "pip install 'partload[cluster]'", key="--scheduler") from None
    try:
        client = Client(address, timeout=20, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address!r}: {exc}",
                         key="--scheduler") from None
    futures = []
    try:
        from ..version import __version__

        versions = client.run(_software_version)
        other = {w: v for w, v in versions.items() if v != __version__}
        if other:
            w, v = next(iter(other.items()))
            raise InputError(f"Dask worker {w} runs partload {v}, this is {__version__}; "
                             f"install the same version on every worker", key="--scheduler")
        n_workers = len(versions) or 1
        spec_f = client.scatter(spec, broadcast=True, hash=False)
        for c in todo:
            futures.append(client.submit(solve_chunk_task, spec_f, c,
                                         plan.conditions[c.start:c.stop], pure=False,
                                         key=f"partload-chunk-{c.index}-{os.getpid()}-"
                                             f"{time.time_ns()}"))
        for fut in as_completed(futures, loop=client.loop):
            handle(_chunk_of(fut))
        return n_workers
    except KeyboardInterrupt:
        client.cancel(futures)
        raise
    finally:
        client.close()
